#!/usr/bin/env python3
"""The state scorer in the search, with its own penalties and its own calibration, on dev only.

Per seed of the held-out split: the starter (``--start``, a model file with a state scorer)
is adapted as ``wordspot train`` adapts it (mixtures and scorer) on the demo training
voices that are not dev voices, the held-out share left out. Then, for every search
setting (``--settings``: scorer weight, scale, filler phone penalty, insertion penalty),
the calibration examples are gathered on the held-out takes *with that search*
(:func:`wordspot.evaluation.calibrate.calibration_examples`), a calibration is fitted on
them (every measure), and the dev sets of ``tune_filler.py`` are recognised with that
search. Printed per setting, mean and range over seeds:

* EER: where the miss rate of the dev commands equals the share of other-talk and
  noise-only files with a word kept, as the threshold moves
  (:func:`posterior_confidence_dev.operating_eer`);
* other-talk and noise-only files with a command where the dev command miss rate is at
  most 5% (the lowest false-accept share among thresholds that keep the miss <= 5%);
* at the default threshold: dev command WER, real phrases WER, other-talk and noise-only
  files with a command.

    python tests/benchmarks/scorer_search_dev.py --settings 0,1,-100,-60 1,1,-40,-10 --seeds 0 1 2
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

from posterior_confidence_dev import operating_eer, print_spread, set_columns, tally  # noqa: E402
from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402

SETS = ("words", "real phrases", "other talk", "noise only")


def false_accepts_at_miss(commands, non_commands, most_miss: float = 0.05) -> tuple[float, float]:
    """(share of no-command files with a word kept, threshold) at the highest threshold whose
    command miss rate (S + D) / N is at most ``most_miss``; (nan, nan) if none is."""
    from wordspot.evaluation.scoring import align_words

    every = np.concatenate([c for _, _, c in commands] + [c for _, c in non_commands] + [np.zeros(1)])
    thresholds = np.unique(np.r_[0.0, np.quantile(every, np.linspace(0, 1, 400))])
    n_ref = sum(len(ref) for ref, _, _ in commands)
    best = (float("nan"), float("nan"))
    for t in thresholds:
        m = 0
        for ref, words, conf in commands:
            a = align_words(ref, [w for w, c in zip(words, conf) if c >= t])
            m += a.substitutions + a.deletions
        if m / n_ref <= most_miss:
            best = (float(np.mean([bool((c >= t).any()) for _, c in non_commands])), float(t))
    return best


def parse_setting(text: str) -> tuple[float, float, float, float]:
    w, s, f, i = (float(v) for v in text.split(","))
    return w, s, f, i


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--start", default="starter", help="a starter model with a state scorer")
    ap.add_argument("--settings", nargs="+", default=["0,1,-100,-60", "1,1,-40,-10"],
                    help="search settings: weight,scale,filler phone penalty,insertion penalty")
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    args = ap.parse_args(argv)

    from wordspot.audio.features import compute_features
    from wordspot.corpus import read_manifest
    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE, MEASURE_NAMES
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.calibrate import CalibrationConfig, calibration_examples, fit_calibration, split_held_out
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.training.adapt import adapt

    start = load_model(args.start)
    if getattr(start, "scorer", None) is None:
        print(f"{args.start} has no state scorer", file=sys.stderr)
        return 2
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    config = CalibrationConfig()
    settings = [parse_setting(t) for t in args.settings]
    table = {t: [] for t in args.settings}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        utterances = read_manifest(write_dev_train_manifest(Path(tmp) / "dev-train.csv"))
        for seed in args.seeds:
            t0 = time.monotonic()
            rest, held = split_held_out(utterances, config.held_out_share, seed)
            model, _ = adapt(rest, lexicon, start)
            if sets is None:
                sets = {k: v for k, v in dev_sets(model, 0).items() if k in SETS}
                feats = {k: [(compute_features(w, model.features), ref) for w, ref in v] for k, v in sets.items()}
            for text, (w, s, f, i) in zip(args.settings, settings):
                search = DecoderSettings(min_confidence=0.0, scorer_weight=w, scorer_scale=s,
                                         filler_penalty=f, insertion_penalty=i)
                ex = calibration_examples(model, held, settings=search, speeds=config.speeds,
                                          jumbled=config.jumbled, seed=seed)
                cal = fit_calibration(ex, config=config, names=MEASURE_NAMES)
                rec = build_recognizer(model, settings=search)
                heard = {}
                for name, items in feats.items():
                    heard[name] = []
                    for x, ref in items:
                        segs = rec.decode(x).segments
                        conf = cal.predict(np.array([g.measures for g in segs])) if segs else np.zeros(0)
                        heard[name].append((ref, [g.word for g in segs], conf))
                row, commands, non_commands = tally(heard, DEFAULT_MIN_CONFIDENCE)
                fa5, _ = false_accepts_at_miss(commands, non_commands)
                row[:0] = [100 * operating_eer(commands, non_commands), 100 * fa5]
                table[text].append(row)
                print(f"seed {seed} {text}: " + " ".join(f"{v:.1f}" for v in row), file=sys.stderr, flush=True)
            print(f"seed {seed} done in {time.monotonic() - t0:.0f} s", file=sys.stderr, flush=True)
    print(f"seeds {args.seeds}; WER and files with a command at threshold {DEFAULT_MIN_CONFIDENCE}; mean (min-max)")
    print_spread("weight, scale, filler, insertion", table,
                 ["EER", "no-command files with a command at <= 5% miss"] + set_columns(sets))
    return 0


if __name__ == "__main__":
    sys.exit(main())
