"""Per-thread work arrays reused between calls (features, emission scoring)."""

from __future__ import annotations

import math
import threading

import numpy as np

__all__ = ["work_array", "MAX_BYTES"]

_POOL = threading.local()

#: Work arrays larger than this are not kept between calls (long recordings).
MAX_BYTES = 16 * 2**20


def work_array(name: str, shape: tuple[int, ...], dtype) -> np.ndarray:
    """A C-contiguous work array of ``shape``, reused between calls in the same thread.

    Contents are undefined; callers overwrite every element they read and never return
    the array. Reuse spares the page faults of a fresh large allocation on every call
    (the allocator hands such blocks back to the system when they are freed), which
    cost about as much as the arithmetic on them for a short recording.
    """
    dtype = np.dtype(dtype)
    need = math.prod(shape)
    if need * dtype.itemsize > MAX_BYTES:
        return np.empty(shape, dtype=dtype)
    key = (name, dtype.str)
    pool = getattr(_POOL, "arrays", None)
    if pool is None:
        pool = _POOL.arrays = {}
    buf = pool.get(key)
    if buf is None or buf.size < need:
        buf = pool[key] = np.empty(need, dtype=dtype)
    return buf[:need].reshape(shape)
