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

``--variants`` compares calibrations fitted on different kinds of example (the held-out
recordings alone, with their noisy copies, with phrases joined from them, with
noise-only clips): per seed the starter is adapted once on the training part (as the
first training of ``wordspot train`` does; not adapted again on every recording), the
examples of every kind are gathered once (``calibration_examples`` with all of them on)
and each variant's calibration is fitted on its kinds; the dev sets (with the dev
commands in babble and fan noise at 20 and 10 dB) are recognised once and each variant's
confidences computed from the stored measures. Prints per variant and threshold the
error rates, per variant the EER, the share of no-command files with a command where at
most 5% of the dev commands are missed, and the threshold with the lowest sum of the dev
error rates (the rule of docs/experiments/2026-12-02-default-threshold.md)::

    python tests/benchmarks/threshold_dev.py --variants all --seeds 0 1 2 --filler-penalty -100
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from dataclasses import replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from tune_filler import NO_COMMAND, dev_sets, write_dev_train_manifest  # noqa: E402

THRESHOLDS = (0.0, 0.002, 0.005, 0.01, 0.015, 0.02, 0.03, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.7)

#: Calibration variants of ``--variants``: the kinds of example (``calibrate.SOURCES``) each is fitted on.
CLEAN = ("held-out", "held-out, own words removed", "jumbled")
NOISY = ("noisy", "noisy, own words removed")
PHRASE = ("phrase", "phrase, own words removed")
CLIPS = ("noise only",)
IMPACTS = ("impacts",)
VARIANTS = {
    "held-out only (before)": CLEAN,
    "+ noisy copies": CLEAN + NOISY,
    "+ phrases": CLEAN + PHRASE,
    "+ noise clips": CLEAN + CLIPS,
    "+ impact clips": CLEAN + IMPACTS,
    "+ noisy + phrases": CLEAN + NOISY + PHRASE,
    "+ noisy + phrases + clips": CLEAN + NOISY + PHRASE + CLIPS,
    "+ noisy + phrases, whole lexicon only": CLEAN + ("noisy", "phrase"),
}

#: Thresholds searched for the one matching a given share of other talk with a command.
FINE = np.unique(np.r_[0.0, np.geomspace(0.001, 0.9, 80)])


def matched(scored, target: float):
    """The row of :func:`variant_rows` (and its deletions) at the lowest threshold of
    :data:`FINE` that leaves at most ``target`` percent of other-talk files with a command."""
    talk = scored["other talk"]
    for t in FINE:
        if 100 * np.mean([bool((c >= t).any()) for _, _, c in talk]) <= target + 1e-9:
            return t, variant_rows(scored, [t])[t]
    t = FINE[-1]
    return t, variant_rows(scored, [t])[t]
#: The sets whose WER is reported (the others: files exactly right, or files with a command).
WER_SETS = ("words", "phrases", "real phrases", "noisy 20 dB", "noisy 10 dB")


def _candidates(confidences) -> np.ndarray:
    """Thresholds to try: 0 and 400 quantiles of the confidences."""
    every = np.concatenate(list(confidences) + [np.zeros(1)])
    return np.unique(np.r_[0.0, np.quantile(every, np.linspace(0, 1, 400))])


def _missed(commands, t: float) -> float:
    """The share of the command words lost (substituted or deleted) at threshold ``t``."""
    from wordspot.evaluation.scoring import align_words

    m = 0
    for ref, words, conf in commands:
        a = align_words(ref, [w for w, c in zip(words, conf) if c >= t])
        m += a.substitutions + a.deletions
    return m / sum(len(ref) for ref, _, _ in commands)


def fa_at_miss(commands, non_commands, most: float = 0.05) -> float:
    """The share of no-command files with a word kept at the highest threshold (of the
    confidences' quantiles) that misses at most ``most`` of the command words."""
    best = 1.0
    for t in _candidates([c for _, _, c in commands] + [c for _, c in non_commands]):
        if _missed(commands, t) <= most:
            best = min(best, float(np.mean([bool((c >= t).any()) for _, c in non_commands])))
    return best


