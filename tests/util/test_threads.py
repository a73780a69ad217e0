"""wordspot's own work runs with one BLAS thread, and the caller's setting comes back after.

The thread counts are read with threadpoolctl's ``threadpool_info`` (the library that
scikit-learn uses for the same purpose), not with wordspot's own code.
"""

from __future__ import annotations

import numpy as np
import pytest
from threadpoolctl import threadpool_info, threadpool_limits

from wordspot import cli
from wordspot.util.threads import one_blas_thread, with_one_blas_thread


def _blas_threads() -> list[int]:
    np.ones((2, 2)) @ np.ones((2, 2))  # numpy's BLAS is loaded by now
    return [i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"]


@pytest.fixture
def two_blas_threads():
    """Two BLAS threads around the test (as OpenBLAS starts on a 2-core machine)."""
    if not _blas_threads():
        pytest.skip("numpy reports no BLAS library to threadpoolctl")
    with threadpool_limits(limits=2, user_api="blas"):
        if max(_blas_threads()) < 2:
            pytest.skip("this BLAS library cannot run two threads here")
        yield


def test_one_thread_inside_and_the_old_count_after(two_blas_threads):
    with one_blas_thread():
        assert set(_blas_threads()) == {1}
    assert max(_blas_threads()) == 2


def test_the_wrapped_function_sees_one_thread_and_its_result_passes_through(two_blas_threads):
    seen = []

    @with_one_blas_thread
    def work(x, *, y):
        seen.append(_blas_threads())
        return x + y

    assert work(2, y=3) == 5
    assert seen == [[1] * len(seen[0])]
    assert max(_blas_threads()) == 2


def test_the_python_interface_recognises_with_one_thread(two_blas_threads, monkeypatch):
    import wordspot.decoding.decoder as decoder

    seen = []
    monkeypatch.setattr(decoder, "recognize_files", lambda *a, **k: seen.append(_blas_threads()) or [])
    import wordspot.api as api

    monkeypatch.setattr(api, "_model", lambda m: m)
    assert api.recognize(object(), []) == []
    assert seen and set(seen[0]) == {1}
    assert max(_blas_threads()) == 2


def test_the_command_line_runs_a_command_with_one_thread(two_blas_threads, monkeypatch):
    import wordspot.cli.lexicon_cmd as lexicon_cmd

    seen = []
    monkeypatch.setattr(lexicon_cmd, "_run_suggest", lambda args: seen.append(_blas_threads()) or 0)
    assert cli.main(["lexicon", "suggest", "proof"]) == 0
    assert seen and set(seen[0]) == {1}
    assert max(_blas_threads()) == 2


def test_scipys_own_blas_loaded_later_is_limited_too():
    # scipy's wheels carry their own copy of OpenBLAS, loaded on scipy's first use of
    # linear algebra; threadpoolctl limits only the libraries loaded when the limit is set
    # (threadpoolctl's documentation, from memory). A fresh interpreter shows it: told to
    # start four BLAS threads, every BLAS library must still run one inside the block,
    # scipy's included, even though nothing had loaded scipy's before. (Why it matters: an
    # OpenBLAS product split over threads adds in another order, so a model trained from
    # scratch had other last bits on a 2-core machine with the default thread count than
    # with one; seen 2026-12-04, docs/experiments/2026-12-04-prior-of-unrecorded-words.md.)
    import json
    import os
    import subprocess
    import sys

    code = (
        "import json, numpy\n"
        "from wordspot.util.threads import one_blas_thread\n"
        "from threadpoolctl import threadpool_info\n"
        "with one_blas_thread():\n"
        "    import scipy.linalg\n"
        "    scipy.linalg.blas.dgemm(1.0, numpy.ones((2, 2)), numpy.ones((2, 2)))\n"
        "    print(json.dumps([(i['filepath'], i['num_threads']) for i in threadpool_info()\n"
        "                      if i['user_api'] == 'blas']))\n"
    )
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "4"}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    libraries = json.loads(out.stdout.strip().splitlines()[-1])
    if len(libraries) < 2:
        pytest.skip("scipy shares numpy's BLAS library here")
    assert {n for _, n in libraries} == {1}, libraries
