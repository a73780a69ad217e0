#!/usr/bin/env python3
"""The default ``wordspot train`` on the demo set, two code trees side by side.

Runs, round after round, ``/usr/bin/time python -m wordspot.cli train recordings/train.csv
--lexicon lexicon/bakery.txt --out M --jobs 2 -q`` with ``PYTHONPATH`` naming each tree:
the ``--before`` tree, then this tree with ``--no-refit`` (the calibration's model kept),
then this tree as it is; prints wall and user CPU seconds (user CPU includes the worker
processes) and the ratios to the before run of the same round, then whether the default
models of the two trees are the same array by array (mixtures, transitions, word-pair
counts, the sound scorer's weights, the calibration). The machine is usually shared:
the CPU ratios measured in one round are the figure to trust, not the wall times.

    git worktree add --detach ../before a933ca4
    python tests/benchmarks/train_time.py --before ../before --rounds 2
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]


def run(tree: Path, out: Path, extra: list[str]) -> tuple[float, float]:
    """(wall s, user CPU s) of one training with the code of ``tree``."""
    timing = out.with_suffix(".time")
    env = dict(os.environ, PYTHONPATH=str(tree), OPENBLAS_NUM_THREADS="1")
    cmd = ["/usr/bin/time", "-f", "%e %U", "-o", str(timing), sys.executable, "-m", "wordspot.cli", "train",
           "recordings/train.csv", "--lexicon", "lexicon/bakery.txt", "--out", str(out), "--jobs", "2", "-q"] + extra
    subprocess.run(cmd, cwd=tree, env=env, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall, user = timing.read_text().split()[-2:]
    return float(wall), float(user)


def same_model(a_path: Path, b_path: Path) -> list[str]:
    """Names of the parts in which the two model files differ (empty: the same)."""
    from wordspot.model import load_model

    a, b = load_model(a_path), load_model(b_path)
    pairs = [(f"mixtures.{n}", getattr(a.mixtures, n), getattr(b.mixtures, n)) for n in ("weights", "means", "variances")]
    pairs += [("transitions", a.units.trans, b.units.trans), ("word pairs", a.bigrams.counts, b.bigrams.counts)]
    if a.scorer is not None and b.scorer is not None:
        pairs += [(f"scorer layer {k}", x, y) for k, (x, y) in enumerate(zip(a.scorer.weights, b.scorer.weights))]
    out = [name for name, x, y in pairs if np.shape(x) != np.shape(y) or not np.array_equal(x, y)]
    if (a.calibration is None) != (b.calibration is None) or (
            a.calibration is not None and a.calibration.to_dict() != b.calibration.to_dict()):
        out.append("calibration")
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--before", type=Path, required=True, help="a tree with the code to compare with")
    ap.add_argument("--rounds", type=int, default=2)
    args = ap.parse_args(argv)
    runs = (("before", args.before.resolve(), []), ("now, --no-refit", REPO, ["--no-refit"]), ("now, default", REPO, []))
    print("| round | code | wall s | user CPU s | CPU ratio | wall ratio |\n| ---: | --- | ---: | ---: | ---: | ---: |")
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(1, args.rounds + 1):
            base = None
            for k, (name, tree, extra) in enumerate(runs):
                wall, user = run(tree, Path(tmp) / f"{k}-{r}.model", extra)
                base = base or (wall, user)
                print(f"| {r} | {name} | {wall:.1f} | {user:.1f} | {user / base[1]:.2f} | {wall / base[0]:.2f} |",
                      flush=True)
            differ = same_model(Path(tmp) / f"0-{r}.model", Path(tmp) / f"2-{r}.model")
            print(f"round {r}: the default models are " + ("the same" if not differ else
                                                          "different in " + ", ".join(differ)), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
