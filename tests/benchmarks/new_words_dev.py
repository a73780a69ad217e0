#!/usr/bin/env python3
"""The word prior of words added without recordings, on the dev split of the demo's training voices.

Per seed, the starter is adapted with calibration (``api.train``, as ``wordspot train``
does) on the training voices that are not dev voices, twice: without the recordings of
five words (the first fold of ``tune_adaptation.py``: they stay in the lexicon, as words a
user adds by pronunciation alone) and on every recording (the lexicon's five demo new words
are then the only words without recordings). Each model recognises the dev sets of
``tune_filler.py`` once with the prior *before* (an unrecorded word gets the mean recorded
word's share only in the unigram it backs off to) and once with the prior *as it is* (an
unrecorded word is as likely as the mean recorded word after every previous word:
``grammar._fair_row``); words below 0 and below the default threshold 0.05 are dropped
afterwards. ``--everyday N`` instead adds N everyday words said alone by the dev voices
(``dev_no_command.py``) to the lexicon as words nobody recorded and scores them as
commands, the starter alone against the starter adapted on every dev training recording
(``--adapt FIELD=VALUE`` changes its ``AdaptationConfig``). The demo's test sets are never
used here.

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/new_words_dev.py --seeds 0 1 2
    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/new_words_dev.py --everyday 150 --seeds 0 1 2
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

from tune_filler import dev_sets, write_dev_train_manifest  # noqa: E402

FOLD = ("oven", "seven", "cancel", "next", "timer")  # the first fold of tune_adaptation.py
THRESHOLDS = (0.0, 0.05)


def _prior_before(seen, logp, backoff, *_):
    """The row as the prior gave it before unrecorded words got their fair share in every row."""
    return seen, logp, backoff


def decode(model, sets, before: bool) -> dict:
    """{set: [(reference, [(word, confidence)])]} with no threshold, under either prior."""
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.language import grammar

    kept = grammar._fair_row
    if before:
        grammar._fair_row = _prior_before
    try:
        rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0))
    finally:
        grammar._fair_row = kept
    return {name: [(ref, [(s.word, s.confidence) for s in rec.decode(compute_features(w, model.features)).segments])
                   for w, ref in items] for name, items in sets.items()}


def rates(decoded, t: float) -> dict:
    """WER of the sets with commands, share of files with a command of the others (%)."""
    from wordspot.evaluation.scoring import align_words

    out = {}
    for name, items in decoded.items():
        if any(ref for ref, _ in items):
            errors = words = 0
            for ref, got in items:
                errors += align_words(ref, [w for w, c in got if c >= t]).errors
                words += len(ref)
            out[name] = 100.0 * errors / max(words, 1)
        else:
            out[name] = 100.0 * np.mean([any(c >= t for _, c in got) for _, got in items])
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--joined", type=int, default=100)
    ap.add_argument("--everyday", type=int, default=0, metavar="N",
                    help="instead: N everyday words said alone by the dev voices, added to the lexicon "
                         "(their CMU dictionary pronunciations) as words nobody recorded; the starter alone "
                         "against the starter adapted on every dev training recording, per seed")
    ap.add_argument("--adapt", nargs="*", default=[], metavar="FIELD=VALUE",
                    help="with --everyday: AdaptationConfig fields for the adapted model (a Python literal each, "
                         "e.g. follow_variances=False)")
    args = ap.parse_args(argv)
    if args.everyday:
        return everyday(args)

    import csv

    from wordspot import api
    from wordspot.training.adapt import AdaptationConfig

    lexicon = REPO / "lexicon" / "bakery.txt"
    table: dict = {}
    with tempfile.TemporaryDirectory() as tmp:
        every = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        with open(every, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        without = Path(tmp) / "dev-train-without-fold.csv"
        with open(without, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["path", "transcript", "speaker"])
            for r in rows:
                if not set(r["transcript"].split()) & set(FOLD):
                    w.writerow([r["path"], r["transcript"], r["speaker"]])
        sets = None
        for seed in args.seeds:
            for data, manifest in (("five words unrecorded", without), ("every word recorded", every)):
                began = time.perf_counter()
                model = api.train(manifest, lexicon, start="starter", config=AdaptationConfig(seed=seed, jobs=args.jobs))
                secs = time.perf_counter() - began
                if sets is None:
                    sets = dev_sets(model, args.joined, snrs=(), no_command=True)
                    words = sets.pop("words")
                    sets = {"new words": [x for x in words if set(x[1]) & set(FOLD)],
                            "recorded words": [x for x in words if not set(x[1]) & set(FOLD)], **sets}
                    print("sets: " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), flush=True)
                chosen = sets if data == "every word recorded" else {k: v for k, v in sets.items() if k != "joined"}
                for before in (True, False):
                    decoded = decode(model, chosen, before)
                    for t in THRESHOLDS:
                        key = (data, "before" if before else "fair in every row", t)
                        table.setdefault(key, []).append(rates(decoded, t))
                        print(f"seed {seed}, {key}: " + ", ".join(f"{k} {v:.1f}" for k, v in table[key][-1].items())
                              + f" (trained in {secs:.0f} s)", flush=True)
    names = list(sets)
    print("\nMean (min-max) over seeds: WER of the sets with commands, % of files with a command of the others\n")
    print("| data | prior | threshold | " + " | ".join(names) + " |")
    print("| --- | --- | ---: |" + " ---: |" * len(names))
    for (data, prior, t), rows_ in table.items():
        cells = []
        for n in names:
            v = [r[n] for r in rows_ if n in r]
            cells.append(f"{np.mean(v):.1f} ({min(v):.1f}-{max(v):.1f})" if v else "")
        print(f"| {data} | {prior} | {t:g} | " + " | ".join(cells) + " |")
    return 0


def everyday(args) -> int:
    """Everyday words as new words: the starter alone against the adapted starter."""
    from dev_no_command import everyday_word_set, everyday_words

    from wordspot import api
    from wordspot.language.lexicon import Lexicon, read_lexicon, suggest_pronunciations
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig

    import ast

    fields = {k: ast.literal_eval(v) for k, v in (a.split("=", 1) for a in args.adapt)}
    words = everyday_words(args.everyday)
    said = everyday_word_set(args.everyday)
    if not said:
        return 1
    bakery = read_lexicon(REPO / "lexicon" / "bakery.txt")
    entries = {w: [tuple(p) for p in bakery.pronunciations(w)] for w in bakery.words}
    for w, prons in suggest_pronunciations(words).items():
        entries[w] = [tuple(p) for p in prons]
    with tempfile.TemporaryDirectory() as tmp:
        lex_file = Path(tmp) / "lexicon.txt"
        lex_file.write_text("".join(f"{w} {' '.join(p)}\n" for w, ps in entries.items() for p in ps), encoding="utf-8")
        lexicon = read_lexicon(lex_file)
        sets = {"everyday words as new words": [(wave, [w]) for (wave, _), w in zip(said, words)]}
        table: dict = {}
        starter = load_model("starter")
        starter.lexicon = lexicon
        models = [("starter alone", None, starter)]
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        for seed in args.seeds:
            models.append((f"adapted{''.join(f', {a}' for a in args.adapt)}, seed {seed}", seed, None))
        for name, seed, model in models:
            if model is None:
                model = api.train(manifest, lex_file, start="starter",
                                  config=AdaptationConfig(seed=seed, jobs=args.jobs, **fields))
            decoded = decode(model, sets, before=False)
            for t in THRESHOLDS:
                table[(name, t)] = rates(decoded, t)
                print(f"{name}, threshold {t:g}: " + ", ".join(f"{k} {v:.1f}" for k, v in table[(name, t)].items()),
                      flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