def threshold_at_miss(commands, most: float) -> float:
    """The highest threshold (of the confidences' quantiles) that misses at most ``most``
    of the command words (0 when none does)."""
    best = 0.0
    for t in _candidates([c for _, _, c in commands]):
        if _missed(commands, t) <= most:
            best = max(best, float(t))
    return best


def firing(items, t: float) -> float:
    """Percent of ``(ref, words, confidences)`` no-command files with a word at ``t`` or above."""
    return 100 * float(np.mean([bool((c >= t).any()) for _, _, c in items])) if items else float("nan")


def variant_rows(scored, thresholds):
    """Per threshold, the row of figures of every set (``scored``: {set: [(ref, words, confidences)]}):
    WER for :data:`WER_SETS`, files exactly right for "joined", files not exactly right for the
    other sets with commands, files with a command for the sets without; plus the deletions of
    each WER set."""
    from wordspot.evaluation.scoring import align_words

    out = {}
    for t in thresholds:
        row, dels = [], []
        for name, items in scored.items():
            right = errors = words = deletions = 0
            for ref, hyp, conf in items:
                kept = [w for w, c in zip(hyp, conf) if c >= t]
                right += kept == ref
                a = align_words(ref, kept)
                errors += a.substitutions + a.deletions + a.insertions
                deletions += a.deletions
                words += len(ref)
            if name in WER_SETS:
                row.append(100 * errors / words)
                dels.append(deletions)
            elif name == "joined":
                row.append(100 * right / len(items))
            else:
                row.append(100 * (1 - right / len(items)))
        out[t] = (row, dels)
    return out


def rule_sum(names, row, ten_db_not_exact) -> float:
    """The sum of the dev error rates of the stated rule: dev command WER, joined files not
    exactly right, real phrases WER, 10 dB commands not exactly right, other talk with a command."""
    get = dict(zip(names, row))
    return (get["words"] + (100 - get["joined"]) + get.get("real phrases", 0.0) + ten_db_not_exact
            + get.get("other talk", 0.0))


