"""How fast the front end runs: feature extraction and audio loading against real time.

Not a test (pytest does not collect it). Goal: one minute of 16 kHz audio to 39-value features
in well under a second on one core.

Usage::

    python tests/benchmarks/bench_features.py            # one minute of audio, best of 5
    python tests/benchmarks/bench_features.py --seconds 300 --repeats 3
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import soundfile  # noqa: E402

from wordspot.audio.reading import load_audio  # noqa: E402
from wordspot.audio.features import FeatureSettings, compute_features  # noqa: E402


def best_of(repeats: int, fn) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seconds", type=float, default=60.0, help="length of the test audio (default 60)")
    parser.add_argument("--repeats", type=int, default=5, help="timing repeats; the best is reported")
    args = parser.parse_args()

    rng = np.random.default_rng(20261201)
    settings = FeatureSettings()
    n = int(args.seconds * settings.sample_rate)
    wave = (0.1 * rng.standard_normal(n)).astype(np.float32)
    compute_features(wave[: settings.sample_rate], settings)  # warm the filter-bank cache

    t_feat = best_of(args.repeats, lambda: compute_features(wave, settings))
    print(f"features: {args.seconds:g} s of audio in {t_feat * 1000:.1f} ms "
          f"= {args.seconds / t_feat:.0f}x real time ({t_feat / args.seconds:.5f} of real time)")

    with tempfile.TemporaryDirectory() as tmp:
        for rate in (16000, 44100):
            path = Path(tmp) / f"take-{rate}.wav"
            soundfile.write(path, rng.uniform(-0.3, 0.3, int(args.seconds * rate)), rate, subtype="PCM_16")
            t_load = best_of(args.repeats, lambda: load_audio(path, sample_rate=settings.sample_rate))
            print(f"load {rate} Hz WAV -> 16 kHz: {t_load * 1000:.1f} ms = {args.seconds / t_load:.0f}x real time")


if __name__ == "__main__":
    main()
