#!/usr/bin/env python3
"""The default ``wordspot train`` on the demo set, two code trees side by side.

Runs, round after round, ``/usr/bin/time python -m wordspot.cli train recordings/train.csv
--lexicon lexicon/bakery.txt --out M --jobs 2 -q`` with ``PYTHONPATH`` naming each tree:
the ``--before`` tree and this tree as it is (``--with-no-refit``: also this tree with
``--no-refit``, the calibration's model kept), the order turned round every other round;
prints wall and CPU seconds (user + system, the worker processes included) and the ratios
to the before run of the same round, whether the default models of the two trees are the
same array by array (mixtures, transitions, word-pair counts, the sound scorer's weights,
the calibration), and the median ratios. The machine is usually shared: the CPU ratios
measured in one round are the figure to trust, not the wall times.

    git archive COMMIT | tar -x -C ../before    # the code to compare with
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
    """(wall s, CPU s: user + system) of one training with the code of ``tree``."""
    timing = out.with_suffix(".time")
    env = dict(os.environ, PYTHONPATH=str(tree), OPENBLAS_NUM_THREADS="1")
    cmd = ["/usr/bin/time", "-f", "%e %U %S", "-o", str(timing), sys.executable, "-m", "wordspot.cli", "train",
           "recordings/train.csv", "--lexicon", "lexicon/bakery.txt", "--out", str(out), "--jobs", "2", "-q"] + extra
    done = subprocess.run(cmd, cwd=tree, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    if done.returncode != 0:
        raise SystemExit(f"the training with the code of {tree} failed (exit status {done.returncode}):\n"
                         f"{done.stderr[-3000:]}")
    wall, user, system = timing.read_text().split()[-3:]
    return float(wall), float(user) + float(system)


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
    ap.add_argument("--with-no-refit", action="store_true",
                    help="also time this tree with --no-refit (the calibration's model kept)")
    args = ap.parse_args(argv)
    runs = [("before", args.before.resolve(), []), ("now, default", REPO, [])]
    if args.with_no_refit:
        runs.append(("now, --no-refit", REPO, ["--no-refit"]))
    print("| round | code | wall s | CPU s (user + sys) | CPU ratio | wall ratio |\n| ---: | --- | ---: | ---: | ---: | ---: |")
    ratios: dict[str, list] = {}
    with tempfile.TemporaryDirectory() as tmp:
        for r in range(1, args.rounds + 1):
            # alternate which code runs first, so neither always meets the same moment of the load
            order = list(range(len(runs))) if r % 2 else list(range(len(runs)))[::-1]
            got = {}
            for k in order:
                name, tree, extra = runs[k]
                got[k] = run(tree, Path(tmp) / f"{k}-{r}.model", extra)
            base = got[0]
            for k in order:
                wall, user = got[k]
                name = runs[k][0]
                ratios.setdefault(name, []).append((user / base[1], wall / base[0]))
                print(f"| {r} | {name} | {wall:.1f} | {user:.1f} | {user / base[1]:.2f} | {wall / base[0]:.2f} |",
                      flush=True)
            differ = same_model(Path(tmp) / f"0-{r}.model", Path(tmp) / f"1-{r}.model")
            print(f"round {r}: the default models are " + ("the same" if not differ else
                                                          "different in " + ", ".join(differ)), flush=True)
    for name, got in ratios.items():
        if name != "before":
            cpu, wall = np.median([c for c, _ in got]), np.median([w for _, w in got])
            print(f"{name}: median ratio to before over {len(got)} rounds: CPU {cpu:.2f}, wall {wall:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
