"""Cold start: how long one ``wordspot recognize --model M file`` takes as a whole process.

Not a test (pytest does not collect it). Goal: at most 1.0 s for one file on the idle
2-core machine, so that a script calling wordspot once per spoken command does not wait
seconds each time. Also times ``wordspot --help``.

Each measurement runs a fresh interpreter the way the ``wordspot`` command does (import
``wordspot.cli``, call ``main``), after one untimed run that fills numba's on-disk cache;
the median of ``--runs`` runs is reported, with the fastest and slowest, in wall-clock
time and in CPU time (user + system; start-up is one thread, so on an idle machine the two
agree, while on a busy one the CPU time still shows what the process itself costs). With
``--compare-tree DIR`` (an older checkout of the source, e.g. made with ``git archive``)
the same commands run from that tree too, alternating with this one, and the ratio of the
medians is printed, so machine load affects both alike.

Usage::

    python tests/benchmarks/bench_cold_start.py                  # trains a small model first (~15 s)
    python tests/benchmarks/bench_cold_start.py --model demo.model --runs 15
    git archive 08d144e | tar -x -C /tmp/old && python tests/benchmarks/bench_cold_start.py --compare-tree /tmp/old
"""

from __future__ import annotations

import argparse
import csv
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
AUDIO = REPO / "recordings" / "audio" / "test" / "flite-rms" / "mixer-t2.flac"
GOAL_SECONDS = 1.0
_ENTRY = "import sys; from wordspot.cli import main; sys.exit(main())"  # what the console script runs


def _command(tree: Path, argv: list[str]) -> tuple[list[str], dict]:
    """The command and environment that run ``tree``'s wordspot (run it with ``cwd=tree``:
    ``python -c`` puts the working folder first on the import path)."""
    env = dict(os.environ, PYTHONPATH=str(tree))
    return [sys.executable, "-c", _ENTRY, *argv], env


def _seconds(tree: Path, argv: list[str]) -> tuple[float, float]:
    """Wall-clock and CPU seconds (user + system) of one whole run."""
    cmd, env = _command(tree, argv)
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run(cmd, env=env, check=True, stdout=subprocess.DEVNULL, cwd=tree)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def small_model(folder: Path, n_utterances: int, tree: Path) -> Path:
    """Train a one-Gaussian model on every k-th demo training recording (seconds, not minutes)."""
    rows = list(csv.DictReader(open(REPO / "recordings" / "train.csv", encoding="utf-8")))
    step = max(1, len(rows) // n_utterances)
    manifest = folder / "train.csv"
    with open(manifest, "w", encoding="utf-8", newline="") as f:
        w = csv.writer(f)
        w.writerow(["path", "transcript", "speaker"])
        for r in rows[::step]:
            w.writerow([REPO / "recordings" / r["path"], r["transcript"], r["speaker"]])
    model = folder / "small.model"
    cmd, env = _command(tree, ["-q", "train", str(manifest), "--lexicon", str(REPO / "lexicon" / "bakery.txt"),
                               "--out", str(model), "--mixtures", "1", "--passes", "1", "--noise-copies", "0",
                               "--speed", "1.0", "--jobs", "2"])
    subprocess.run(cmd, env=env, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=tree)
    return model


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--model", help="model file (default: train a small one first)")
    parser.add_argument("--runs", type=int, default=9, help="timed runs per command (default 9)")
    parser.add_argument("--train-utterances", type=int, default=120, help="recordings for the small model")
    parser.add_argument("--compare-tree", type=Path, help="another source tree to time alternately")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory() as tmp:
        trees = {"this tree": REPO}
        if args.compare_tree:
            trees["compared tree"] = args.compare_tree.resolve()
        # Trained by the compared (older) tree when there is one: newer trees read older model files.
        model = Path(args.model) if args.model else small_model(Path(tmp), args.train_utterances,
                                                                 list(trees.values())[-1])
        commands = {
            "recognize one file": ["recognize", "--model", str(model), str(AUDIO)],
            "--help": ["--help"],
        }
        for tree in trees.values():  # fill numba's on-disk cache and the OS file cache
            for argv in commands.values():
                _seconds(tree, argv)
        times = {(t, c): [] for t in trees for c in commands}
        for _ in range(args.runs):
            for c, argv in commands.items():
                for t, tree in trees.items():  # alternating: load changes hit every tree alike
                    times[(t, c)].append(_seconds(tree, argv))

    load = os.getloadavg()[0]
    print(f"whole-process time, {args.runs} runs each (load average {load:.1f} on {os.cpu_count()} cores):")
    med = {}
    for (t, c), v in times.items():
        wall, cpu = [x[0] for x in v], [x[1] for x in v]
        med[(t, c)] = statistics.median(wall), statistics.median(cpu)
        print(f"  {t:14s} {c:20s} wall median {med[(t, c)][0]:.3f} s (fastest {min(wall):.3f}, slowest "
              f"{max(wall):.3f}); CPU median {med[(t, c)][1]:.3f} s")
    if args.compare_tree:
        for c in commands:
            old, new = med[("compared tree", c)], med[("this tree", c)]
            print(f"  {c}: compared tree / this tree = {old[0] / new[0]:.2f} (wall), {old[1] / new[1]:.2f} (CPU)")
    wall, cpu = med[("this tree", "recognize one file")]
    print(f"recognize one file: wall median {wall:.3f} s, CPU median {cpu:.3f} s; goal <= {GOAL_SECONDS} s "
          f"on the idle machine: {'met' if wall <= GOAL_SECONDS else 'missed'} by wall time"
          f"{'' if load < 1.0 else ' (machine busy: judge by CPU time)'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
