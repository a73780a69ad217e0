#!/usr/bin/env python3
"""Which posterior measures the confidence calibration should use, on dev material only.

Per seed of the held-out split: the starter (``--start``, a model file with a state scorer)
is adapted on the demo training voices that are not dev voices, the held-out share left
out (as ``wordspot train`` does; the adapted model keeps the starter's state scorer), the
calibration examples are gathered on the held-out takes once
(:func:`wordspot.evaluation.calibrate.calibration_examples`, every measure), and one
calibration per variant (a set of measures) is fitted on them. The dev sets of
``tune_filler.py`` (the dev voices' commands, their real phrases, the starter corpus's dev
voices' other talk, noise-only clips) are recognised once with no threshold; each variant's
confidences are then computed from the stored measures. Printed per variant, mean and range
over seeds:

* EER: where the miss rate of the dev commands equals the share of other-talk and
  noise-only files with a word kept, as the threshold moves (the project's definition,
  :mod:`wordspot.evaluation.detection`);
* at the default threshold: dev command WER, real phrases WER, other-talk files with a
  command, noise-only files with a command.

    python tests/benchmarks/posterior_confidence_dev.py --start /tmp/starter-with-scorer.model [--seeds 0 1 2]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402

BASE = ("acoustic_per_frame", "free_margin", "frames_per_phone", "filler_margin", "runner_up_margin",
        "next_to_filler", "phones", "phone_filler_margin")
VARIANTS = {
    "today's measures": BASE,
    "+ all four posterior": BASE + ("posterior_mean", "posterior_phone_mean", "posterior_worst_phone",
                                    "posterior_filler_margin"),
    "+ posterior_mean": BASE + ("posterior_mean",),
    "+ phone mean, worst phone": BASE + ("posterior_phone_mean", "posterior_worst_phone"),
    "+ posterior_filler_margin": BASE + ("posterior_filler_margin",),
    "+ mean, filler margin": BASE + ("posterior_mean", "posterior_filler_margin"),
}
SETS = ("words", "real phrases", "other talk", "noise only")


def operating_eer(commands, non_commands) -> float:
    """The project's equal error rate (:func:`wordspot.evaluation.detection.equal_error_rate`):
    miss rate (S + D) / N on the command files against the share of no-command files with a
    word kept, over 200 thresholds at the quantiles of the confidences.

    ``commands``: (reference, words heard, their confidences) per file; ``non_commands``:
    (words heard, confidences) per file.
    """
    from wordspot.evaluation.detection import equal_error_rate
    from wordspot.evaluation.scoring import align_words

    every = np.concatenate([c for _, _, c in commands] + [c for _, c in non_commands] + [np.zeros(1)])
    thresholds = np.unique(np.r_[0.0, np.quantile(every, np.linspace(0, 1, 200)), 1.0 + 1e-9])
    n_ref = sum(len(ref) for ref, _, _ in commands)
    miss, fa = [], []
    for t in thresholds:
        m = 0
        for ref, words, conf in commands:
            a = align_words(ref, [w for w, c in zip(words, conf) if c >= t])
            m += a.substitutions + a.deletions
        miss.append(m / n_ref)
        fa.append(np.mean([bool((c >= t).any()) for _, c in non_commands]))
    eer = equal_error_rate(miss, fa)
    return float("nan") if eer is None else eer


def tally(heard, threshold: float):
    """Per dev set, from ``heard`` = {set name: [(reference, words heard, confidences)]}.

    Returns ``(row, commands, non_commands)``: the row holds, per set, the WER (sets with
    reference words) or the share of files with a word kept (sets without), in percent,
    at ``threshold``; ``commands`` and ``non_commands`` are what :func:`operating_eer`
    takes (the "words" set, and the files with no reference words).
    """
    from wordspot.evaluation.scoring import align_words

    row, commands, non_commands = [], [], []
    for name, items in heard.items():
        files_with = errors = n_words = 0
        for ref, words, conf in items:
            if name == "words":
                commands.append((ref, words, conf))
            elif not ref:
                non_commands.append((words, conf))
            kept = [w for w, c in zip(words, conf) if c >= threshold]
            a = align_words(ref, kept)
            errors += a.substitutions + a.deletions + a.insertions
            n_words += len(ref)
            files_with += bool(kept)
        row.append(100 * errors / n_words if n_words else 100 * files_with / len(items))
    return row, commands, non_commands


def set_columns(names) -> list[str]:
    """Column headings of :func:`tally`'s row."""
    return [("command WER" if n == "words" else f"{n} WER" if n == "real phrases" else f"{n}: files with a command")
            for n in names]


def print_spread(label: str, table: dict, cols) -> None:
    """A markdown table: one row per key of ``table`` (rows of figures, one per seed),
    each column as mean (min-max) over the seeds."""
    print(f"| {label} | " + " | ".join(cols) + " |")
    print("| --- |" + " ---: |" * len(cols))
    for key, rows in table.items():
        a = np.array(rows)
        print(f"| {key} | " + " | ".join(f"{a[:, j].mean():.1f}% ({a[:, j].min():.1f}-{a[:, j].max():.1f})"
                                         for j in range(a.shape[1])) + " |")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--start", required=True, help="a starter model file with a state scorer")
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
    table = {name: [] for name in VARIANTS}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        utterances = read_manifest(write_dev_train_manifest(Path(tmp) / "dev-train.csv"))
        for seed in args.seeds:
            t0 = time.monotonic()
            rest, held = split_held_out(utterances, config.held_out_share, seed)
            model, _ = adapt(rest, lexicon, start)
            model = replace(model, scorer=start.scorer)  # the starter's network, as adapting keeps it
            ex = calibration_examples(model, held, settings=config.settings, speeds=config.speeds,
                                      jumbled=config.jumbled, seed=seed)
            if sets is None:
                sets = {k: v for k, v in dev_sets(model, 0).items() if k in SETS}
            rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0))
            heard = {name: [(ref, rec.decode(compute_features(w, model.features)).segments) for w, ref in items]
                     for name, items in sets.items()}
            for variant, names in VARIANTS.items():
                cal = fit_calibration(ex, config=config, names=names)
                cols = [MEASURE_NAMES.index(n) for n in names]
                scored = {name: [(ref, [g.word for g in segs],
                                  cal.predict(np.array([g.measures for g in segs])[:, cols]) if segs else np.zeros(0))
                                 for ref, segs in items] for name, items in heard.items()}
                row, commands, non_commands = tally(scored, DEFAULT_MIN_CONFIDENCE)
                row.insert(0, 100 * operating_eer(commands, non_commands))
                table[variant].append(row)
            print(f"seed {seed} done in {time.monotonic() - t0:.0f} s ({ex.right.size} calibration words)",
                  file=sys.stderr, flush=True)
    print(f"seeds {args.seeds}, threshold {DEFAULT_MIN_CONFIDENCE}: mean (min-max)")
    print_spread("measures", table, ["EER"] + set_columns(sets))
    return 0


if __name__ == "__main__":
    sys.exit(main())
