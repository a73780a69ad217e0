#!/usr/bin/env python3
"""How well calibrated word confidences are on dev material, and what a threshold costs there.

Dev material only: the demo's training voices marked ``dev_candidate`` in
``recordings/voices.csv`` (flite-awb, espeak-en-gb-m3, espeak-en-gb-x-gbclan-f5) are held
out; the starter is adapted on the other ten voices with the default calibration (as
``wordspot train`` does), then every dev recording is recognised twice, as at training time
(:func:`wordspot.evaluation.calibrate.held_out_recognitions`): with the bakery lexicon
(command items) and with its own word removed (a stand-in for speech with no command, where
every word heard is a false accept). Printed:

* reliability tables (calibrated, and the heuristic for comparison) over the command items
  alone and over both kinds together;
* for each threshold: command WER, words falsely accepted on the stand-ins, and the sum of
  the two error counts (the default threshold is the one with the fewest).

    python tests/benchmarks/calibration_dev.py [--model DEV_MODEL] [--out dev.model]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402

THRESHOLDS = (0.0, 0.05, 0.1, 0.2, 0.3, 0.4, 0.45, 0.5, 0.55, 0.6, 0.7, 0.8, 0.9)


def _table(title, conf, right):
    from wordspot.evaluation.reliability import expected_calibration_error, reliability_table

    rows = reliability_table(conf, right)
    print(f"\n{title}: {conf.size} words, {int(right.sum())} right; expected calibration error "
          f"{100 * expected_calibration_error(rows):.1f}%")
    print("| confidence | words | mean confidence | share right |")
    print("| --- | ---: | ---: | ---: |")
    for r in rows:
        if r.words:
            print(f"| {r.low:.1f}-{r.high:.1f} | {r.words} | {r.mean_confidence:.2f} | {100 * r.share_correct:.1f}% |")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", help="a model adapted on the dev-train voices (default: adapt one now)")
    ap.add_argument("--out", help="where to keep the adapted model")
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.decoding.confidence import heuristic_confidence
    from wordspot.evaluation.calibrate import CalibrationConfig, held_out_recognitions, train_calibrated
    from wordspot.evaluation.reliability import word_hits
    from wordspot.evaluation.scoring import align_words
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model, save_model
    from wordspot.training.adapt import adapt

    held = set(dev_voices(REPO / "recordings" / "voices.csv"))
    every = read_manifest(REPO / "recordings" / "train.csv")
    dev = [u for u in every if u.speaker in held]
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    if args.model:
        model = load_model(args.model)
    else:
        start = load_model("starter")
        t0 = time.monotonic()
        model, _ = train_calibrated(lambda utts: adapt(utts, lexicon, start), [u for u in every if u.speaker not in held],
                                    config=CalibrationConfig().decided(adapting=True), report=print)
        print(f"adapted with calibration in {time.monotonic() - t0:.1f} s")
        if args.out:
            save_model(model, args.out)
    print(f"dev: {len(dev)} recordings of {', '.join(sorted(held))}; calibration {model.info.get('calibration')}")

    items = []  # (reference, words, calibrated, heuristic, command?)
    for u, whole, without in held_out_recognitions(model, dev):
        for rec, command in ((whole, True), (without, False)):
            if rec is None:
                continue
            heard = rec.segments + rec.dropped
            items.append((u.words if command else (), [s.word for s in heard], np.array([s.confidence for s in heard]),
                          np.array([heuristic_confidence(s.measures) for s in heard]), command))

    for kinds, label in (((True,), "command items"), ((True, False), "command items and stand-ins")):
        chosen = [it for it in items if it[4] in kinds]
        right = np.array([h for ref, words, *_ in chosen for h in word_hits(ref, words)], dtype=bool)
        _table(f"calibrated, {label}", np.concatenate([it[2] for it in chosen]), right)
        _table(f"heuristic, {label}", np.concatenate([it[3] for it in chosen]), right)

    n_ref = sum(len(it[0]) for it in items if it[4])
    n_standins = sum(1 for it in items if not it[4])
    print(f"\nthresholds ({n_ref} command words; {n_standins} stand-in recordings)")
    print("| threshold | command WER | S / D / I | false accepts (stand-ins with a word) | errors in all |")
    print("| ---: | ---: | ---: | ---: | ---: |")
    for t in THRESHOLDS:
        s = d = i = fa = accepting = 0
        for ref, words, conf, _, command in items:
            kept = [w for w, c in zip(words, conf) if c >= t]
            if command:
                a = align_words(ref, kept)
                s, d, i = s + a.substitutions, d + a.deletions, i + a.insertions
            else:
                fa += len(kept)
                accepting += bool(kept)
        print(f"| {t:g} | {100 * (s + d + i) / n_ref:.2f}% | {s} / {d} / {i} | {fa} ({accepting}) | {s + d + i + fa} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
