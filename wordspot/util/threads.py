"""One BLAS thread for wordspot's own work.

numpy's matrix products (Gaussian scoring, the state scorer's layers, the training
statistics) call a BLAS library that starts one thread per core by default. wordspot's
products are small (a few hundred frames against a few thousand Gaussians) and it already
runs its own parallel work (decoding threads, training worker processes), so those extra
threads mostly wait for each other, and on a busy machine they spin. Measured on the 2-core
development machine with other work running (2026-12-03): `wordspot evaluate` of the 125
demo phrase files took 12.5 s of wall time with OpenBLAS's default two threads against 4.7 s
with one (10.5 against 4.0 s of CPU), the same words; the default `wordspot train` on the
demo set 245 against 146 s, the same model file but its time stamps
(docs/experiments/2026-12-03-training-time.md). joblib's worker processes already get one
thread each (joblib's own limit: cores divided by workers).

:func:`one_blas_thread` limits the BLAS libraries numpy loaded to one thread for the duration
of a ``with`` block, through threadpoolctl (which scikit-learn, and so librosa, already
installs). The command line runs every command inside it; the Python functions of
:mod:`wordspot.api` do too, and put the caller's setting back when they return.
"""

from __future__ import annotations

import functools
from typing import Callable, TypeVar

__all__ = ["one_blas_thread", "with_one_blas_thread"]

F = TypeVar("F", bound=Callable)


def one_blas_thread():
    """A context manager: BLAS libraries use one thread inside it (the old limit after it).

    threadpoolctl limits the libraries loaded when the block starts. scipy brings its own
    copy of OpenBLAS, loaded on scipy's first use of linear algebra, which would otherwise
    keep one thread per core inside the block: its products' last bits then depend on the
    number of cores (an OpenBLAS matrix product split over threads adds in another order),
    and so did a model trained from scratch. So that copy is loaded first.
    """
    import scipy.linalg  # noqa: F401  (loads scipy's BLAS, so that the limit covers it)
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=1, user_api="blas")


def with_one_blas_thread(func: F) -> F:
    """``func`` run inside :func:`one_blas_thread`."""

    @functools.wraps(func)
    def run(*args, **kwargs):
        with one_blas_thread():
            return func(*args, **kwargs)

    return run  # type: ignore[return-value]
