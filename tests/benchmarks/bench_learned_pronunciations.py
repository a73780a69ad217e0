#!/usr/bin/env python3
"""CPU time of training with pronunciation learning against without, side by side in one process.

One accented user (``learned_pronunciations_dev.py``'s seed 0: espeak-en-gb-m3, four takes of
every bakery word), the starter adapted as ``wordspot train`` does, learning off and on in
alternating rounds after one training that compiles every kernel; prints each round's CPU
time of the main process, the median ratio, and the learning steps' own CPU time (the
alignments of every candidate in all the run's adaptations; the model's ``info``).

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_learned_pronunciations.py --rounds 2
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(REPO))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rounds", type=int, default=2)
    args = ap.parse_args(argv)

    from learned_pronunciations_dev import user_takes
    from wordspot import api
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.adapt import AdaptationConfig
    from wordspot.training.pronunciations import LearningConfig

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    with tempfile.TemporaryDirectory(prefix="wordspot-accent-") as tmp:
        manifest, _, voice, _, _ = user_takes(lexicon, 0, Path(tmp))

        def run(on: bool):
            c0 = time.process_time()
            model = api.train(manifest, lexicon, start="starter", calibration=CalibrationConfig(seed=0),
                              config=AdaptationConfig(seed=0, pronunciations=LearningConfig(enabled=on)))
            return time.process_time() - c0, model.info.get("learning_cpu_seconds", 0.0)

        run(True)  # compiles every kernel
        ratios = []
        for r in range(args.rounds):
            order = (False, True) if r % 2 == 0 else (True, False)
            got = {on: run(on) for on in order}
            ratios.append(got[True][0] / got[False][0])
            print(f"round {r}: off {got[False][0]:.1f} s, on {got[True][0]:.1f} s (learning steps of the "
                  f"run {got[True][1]:.2f} s), ratio {ratios[-1]:.3f}", flush=True)
        print(f"{voice}: median ratio on / off {np.median(ratios):.3f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
