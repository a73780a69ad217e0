#!/usr/bin/env python3
"""The starter's own calibration with noisy copies and joined phrases, on dev material.

Per seed of the starter calibration (``StarterCalibrationConfig.seed``: which vocabularies
are drawn), the examples of every kind are gathered once on the starter corpus's dev split
(as ``recordings/build_starters.py`` does, plus ``--noisy`` noisy copies of every command
recording and ``--phrases`` phrases per vocabulary), and one calibration is fitted per
variant on its kinds. The shipped starter (not adapted) then recognises the dev sets of
``tune_filler.py`` with the bakery words once (the demo's dev voices: commands, joined,
phrase stand-ins, real phrases, commands in babble and fan noise at 20 and 10 dB; the
starter corpus's dev voices' other talk; noise-only clips), and each variant's confidences
are computed from the stored measures. The tables are those of ``threshold_dev.py
--variants``.

Caveat: the starter calibration is fitted on the starter corpus's dev split, whose
recordings without the bakery words are also the "other talk" dev set, so the other-talk
figures are not on unseen material (the variants share that bias; compare them with each
other, not with the adapted model's).

    python tests/benchmarks/starter_calibration_dev.py [--seeds 0 1 2] [--rate 16000]

``--no-command`` compares instead clips of impacts (``--impacts`` per vocabulary) and more
one-word recordings of other words (``--more-words``) among the wrong examples, and adds the
dev sets "everyday words" and "impacts" (``dev_no_command.py``)::

    python tests/benchmarks/starter_calibration_dev.py --no-command --seeds 0 1 2

``--models`` scores other starter files instead of the shipped one (candidate scorers, e.g.
built with ``build_starters.py --scorer-only --out DIR``), each under its own label; every
model recognises the same dev sets and gathers its own calibration examples (the state
scorer's posterior measures differ), and the rows are "LABEL / variant"::

    python tests/benchmarks/starter_calibration_dev.py --no-command --seeds 0 \
        --models today=wordspot/starters/starter-16k.model impacts0.1=/tmp/i10/starter.model

``--caps`` compares the caps on measures whose weight opposes their meaning
(``CalibrationConfig.cap_quantile``): the examples are gathered exactly as the build does
(``StarterCalibrationConfig(seed=...)``, no noisy copies or phrases), with the dev sets of
``--no-command`` too, and fitted with no cap (as the shipped starters were), at 0.95 and at
0.9. ``--rate 8000`` scores the shipped 8 kHz starter (the dev sets resampled to 8 kHz)::

    python tests/benchmarks/starter_calibration_dev.py --caps --seeds 0 1 2 --rate 8000

``--per-seed`` prints the tables of every calibration seed alone after those over the seeds.

The other tables fit every variant with the default cap (``DEFAULT_CAP_QUANTILE``), so
their "as shipped (before)" names the kinds of example, not the cap.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from threshold_dev import NOISY, PHRASE, VariantTables, decode_sets  # noqa: E402
from tune_filler import dev_sets  # noqa: E402

BASE = ("held-out", "held-out, own words removed", "jumbled", "noise only")
VARIANTS = {
    "as shipped (before)": BASE,
    "+ noisy copies": BASE + NOISY[:1],
    "+ phrases": BASE + PHRASE[:1],
    "+ noisy + phrases": BASE + NOISY[:1] + PHRASE[:1],
}

#: With ``--no-command``: impacts and more one-word recordings of other words (no noisy copies or phrases).
NO_COMMAND_VARIANTS = {
    "as shipped (before)": BASE,
    "+ impacts": BASE + ("impacts",),
    "+ more words alone": BASE + ("other word alone",),
    "+ impacts + more words alone": BASE + ("impacts", "other word alone"),
}

#: With ``--caps``: the cap quantile of each variant, all fitted on the build's kinds of example.
CAP_VARIANTS = {"no cap (as shipped)": None, "cap 0.95": 0.95, "cap 0.9": 0.9}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--noisy", type=int, default=1, help="noisy copies of every command recording")
    ap.add_argument("--phrases", type=int, default=20, help="joined phrases per vocabulary")
    ap.add_argument("--joined", type=int, default=100)
    ap.add_argument("--show", type=float, nargs="+", default=[0.0, 0.02, 0.05, 0.1, 0.2])
    ap.add_argument("--no-command", action="store_true",
                    help="compare impacts and more words alone in the calibration (--impacts, --more-words; no "
                         "noisy copies or phrases), with the dev sets 'everyday words' and 'impacts' too")
    ap.add_argument("--impacts", type=int, default=8, help="with --no-command: impact clips per vocabulary")
    ap.add_argument("--more-words", type=int, default=20,
                    help="with --no-command: more one-word recordings of other words per vocabulary")
    ap.add_argument("--models", nargs="+", default=None, metavar="LABEL=PATH",
                    help="starter model files to score, each under a label (default: the shipped 16 kHz starter)")
    ap.add_argument("--caps", action="store_true",
                    help="compare no cap, 0.95 and 0.9 on contrary measures, examples as the build gathers them")
    ap.add_argument("--rate", type=int, default=16000, choices=[16000, 8000],
                    help="the shipped starter of this rate (without --models)")
    ap.add_argument("--per-seed", action="store_true", help="also print the tables of every seed alone")
    ap.add_argument("--variants", nargs="+", default=None,
                    help="the calibration variants to fit (default: all of the chosen table's)")
    args = ap.parse_args(argv)
    if args.caps:
        args.no_command = True
    variants = CAP_VARIANTS if args.caps else NO_COMMAND_VARIANTS if args.no_command else VARIANTS
    if args.variants:
        unknown = [v for v in args.variants if v not in variants]
        if unknown:
            print(f"unknown variant(s) {unknown}; choose from {list(variants)}", file=sys.stderr)
            return 2
        variants = {v: variants[v] for v in args.variants}

    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.starters import starter_path

    named = {}
    shipped = starter_path("starter" if args.rate == 16000 else "starter-8k")
    for entry in args.models or [f"shipped={shipped}"]:
        label, _, path = entry.rpartition("=")
        if not Path(path).is_file():
            print(f"--models: {path} is no file (give LABEL=PATH of a starter model)", file=sys.stderr)
            return 2
        named[label or Path(path).stem] = Path(path)
    bakery_lex = read_lexicon(REPO / "lexicon" / "bakery.txt")
    dev = read_manifest(REPO / "recordings" / "starter" / "dev.csv")
    settings = DecoderSettings(min_confidence=0.0)
    sets = None
    rows = {(label, v): kinds for label in named for v, kinds in variants.items()}
    names = [f"{label} / {v}" for label, v in rows] if args.models else list(variants)
    tables = VariantTables(names)
    per_seed = {seed: VariantTables(names) for seed in args.seeds} if args.per_seed else {}
    for label, path in named.items():
        model = load_model(path)
        bakery = replace(model, lexicon=bakery_lex)
        if sets is None:
            sets = dev_sets(bakery, args.joined, snrs=(20.0, 10.0), no_command=args.no_command)
        t0 = time.process_time()
        heard = decode_sets(bakery, _at_rate(sets, model.features.sample_rate), settings)
        print(f"{label}: dev sets decoded, cpu {time.process_time() - t0:.0f} s: "
              + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr, flush=True)
        _score(args, model, dev, heard, variants, tables, label if args.models else None, per_seed)
    gathered = ("the build's examples" if args.caps
                else f"{args.impacts} impact clips, {args.more_words} more words alone" if args.no_command
                else f"{args.noisy} noisy copies, {args.phrases} phrases")
    print(f"starters {', '.join(f'{k} ({v})' for k, v in named.items())}; {gathered} per vocabulary; "
          f"calibration seeds {args.seeds}: mean (min-max)\n")
    tables.print(args.show)
    for seed, alone in per_seed.items():
        print(f"\n## calibration seed {seed} alone\n")
        alone.print(args.show)
    return 0


def _at_rate(sets, rate):
    """The dev sets (made at 16 kHz) at the model's sample rate."""
    from tune_filler import RATE

    from wordspot.audio.reading import _resample

    if rate == RATE:
        return sets
    return {name: [(_resample(w, RATE, rate), ref) for w, ref in items] for name, items in sets.items()}