class VariantTables:
    """The figures of every calibration variant over the seeds, and their tables."""

    LABEL = {"words": "command WER", "joined": "joined files exactly right", "phrases": "phrase stand-ins WER",
             "real phrases": "real phrases WER", "noisy 20 dB": "20 dB WER", "noisy 10 dB": "10 dB WER"}

    def __init__(self, variants):
        self.table = {(v, t): [] for v in variants for t in THRESHOLDS}
        self.dels = {(v, t): [] for v in variants for t in THRESHOLDS}
        self.summary = {v: [] for v in variants}
        self.same = {v: [] for v in variants}
        self.same_dels = {v: [] for v in variants}
        self.same_t = {v: [] for v in variants}
        self.sums = {(v, t): [] for v in variants for t in THRESHOLDS}
        self.kinds = {v: [] for v in variants}
        self.firing = {v: [] for v in variants}  # no-command files with a command by set, at 5% and 20% miss
        self.names = None
        self.target = None

    def new_seed(self) -> None:
        """The next variant added sets the share of other talk the others are matched at."""
        self.target = None

    def add(self, v, heard, cal, examples) -> None:
        """Score variant ``v``: ``heard`` = {set: [(reference, segments)]}, its calibration ``cal``
        fitted on ``examples``."""
        from posterior_confidence_dev import operating_eer

        from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE, MEASURE_NAMES

        self.names = list(heard)
        cols = [MEASURE_NAMES.index(n) for n in cal.names]
        scored = {name: [(ref, [g.word for g in segs],
                          cal.predict(np.array([g.measures for g in segs])[:, cols]) if segs else np.zeros(0))
                         for ref, segs in items] for name, items in heard.items()}
        rows = variant_rows(scored, THRESHOLDS)
        for t, (row, d) in rows.items():
            self.table[v, t].append(row)
            self.dels[v, t].append(d)
        if self.target is None:
            self.target = rows[DEFAULT_MIN_CONFIDENCE][0][self.names.index("other talk")]
        t_same, (row_same, dels_same) = matched(scored, self.target)
        by_kind = []  # the noisy sets' babble (even files) and fan (odd files) halves, at the default threshold
        for name in ("noisy 20 dB", "noisy 10 dB"):
            for parity in (0, 1):
                half = {"words": scored[name][parity::2]}
                by_kind += [variant_rows(half, [DEFAULT_MIN_CONFIDENCE])[DEFAULT_MIN_CONFIDENCE][0][0],
                            variant_rows(half, [t_same])[t_same][0][0]]
        self.kinds[v].append(by_kind)
        self.same[v].append(row_same)
        self.same_dels[v].append(dels_same)
        self.same_t[v].append(t_same)
        commands = scored["words"]
        everywhere = [x for name in ("words", "real phrases", "noisy 20 dB", "noisy 10 dB") for x in scored.get(name, [])]
        non_commands = [(w, c) for name in NO_COMMAND for _, w, c in scored.get(name, [])]
        row = []
        for most in (0.05, 0.2):
            t = threshold_at_miss(commands, most)
            row += [firing([x for name in NO_COMMAND for x in scored.get(name, [])], t)]
            row += [firing(scored.get(name, []), t) for name in NO_COMMAND]
        self.firing[v].append(row)
        sums = []
        for t in THRESHOLDS:
            ten = 100 * np.mean([[w for w, c in zip(hyp, conf) if c >= t] != ref
                                 for ref, hyp, conf in scored["noisy 10 dB"]])
            sums.append(rule_sum(self.names, rows[t][0], ten))
            self.sums[v, t].append(sums[-1])
        self.summary[v].append([100 * operating_eer(commands, non_commands), 100 * operating_eer(everywhere, non_commands),
                                100 * fa_at_miss(commands, non_commands), THRESHOLDS[int(np.argmin(sums))],
                                min(sums), int(examples.right.sum()), int(examples.right.size - examples.right.sum())])

    def print(self, show) -> None:
        names = self.names
        cols = [self.LABEL.get(n, f"{n}: files with a command") for n in names]

        def cell(a, j):
            return f"{a[:, j].mean():.1f}% ({a[:, j].min():.1f}-{a[:, j].max():.1f})"

        sets = [n for n in NO_COMMAND if n in names]
        print("no-command files with a command at the highest threshold missing at most 5% / 20% of the dev "
              "commands (every no-command set, then by set)\n")
        heads = [f"{what} at {m}" for m in ("5%", "20%") for what in ["all"] + sets]
        print("| variant | " + " | ".join(heads) + " |")
        print("| --- |" + " ---: |" * len(heads))
        for v, rows in self.firing.items():
            a = np.array(rows, dtype=float)
            keep = [j for j, n in enumerate(["all"] + list(NO_COMMAND)) if n == "all" or n in names]
            keep = keep + [j + 1 + len(NO_COMMAND) for j in keep]
            print(f"| {v} | " + " | ".join(cell(a, j) for j in keep) + " |")
        print()
        print("| variant | EER | EER, commands of every set | no-command files with a command at <= 5% miss | "
              "lowest-sum threshold | its sum | right / wrong examples |")
        print("| --- | ---: | ---: | ---: | ---: | ---: | ---: |")
        for v, rows in self.summary.items():
            a = np.array(rows, dtype=float)
            print(f"| {v} | {cell(a, 0)} | {cell(a, 1)} | {cell(a, 2)} | {', '.join(f'{x:g}' for x in a[:, 3])} | "
                  f"{a[:, 4].mean():.1f} | {a[:, 5].mean():.0f} / {a[:, 6].mean():.0f} |")
        print()
        print("| variant | threshold | " + " | ".join(cols) + " |")
        print("| --- | ---: |" + " ---: |" * len(cols))
        for (v, t), rows in self.table.items():
            if t in show:
                a = np.array(rows)
                print(f"| {v} | {t:g} | " + " | ".join(cell(a, j) for j in range(a.shape[1])) + " |")
        print()
        print("at the same share of other talk with a command as the first variant at the default threshold "
              "(lowest threshold of a fine grid with at most that share; per seed)\n")
        print("| variant | thresholds | " + " | ".join(cols) + " |")
        print("| --- | ---: |" + " ---: |" * len(cols))
        for v, rows in self.same.items():
            a = np.array(rows)
            print(f"| {v} | {', '.join(f'{x:.3g}' for x in self.same_t[v])} | "
                  + " | ".join(cell(a, j) for j in range(a.shape[1])) + " |")
        print()
        wer_names = [self.LABEL[n] for n in names if n in WER_SETS]
        print("deletions there (mean over seeds)\n")
        print("| variant | " + " | ".join(wer_names) + " |")
        print("| --- |" + " ---: |" * len(wer_names))
        for v, rows in self.same_dels.items():
            a = np.array(rows, dtype=float)
            print(f"| {v} | " + " | ".join(f"{a[:, j].mean():.1f}" for j in range(a.shape[1])) + " |")
        print()
        from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE

        heads = [f"{snr} {kind}, {where}" for snr in ("20 dB", "10 dB") for kind in ("babble", "fan")
                 for where in (f"at {DEFAULT_MIN_CONFIDENCE:g}", "at equal other talk")]
        print("WER of the commands in noise by kind (babble: even files, fan: odd files)\n")
        print("| variant | " + " | ".join(heads) + " |")
        print("| --- |" + " ---: |" * len(heads))
        for v, rows in self.kinds.items():
            a = np.array(rows)
            print(f"| {v} | " + " | ".join(cell(a, j) for j in range(a.shape[1])) + " |")
        print()
        print("the rule's sum of dev error rates (command WER, joined files not exactly right, real phrases "
              "WER, 10 dB files not exactly right, other talk with a command), mean over seeds\n")
        print("| variant | " + " | ".join(f"{t:g}" for t in THRESHOLDS) + " |")
        print("| --- |" + " ---: |" * len(THRESHOLDS))
        for v in self.summary:
            print(f"| {v} | " + " | ".join(f"{np.mean(self.sums[v, t]):.1f}" for t in THRESHOLDS) + " |")
        print()
        print("deletions (mean over seeds)\n")
        print("| variant | threshold | " + " | ".join(wer_names) + " |")
        print("| --- | ---: |" + " ---: |" * len(wer_names))
        for (v, t), rows in self.dels.items():
            if t in show:
                a = np.array(rows, dtype=float)
                print(f"| {v} | {t:g} | " + " | ".join(f"{a[:, j].mean():.1f}" for j in range(a.shape[1])) + " |")


