#!/usr/bin/env python3
"""Choose the adaptation defaults on the dev split of the demo's training voices.

The demo's training voices marked ``dev_candidate`` in ``recordings/voices.csv`` are held
out; the starter is adapted on the other voices' recordings, leaving out a few words as
well ("dev new words"), and scored on the held-out voices:

* ``known``: held-out voices saying words the adaptation data had (other voices);
* ``new``: held-out voices saying the left-out words (no recording of them at all).

Three folds leave out three different word sets; the spread over folds is printed beside
each mean. The demo's test sets are never used here.

    python tests/benchmarks/tune_adaptation.py                 # the grid below
    python tests/benchmarks/tune_adaptation.py --quick         # fewer settings
"""

from __future__ import annotations

import argparse
import itertools
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402

FOLDS = (
    ("oven", "seven", "cancel", "next", "timer"),
    ("mixer", "three", "repeat", "yes", "minutes"),
    ("start", "nine", "back", "no", "seconds"),
)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--start", default="starter")
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--tau", type=float, nargs="+", default=[3.0, 10.0, 30.0, 100.0], help="prior weights to try")
    ap.add_argument("--passes", type=int, nargs="+", default=[1, 2, 3], help="MAP passes to try")
    ap.add_argument("--transform", choices=("both", "on", "off"), default="both",
                    help="with and/or without the shared mean transform")
    ap.add_argument("--jobs", type=int, default=2)
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import AcousticModel, load_model
    from wordspot.training.adapt import AdaptationConfig, adapt_items
    from wordspot.training.data import prepare_items

    start = load_model(args.start)
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    utts = read_manifest(rec / "train.csv")
    dev = [u for u in utts if u.speaker in held]
    rest = [u for u in utts if u.speaker not in held]
    t0 = time.monotonic()
    items, _ = prepare_items(rest, lexicon, start.units, start.features, jobs=args.jobs)
    print(f"held-out voices: {', '.join(sorted(held))}; adaptation recordings {len(rest)}, dev {len(dev)}; "
          f"features {time.monotonic() - t0:.1f} s", flush=True)
    loop = DecoderSettings()
    one = DecoderSettings(single_word=True)

    def score(model, fold):
        known = [u for u in dev if not set(u.words) & set(fold)]
        new = [u for u in dev if set(u.words) & set(fold)]
        out = {}
        for name, part, mode, s in (("known", known, "loop", loop), ("new", new, "loop", loop),
                                    ("new", new, "one", one)):
            ev = evaluate_utterances(model, part, name=name, settings=s, jobs=args.jobs, quiet=True)
            out[f"{name}-{mode}"] = ev.result.wer
        return out

    def as_model(mix, fold_items):
        words = sorted({w for it in fold_items for w in it.words})
        from wordspot.language.grammar import count_bigrams

        return AcousticModel(start.features, start.units, mix, lexicon,
                             count_bigrams([it.words for it in fold_items], vocabulary=lexicon.words),
                             {"words": words})

    if args.quick:
        grid = [dict(prior_weight=t, passes=2, mean_transform=m) for t in (5.0, 20.0) for m in (True, False)]
    else:
        grid = [dict(prior_weight=t, passes=p, mean_transform=m)
                for t, p, m in itertools.product(args.tau, args.passes,
                                                 {"both": (True, False), "on": (True,), "off": (False,)}[args.transform])]
    rows = []
    base = [score(replace(start, lexicon=lexicon), fold) for fold in FOLDS]
    rows.append(("starter alone", base, 0.0))
    for g in grid:
        per_fold, secs = [], []
        for fold in FOLDS:
            fold_items = [it for it in items if not set(it.words) & set(fold)]
            t1 = time.monotonic()
            mix, _, _ = adapt_items(fold_items, start.units, start.mixtures,
                                    config=AdaptationConfig(jobs=args.jobs, **g))
            secs.append(time.monotonic() - t1)
            per_fold.append(score(as_model(mix, fold_items), fold))
        label = " ".join(f"{k}={v}" for k, v in g.items())
        rows.append((label, per_fold, float(np.mean(secs))))
        print(_line(rows[-1]), flush=True)
    print()
    print("| setting | " + " | ".join(f"{k} WER % (mean, min-max over folds)" for k in rows[0][1][0]) + " | s/fold |")
    print("| --- |" + " ---: |" * (len(rows[0][1][0]) + 1))
    for r in rows:
        print(_line(r))
    return 0


def _line(row) -> str:
    label, per_fold, secs = row
    cells = []
    for key in per_fold[0]:
        v = np.array([f[key] for f in per_fold]) * 100
        cells.append(f"{v.mean():.1f} ({v.min():.1f}-{v.max():.1f})")
    return f"| {label} | " + " | ".join(cells) + f" | {secs:.1f} |"


if __name__ == "__main__":
    sys.exit(main())
