"""CPU time of adapting the starter with two mixes of background items, side by side.

Not a test (pytest does not collect it). The shipped 16 kHz starter is adapted (no
calibration; ``training.adapt.adapt``) on the demo training voices that are not dev
voices (``tune_filler.write_dev_train_manifest``), once with the steady kinds at share 0.1
(``STEADY_MIX``, the default) and once with impacts as half of the items at share 0.25
(``IMPACTS_HALF_MIX``), in
alternating rounds in one process; prints each round's CPU seconds (this process; ``jobs``
1) and the median of the per-round ratios. Goal of
docs/experiments/2026-12-03-impacts-in-training.md: at most about 1.1.

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_backgrounds.py [--rounds 3] [--whole]

``--whole``: the calibrated training as ``wordspot train`` runs it by default
(``train_calibrated`` around ``adapting``: an adaptation on the part not held out, the
calibration's examples, an adaptation on everything) instead of one adaptation.

``--against NAME`` times another candidate against the adaptation of before instead (:data:`CANDIDATES`):
``scorer-impacts`` (items of impacts among the scorer's tuning frames, share 0.1),
``impact-clips`` (100 clips of impacts among the calibration's examples; with ``--whole``
only), ``impacts-half-0.2`` (impacts half of the background items at share 0.2);
docs/experiments/2026-12-03-impacts-no-command.md. ``--base default`` times it against
today's default ``AdaptationConfig()`` instead, the candidate's other fields at their
defaults too (``impacts-half-0.2`` then keeps the scorer's items of impacts, route 3 on
top of the default; docs/experiments/2026-12-04-impact-background-items.md).
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from tune_filler import write_dev_train_manifest  # noqa: E402

__all__ = ["main", "CANDIDATES"]

#: Candidates timed against the adaptation of before (steady items at 0.1, no items of impacts for
#: the scorer): AdaptationConfig fields, clips of impacts in the calibration.
CANDIDATES = {
    "impacts-half-0.25": ({"background_share": 0.25, "scorer_impacts": 0.0}, 0),
    "impacts-half-0.2": ({"background_share": 0.2, "scorer_impacts": 0.0}, 0),
    "scorer-impacts": ({"scorer_impacts": 0.1}, 0),
    "impact-clips": ({"scorer_impacts": 0.0}, 100),
}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--whole", action="store_true", help="time the calibrated training, as wordspot train")
    ap.add_argument("--against", default="impacts-half-0.25", choices=sorted(CANDIDATES),
                    help="the candidate timed against the default")
    ap.add_argument("--base", default="before", choices=["before", "default"],
                    help="before: steady items at 0.1, no scorer items of impacts; default: AdaptationConfig()")
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.starters import starter_path
    from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated
    from wordspot.training.adapt import AdaptationConfig, adapt, adapting
    from wordspot.training.backgrounds import IMPACTS_HALF_MIX, STEADY_MIX

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model(starter_path("starter"))
    other, impact_clips = CANDIDATES[args.against]
    if args.base == "default":  # the candidate on top of today's defaults: only its kinds and share
        other = {k: v for k, v in other.items() if k != "scorer_impacts"}
        base_name, base = "default", AdaptationConfig()
    else:  # the adaptation before any of them
        base_name = "steady, share 0.1"
        base = AdaptationConfig(background_kinds=STEADY_MIX, background_share=0.1, scorer_impacts=0.0)
    configs = {base_name: base,
               args.against: AdaptationConfig(**{"background_kinds": IMPACTS_HALF_MIX, **other}
                                              if "background_share" in other else other)}
    calibration = {base_name: CalibrationConfig(), args.against: CalibrationConfig(impact_clips=impact_clips)}
    cpu = {k: [] for k in configs}
    with tempfile.TemporaryDirectory() as tmp:
        utterances = read_manifest(write_dev_train_manifest(Path(tmp) / "dev-train.csv"))
        adapt(utterances[:20], lexicon, start, config=AdaptationConfig(follow_passes=0, scorer=None))  # compile
        for r in range(args.rounds):
            for name, config in (configs.items() if r % 2 == 0 else reversed(configs.items())):
                t0 = time.process_time()
                if args.whole:
                    fit = adapting(start, lexicon, config=config)
                    _, summary = train_calibrated(fit, utterances, config=calibration[name].decided(adapting=True))
                else:
                    _, summary = adapt(utterances, lexicon, start, config=config)
                cpu[name].append(time.process_time() - t0)
                print(f"round {r} {name}: {cpu[name][-1]:.1f} cpu s, {summary.backgrounds} background items",
                      flush=True)
    ratios = np.array(cpu[args.against]) / np.array(cpu[base_name])
    print(f"{args.against} / {base_name}: median {np.median(ratios):.2f} (rounds {', '.join(f'{x:.2f}' for x in ratios)})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