def decode_sets(model, sets, settings, lexicon=None):
    """{set: [(reference, segments)]}: every dev file recognised once with no threshold."""
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import build_recognizer

    rec = build_recognizer(model, settings=settings, lexicon=lexicon)
    return {name: [(ref, rec.decode(compute_features(w, model.features)).segments) for w, ref in items]
            for name, items in sets.items()}


def run_variants(args) -> int:
    import time

    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings
    from wordspot.evaluation.calibrate import CalibrationConfig, calibration_examples, fit_calibration, held_out_parts
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.starters import starter_path
    from wordspot.training.adapt import AdaptationConfig, adapting

    import wordspot.training.backgrounds as backgrounds

    variants = VARIANTS if args.variants == ["all"] else {k: VARIANTS[k] for k in args.variants}
    default_kinds = backgrounds.BACKGROUND_KINDS
    fp = args.filler_penalty[0]
    settings = DecoderSettings(min_confidence=0.0, filler_penalty=fp)
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model(starter_path("starter"))
    tables = VariantTables(variants)
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        utterances = read_manifest(manifest)
        for seed in args.seeds:
            t0 = time.process_time()
            config = CalibrationConfig(seed=seed, settings=settings)
            saved = args.load / f"seed{seed}.pickle" if args.load else None
            if saved:  # the recognitions and examples of an earlier run (benchmark scratch files only)
                import pickle

                with open(saved, "rb") as fh:
                    heard, ex = pickle.load(fh)
                tables.new_seed()
                if args.match_to:  # the other-talk share of another run's first variant at the default threshold
                    tables.target = other_talk_share(args.match_to / f"seed{seed}.pickle", next(iter(variants.values())),
                                                     config)
                for v, kinds in variants.items():
                    sub = ex.subset(np.isin(ex.source, kinds))
                    tables.add(v, heard, fit_calibration(sub, config=config), sub)
                continue
            (rest, held), = held_out_parts(utterances, config)[0]
            # the adaptation's background items: AdaptationConfig.background_kinds; the calibration's
            # noise clips read the module's kinds when called
            share = {} if args.background_share is None else {"background_share": args.background_share}
            if args.background_kinds:
                share["background_kinds"] = mix_arg(args.background_kinds)
            if args.scorer_impacts is not None:
                share["scorer_impacts"] = args.scorer_impacts
            fit = adapting(start, lexicon, config=AdaptationConfig(**share), manifest=manifest)
            model, _ = fit(rest, held_out=held)
            t_adapt = time.process_time() - t0
            backgrounds.BACKGROUND_KINDS = tuple(args.clip_kinds) if args.clip_kinds else default_kinds
            ex = calibration_examples(model, held, settings=settings, speeds=config.speeds, jumbled=config.jumbled,
                                      seed=seed, noisy=args.noisy, noise_snr_db=tuple(args.snr), phrases=args.phrases,
                                      noise_clips=args.noise_clips, impact_clips=args.impact_clips)
            backgrounds.BACKGROUND_KINDS = default_kinds  # the dev sets' noise-only clips: always the package's kinds
            t1 = time.process_time()
            if sets is None:
                sets = dev_sets(model, args.joined, snrs=(20.0, 10.0), no_command=args.no_command_sets)
                if args.other_talk_every > 1:
                    sets["other talk"] = sets["other talk"][::args.other_talk_every]
                print("dev sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), file=sys.stderr)
            heard = decode_sets(model, sets, settings)
            t2 = time.process_time()
            if args.save:
                import pickle
                from types import SimpleNamespace

                args.save.mkdir(parents=True, exist_ok=True)
                light = {name: [(ref, [SimpleNamespace(word=g.word, measures=np.asarray(g.measures),
                                                         first_frame=g.first_frame, last_frame=g.last_frame) for g in segs])
                                for ref, segs in items] for name, items in heard.items()}
                with open(args.save / f"seed{seed}.pickle", "wb") as fh:
                    pickle.dump((light, ex), fh)
                from wordspot.model import save_model

                save_model(model, args.save / f"seed{seed}.model")  # for analyses of the same recognitions
            tables.new_seed()
            for v, kinds in variants.items():
                sub = ex.subset(np.isin(ex.source, kinds))
                tables.add(v, heard, fit_calibration(sub, config=config), sub)
            print(f"seed {seed}: {ex.right.size} calibration words ({int(ex.right.sum())} right); cpu "
                  f"{t_adapt:.1f} s adapting, {t1 - t0 - t_adapt:.0f} s examples, {t2 - t1:.0f} s dev sets, "
                  f"{time.process_time() - t2:.0f} s variants", file=sys.stderr, flush=True)
    print(f"background items (share {args.background_share or 'default'}): "
          f"{', '.join(args.background_kinds or ['default'])}; scorer's impact items "
          f"{'default' if args.scorer_impacts is None else args.scorer_impacts}; "
          f"calibration impact clips {args.impact_clips}; calibration noise clips: "
          f"{', '.join(args.clip_kinds or default_kinds)}, babble")
    print(f"filler {fp:g}; calibration examples: {args.noisy} noisy copies ({args.snr[0]:g}-{args.snr[1]:g} dB), "
          f"{args.phrases} phrases, {args.noise_clips} noise clips; seeds {args.seeds}: mean (min-max)\n")
    tables.print(args.show)
    return 0


def other_talk_share(saved: Path, kinds, config) -> float:
    """Percent of other-talk files with a command at the default threshold in the recognitions
    kept at ``saved`` (``--save``), with a calibration fitted on the examples of ``kinds``."""
    import pickle

    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE, MEASURE_NAMES
    from wordspot.evaluation.calibrate import fit_calibration

    with open(saved, "rb") as fh:
        heard, ex = pickle.load(fh)
    cal = fit_calibration(ex.subset(np.isin(ex.source, kinds)), config=config)
    cols = [MEASURE_NAMES.index(n) for n in cal.names]
    talk = [cal.predict(np.array([g.measures for g in segs])[:, cols]) if segs else np.zeros(0)
            for _, segs in heard["other talk"]]
    return 100 * float(np.mean([bool((c >= DEFAULT_MIN_CONFIDENCE).any()) for c in talk]))


def mix_arg(words) -> tuple:
    """``KIND`` or ``KIND:PARTS`` words as a mix of ``(kind, parts)`` pairs (``AdaptationConfig.background_kinds``)."""
    pairs = []
    for w in words:
        kind, _, parts = w.partition(":")
        pairs.append((kind, int(parts) if parts else 1))
    return tuple(pairs)


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
    ap.add_argument("--variants", nargs="+", default=None, metavar="NAME",
                    help="compare calibration variants on one model a seed: 'all' or names of VARIANTS")
    ap.add_argument("--noisy", type=int, default=2, help="with --variants: noisy copies of each held-out recording")
    ap.add_argument("--snr", type=float, nargs=2, default=[5.0, 25.0], help="with --variants: their SNR range")
    ap.add_argument("--phrases", type=int, default=100, help="with --variants: joined phrases")
    ap.add_argument("--noise-clips", type=int, default=50, help="with --variants: noise-only clips")
    ap.add_argument("--joined", type=int, default=100, help="with --variants: joined dev files and phrase stand-ins")
    ap.add_argument("--other-talk-every", type=int, default=1,
                    help="with --variants: keep every N-th other-talk file (time)")
    ap.add_argument("--no-command-sets", action="store_true",
                    help="with --variants: also the dev sets 'everyday words' and 'impacts' (dev_no_command.py)")
    ap.add_argument("--background-kinds", nargs="+", default=None,
                    help="with --variants: the kinds of the adaptation's background items, KIND or KIND:PARTS "
                         "(e.g. white pink hum dither fan impacts:5; default: the configuration's)")
    ap.add_argument("--background-share", type=float, default=None,
                    help="with --variants: the adaptation's background share (default: its default)")
    ap.add_argument("--impact-clips", type=int, default=0,
                    help="with --variants: clips of impacts among the calibration's examples (variant '+ impact clips')")
    ap.add_argument("--scorer-impacts", type=float, default=None,
                    help="with --variants: AdaptationConfig.scorer_impacts, items of impacts among the scorer's "
                         "tuning frames (a share of the recordings; default: the configuration's, 0.1; 0: none)")
    ap.add_argument("--clip-kinds", nargs="+", default=None,
                    help="with --variants: the kinds of the calibration's noise clips, babble added "
                         "(default: the package's background kinds)")
    ap.add_argument("--no-refit", action="store_true",
                    help="keep the calibration's model (no adapting again on every recording)")
    ap.add_argument("--choosing-model", action="store_true",
                    help="the calibration on the model the strength was chosen with (calibrate_choosing_model)")
    ap.add_argument("--own-scorer", type=int, default=0, metavar="FRAMES",
                    help="adapt with AdaptationConfig.own_scorer: a state scorer fitted on the recordings "
                         "(training from scratch's size, at most FRAMES training frames) instead of tuning the "
                         "starter's; 0: tune (the default)")
    ap.add_argument("--own-role", choices=("instead", "beside"), default="instead",
                    help="with --own-scorer: the network instead of tuning the starter's, or beside it "
                         "(AdaptationConfig.own_scorer_role)")
    ap.add_argument("--calibration-phrases", type=int, default=0,
                    help="without --variants: phrases joined from held-out takes among the calibration's "
                         "examples (CalibrationConfig.phrases; 0: none, the default)")
    ap.add_argument("--snrs", type=float, nargs="+", default=[10.0],
                    help="SNRs of the dev commands in noise (without --variants)")
    ap.add_argument("--show", type=float, nargs="+", default=list(THRESHOLDS),
                    help="with --variants: thresholds shown in the tables")
    ap.add_argument("--save", type=Path, default=None,
                    help="with --variants: keep each seed's recognitions, examples and model in this folder")
    ap.add_argument("--load", type=Path, default=None,
                    help="with --variants: score the recognitions and examples kept by --save instead")
    ap.add_argument("--match-to", type=Path, default=None,
                    help="with --load: the 'equal other talk' table matches the other talk with a command of this "
                         "--save folder's first variant at the default threshold (another run), not this run's")
    args = ap.parse_args(argv)
    if args.variants:
        return run_variants(args)

    from wordspot import api
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.evaluation.scoring import align_words

    import time

    from posterior_confidence_dev import operating_eer
    from wordspot.training.adapt import AdaptationConfig
    from wordspot.training.own_scorer import SCRATCH_SCORER

    own = replace(SCRATCH_SCORER, max_frames=args.own_scorer) if args.own_scorer else None
    seconds = []  # wall time of each training, calibration included

    table = {(f, t): [] for f in args.filler_penalty for t in THRESHOLDS}
    eers = {f: [] for f in args.filler_penalty}
    sets = None
    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed, fp in [(seed, fp) for fp in args.filler_penalty for seed in args.seeds]:
            settings = DecoderSettings(min_confidence=0.0, filler_penalty=fp)
            t0 = time.perf_counter()
            model = api.train(manifest, REPO / "lexicon" / "bakery.txt", start=None if args.from_scratch else "starter",
                              config=None if args.from_scratch else AdaptationConfig(
                                  calibrate_choosing_model=args.choosing_model, own_scorer=own,
                                  own_scorer_role=args.own_role, jobs=2),
                              calibration=CalibrationConfig(seed=seed, settings=settings, backwards=args.backwards,
                                                            **({"refit": False} if args.no_refit else {}),
                                                            **({"speeds": tuple(args.speeds)} if args.speeds else {}),
                                                            **({} if args.jumbled is None else {"jumbled": args.jumbled}),
                                                            phrases=args.calibration_phrases))
            seconds.append(time.perf_counter() - t0)
            print(f"filler {fp:g}, seed {seed}: trained in {seconds[-1]:.1f} s", file=sys.stderr, flush=True)
            if sets is None:
                sets = dev_sets(model, 100, snrs=tuple(args.snrs), no_command=args.no_command_sets)
            rec = build_recognizer(model, settings=settings)
            heard = {name: [(ref, [(s.word, s.confidence) for s in rec.decode(
                compute_features(wave, model.features)).segments]) for wave, ref in items]
                for name, items in sets.items()}
            # the EER of the dev commands against the files with no command (posterior_confidence_dev's rule)
            eers[fp].append(100 * operating_eer(
                [(ref, [w for w, _ in hyp], np.array([c for _, c in hyp])) for ref, hyp in heard["words"]],
                [([w for w, _ in hyp], np.array([c for _, c in hyp])) for name in ("other talk", "noise only")
                 for _, hyp in heard.get(name, [])]))
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
                    row.append(100 * errors / words if name in ("words", "phrases", "real phrases")
                               or name.startswith("noisy") else
                               100 * right / len(items) if name == "joined" else 100 * (1 - right / len(items)))
                table[fp, t].append(row)
            print(f"filler {fp:g}, seed {seed} done", file=sys.stderr, flush=True)
    label = {"words": "dev command WER", "joined": "joined files exactly right", "phrases": "phrase stand-ins WER",
             "real phrases": "real phrases WER"}
    label.update({name: f"{name} WER" for name in sets if name.startswith("noisy")})
    names = [label.get(name, f"{name}: files not exactly right" if name not in NO_COMMAND
                       else f"{name}: files with a command") for name in sets]
    for fp, e in eers.items():
        print(f"filler {fp:g}: EER of the dev commands against the no-command files {np.mean(e):.1f}% "
              f"({min(e):.1f}-{max(e):.1f}); per seed " + ", ".join(f"{v:.1f}" for v in e))
    print(f"training wall time, calibration included: " + ", ".join(f"{v:.1f}" for v in seconds) + " s")
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