def _score(args, model, dev, heard, variants, tables, label, per_seed) -> None:
    """Gather the calibration examples of ``model`` per seed and add each variant's figures
    (to ``per_seed[seed]`` too, when given)."""
    from wordspot.evaluation.calibrate import CalibrationConfig, fit_calibration
    from wordspot.evaluation.starter_calibration import StarterCalibrationConfig, starter_calibration_examples

    for seed in args.seeds:
        t0 = time.process_time()
        config = (StarterCalibrationConfig(seed=seed) if args.caps
                  else StarterCalibrationConfig(seed=seed, impacts=args.impacts, more_words=args.more_words)
                  if args.no_command else StarterCalibrationConfig(seed=seed, noisy=args.noisy, phrases=args.phrases))
        ex = starter_calibration_examples(model, dev, config)
        finite = np.isfinite(ex.measures).all(axis=1)
        if not finite.all():  # say where, and leave those words out of every variant
            where = {str(k): int((~finite & (ex.source == k)).sum()) for k in np.unique(ex.source[~finite])}
            print(f"seed {seed}: {int((~finite).sum())} words with a measure not finite, left out: {where}",
                  file=sys.stderr, flush=True)
            ex = ex.subset(finite)
        fit_config = CalibrationConfig(min_items=1, min_per_class=5, penalty=config.penalty)
        tables.new_seed()
        alone = per_seed.get(seed)
        for v, kinds in variants.items():
            cap = fit_config.cap_quantile
            if args.caps:
                kinds, cap = BASE, kinds
            sub = ex.subset(np.isin(ex.source, kinds))
            cal = fit_calibration(sub, config=replace(fit_config, cap_quantile=cap))
            for t in (tables, alone) if alone is not None else (tables,):
                t.add(f"{label} / {v}" if label else v, heard, cal, sub)
        print(f"{label or 'starter'} seed {seed}: {ex.right.size} words ({int(ex.right.sum())} right), cpu "
              f"{time.process_time() - t0:.0f} s", file=sys.stderr, flush=True)


if __name__ == "__main__":
    sys.exit(main())
