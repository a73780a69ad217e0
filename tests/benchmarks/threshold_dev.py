#!/usr/bin/env python3
"""The default confidence threshold on dev material, over several calibration seeds.

The starter is adapted with calibration (as ``wordspot train`` does; or, with
``--from-scratch``, a model is trained from scratch) on the demo training voices that are
not dev voices, once per seed of the held-out split; each model then
recognises the dev sets of ``tune_filler.py`` (the dev voices' commands, the same joined by
pauses of other backgrounds, and the starter corpus's dev voices saying words and
sentences with no command) with no threshold, and every threshold is applied afterwards.
Prints, per filler penalty and threshold, the mean and range over seeds of: dev command
WER, joined files exactly right, WER of the phrase stand-ins, other-talk files with a
command. The calibration is fitted with the filler penalty it is used with.

    python tests/benchmarks/threshold_dev.py [--seeds 0 1 2] [--filler-penalty -80 -100]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402

THRESHOLDS = (0.0, 0.002, 0.005, 0.01, 0.015, 0.02, 0.03, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.7)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--filler-penalty", type=float, nargs="+", default=[-80.0],
                    help="filler penalties to try (each with its own calibration, as training would fit it)")
    ap.add_argument("--backwards", action="store_true", help="calibration also hears held-out takes backwards")
    ap.add_argument("--from-scratch", action="store_true",
                    help="train each model from scratch (wordspot train --from-scratch) instead of adapting the starter")
    ap.add_argument("--jumbled", type=int, default=None,
                    help="clips of jumbled held-out speech in the calibration (default: the configuration's)")
    ap.add_argument("--speeds", type=float, nargs="+", default=None,
                    help="speed factors of the calibration's held-out recordings (default: the configuration's)")
    args = ap.parse_args(argv)

    from wordspot import api
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.evaluation.scoring import align_words

    table = {(f, t): [] for f in args.filler_penalty for t in THRESHOLDS}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed, fp in [(seed, fp) for fp in args.filler_penalty for seed in args.seeds]:
            settings = DecoderSettings(min_confidence=0.0, filler_penalty=fp)
            model = api.train(manifest, REPO / "lexicon" / "bakery.txt", start=None if args.from_scratch else "starter",
                              calibration=CalibrationConfig(seed=seed, settings=settings, backwards=args.backwards,
                                                            **({"speeds": tuple(args.speeds)} if args.speeds else {}),
                                                            **({} if args.jumbled is None else {"jumbled": args.jumbled})))
            if sets is None:
                sets = dev_sets(model, 100)
            rec = build_recognizer(model, settings=settings)
            heard = {name: [(ref, [(s.word, s.confidence) for s in rec.decode(
                compute_features(wave, model.features)).segments]) for wave, ref in items]
                for name, items in sets.items()}
            for t in THRESHOLDS:
                row = []
                for name, items in heard.items():
                    right = errors = words = 0
                    for ref, hyp in items:
                        kept = [w for w, c in hyp if c >= t]
                        right += kept == ref
                        a = align_words(ref, kept)
                        errors += a.substitutions + a.deletions + a.insertions
                        words += len(ref)
                    row.append(100 * errors / words if name in ("words", "phrases", "real phrases") else
                               100 * right / len(items) if name == "joined" else 100 * (1 - right / len(items)))
                table[fp, t].append(row)
            print(f"filler {fp:g}, seed {seed} done", file=sys.stderr, flush=True)
    label = {"words": "dev command WER", "joined": "joined files exactly right", "phrases": "phrase stand-ins WER",
             "real phrases": "real phrases WER"}
    names = [label.get(name, f"{name}: files not exactly right" if name not in ("other talk", "noise only")
                       else f"{name}: files with a command") for name in sets]
    print(f"seeds {args.seeds}: mean (min-max)")
    print("| filler penalty | threshold | " + " | ".join(names) + " |")
    print("| ---: | ---: |" + " ---: |" * len(names))
    for (fp, t), rows in table.items():
        a = np.array(rows)
        print(f"| {fp:g} | {t:g} | " + " | ".join(f"{a[:, j].mean():.1f}% ({a[:, j].min():.1f}-{a[:, j].max():.1f})"
                                         for j in range(a.shape[1])) + " |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
