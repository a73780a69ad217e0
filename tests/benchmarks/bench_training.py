"""How long acoustic training takes on the full demo train set, to 8 Gaussians a state.

Not a test (pytest does not collect it). Goal: under 2 minutes with ``--jobs 2``
on the 2-core development machine, from audio files to a written model.

Usage::

    python tests/benchmarks/bench_training.py              # jobs 2, mixtures 1 2 4 8
    python tests/benchmarks/bench_training.py --jobs 1

Prints the time of each part, the average log-likelihood per frame of every pass, and
CPU time (this process plus finished worker processes) so that a slow run on a busy machine
can be told apart from slow code.
"""

from __future__ import annotations

import os

# Tiny matrix products are slower with a BLAS thread pool than without one.
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import resource  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

from wordspot.corpus import read_manifest  # noqa: E402
from wordspot.language.lexicon import read_lexicon  # noqa: E402
from wordspot.model import save_model  # noqa: E402
from wordspot.training.trainer import TrainingConfig, train  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


def cpu_seconds() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--manifest", default=str(REPO / "recordings" / "train.csv"))
    parser.add_argument("--lexicon", default=str(REPO / "lexicon" / "bakery.txt"))
    args = parser.parse_args()
    if not Path(args.manifest).exists():
        print(f"{args.manifest} not found: generate the demo recordings first", file=sys.stderr)
        return 1
    utts = read_manifest(args.manifest)
    lexicon = read_lexicon(args.lexicon)
    config = TrainingConfig(jobs=args.jobs)
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model, summary = train(utts, lexicon, config=config, report=print)
    trained = time.perf_counter() - start
    with tempfile.TemporaryDirectory() as tmp:
        save_model(model, Path(tmp) / "bench.model")
    total = time.perf_counter() - start
    print(f"utterances {summary.used}, frames {summary.n_frames}, passes {len(summary.passes)}, jobs {args.jobs}")
    print(f"training {trained:.1f} s, with saving {total:.1f} s (goal < 120 s); "
          f"CPU time {cpu_seconds():.1f} s; load average {os.getloadavg()[0]:.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
