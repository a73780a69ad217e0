"""Measuring helpers for the benchmark: machine facts, the matmul FLOP rate, profiles."""

from __future__ import annotations

import cProfile
import io
import os
import platform
import pstats
import re
import time
from pathlib import Path
from typing import Callable

import numpy as np

__all__ = ["machine_info", "matmul_flop_rate", "best_time", "profile_top", "source_name"]

#: The repository this file sits in (tests/benchmarks/ is two levels down).
REPO = Path(__file__).resolve().parents[2]


def machine_info() -> dict[str, str]:
    """The machine in neutral words ("2-core x86-64 machine"), numpy version, Python version."""
    arch = (platform.machine() or "unknown").replace("_", "-")  # x86_64 -> x86-64
    return {"machine": f"{os.cpu_count()}-core {arch} machine", "numpy": np.__version__,
            "python": platform.python_version()}


def best_time(fn: Callable[[], object], *, repeat: int = 5, min_time: float = 0.05) -> float:
    """Best wall time of one call of ``fn`` over ``repeat`` rounds (each round loops to ``min_time``)."""
    fn()
    best = float("inf")
    for _ in range(repeat):
        n, t0 = 0, time.perf_counter()
        while True:
            fn()
            n += 1
            el = time.perf_counter() - t0
            if el >= min_time:
                break
        best = min(best, el / n)
    return best


def matmul_flop_rate(m: int, k: int, n: int, dtype=np.float64, *, seed: int = 0) -> float:
    """Measured FLOP/s of ``(m, k) @ (k, n)`` in ``dtype`` (2 m k n FLOPs a product)."""
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((m, k)).astype(dtype)
    b = rng.standard_normal((k, n)).astype(dtype)
    return 2.0 * m * k * n / best_time(lambda: a @ b)


def profile_top(fn: Callable[[], object], *, top: int = 12) -> list[tuple[str, int, float, float]]:
    """Run ``fn`` under cProfile; the ``top`` functions by own time.

    Returns
    -------
    list of (function, calls, own seconds, cumulative seconds)
    """
    prof = cProfile.Profile()
    prof.enable()
    fn()
    prof.disable()
    stats = pstats.Stats(prof, stream=io.StringIO())
    rows = []
    for (filename, line, name), (cc, nc, tt, ct, _callers) in stats.stats.items():
        rows.append((f"{source_name(filename)}:{line}({name})", int(nc), float(tt), float(ct)))
    rows.sort(key=lambda r: -r[2])
    return rows[:top]


def source_name(filename: str, repo: Path = REPO) -> str:
    """A profiled file as it may be printed: relative to the repository, to the installed
    packages, or the standard library's, never an absolute path of this machine."""
    if not os.path.isabs(filename):
        return filename  # "~" (built-ins) and the like
    path = Path(os.path.abspath(filename))
    try:
        return path.relative_to(Path(os.path.abspath(repo))).as_posix()
    except ValueError:
        pass
    text = path.as_posix()
    m = re.search(r"/(?:site-packages|dist-packages)/(.+)$", text) or re.search(r"/lib/python[\d.]*/(.+)$", text)
    return m.group(1) if m else path.name
