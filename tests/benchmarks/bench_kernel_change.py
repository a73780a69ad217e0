"""The decode kernel of this tree against the one of an earlier commit, side by side.

Not a test (pytest does not collect it). For a change to the compiled search that must
not change its results (a rewrite for speed or for reading), this decodes every demo test
file (``recordings/test*.csv`` and ``new-words.csv``) in both modes (word loop and one
word per file) with both kernels in one process, on the same emission scores, and

- checks that every returned value is identical (status, final score and link, every
  word link's integers and score: hence the same words, times and scores);
- times the two kernels alternately, file by file, in several rounds (CPU time of this
  process, one thread), and prints the ratio of their totals (median over rounds).

The earlier kernel is read with ``git show REV:wordspot/decoding/kernels.py`` and loaded
as a separate module; both are compiled before timing.

Usage::

    python tests/benchmarks/bench_kernel_change.py --model demo.model --rev 08d144e
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import importlib.util  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from dataclasses import replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

from wordspot.audio.features import file_features  # noqa: E402
from wordspot.corpus import read_manifest  # noqa: E402
from wordspot.decoding import kernels  # noqa: E402
from wordspot.decoding.decoder import DecoderSettings, build_recognizer  # noqa: E402
from wordspot.model import load_model  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
MANIFESTS = ("test.csv", "test-phrases.csv", "test-noisy.csv", "new-words.csv")


def earlier_kernels(rev: str, folder: Path):
    """The kernels module as it was at ``rev``, loaded under another name."""
    source = subprocess.run(["git", "show", f"{rev}:wordspot/decoding/kernels.py"], cwd=REPO,
                            capture_output=True, text=True, check=True).stdout
    path = folder / "earlier_decode_kernels.py"
    path.write_text(source, encoding="utf-8")
    spec = importlib.util.spec_from_file_location("earlier_decode_kernels", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # numba's cache needs the module importable by name
    spec.loader.exec_module(module)
    return module


def same(a: tuple, b: tuple) -> bool:
    return all(np.array_equal(x, y) for x, y in zip(a, b))


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--model", required=True, help="a trained model file")
    parser.add_argument("--rev", required=True, help="the git commit whose kernel to compare with")
    parser.add_argument("--rounds", type=int, default=5, help="timing rounds (default 5)")
    args = parser.parse_args()

    model = load_model(args.model)
    paths = [u.path for name in MANIFESTS for u in read_manifest(REPO / "recordings" / name)]
    with tempfile.TemporaryDirectory() as tmp:
        old = earlier_kernels(args.rev, Path(tmp))
        base = build_recognizer(model)
        feats = [file_features(p, model.features) for p in paths]
        lls = [base.emissions(f) for f in feats]
        print(f"{len(paths)} demo test files, {sum(f.shape[0] for f in feats)} frames; kernels of this tree "
              f"and of {args.rev}")
        ok = True
        for mode, single in (("word loop", False), ("single word", True)):
            rec = build_recognizer(model, settings=replace(DecoderSettings(), single_word=single))
            calls = [rec.kernel_arguments(ll) for ll in lls]
            differ = [p for p, a in zip(paths, calls) if not same(kernels.decode(*a), old.decode(*a))]
            ok = ok and not differ
            totals = {"this tree": [], args.rev: []}
            for r in range(args.rounds):
                spent = {"this tree": 0.0, args.rev: 0.0}
                for i, a in enumerate(calls):  # alternating, the order swapped every other file
                    order = (("this tree", kernels.decode), (args.rev, old.decode))
                    for name, fn in order if (i + r) % 2 == 0 else order[::-1]:
                        t = time.process_time()
                        fn(*a)
                        spent[name] += time.process_time() - t
                for name in spent:
                    totals[name].append(spent[name])
            ratios = [n / o for n, o in zip(totals["this tree"], totals[args.rev])]
            print(f"{mode}: results identical on {len(paths) - len(differ)} of {len(paths)} files")
            for p in differ[:10]:
                print(f"  differs: {p}")
            print(f"  kernel CPU time, median of {args.rounds} rounds: this tree "
                  f"{statistics.median(totals['this tree']):.3f} s, {args.rev} {statistics.median(totals[args.rev]):.3f} s;"
                  f" ratio this/earlier {statistics.median(ratios):.3f} (rounds {', '.join(f'{x:.3f}' for x in ratios)})")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
