#!/usr/bin/env python3
"""Tuning the starter's state scorer to the user's recordings, against keeping it, on dev data only.

The "user" is the demo's training voices that are not dev voices (``dev_candidate`` in
``recordings/voices.csv``): the starter's mixtures are adapted to their recordings once
(as ``wordspot train`` does, without calibration), those recordings are aligned with the
adapted mixtures, and the starter's network is tuned on them with each variant and seed
(:func:`wordspot.training.scorer_adapt.adapt_scorer`). Everything is scored on the dev
voices, which took no part in any of it:

* frame accuracy: the dev voices' training recordings aligned with the adapted mixtures;
  share of frames whose most probable network output is the aligned mixture id (all
  frames, and speech frames alone);
* decoding with the adapted mixtures and each network mixed in at ``--weights`` (scale
  ``--scale``), bakery lexicon, default filler, no confidence threshold: dev command WER,
  and the share of files giving a command among the starter corpus's dev voices saying
  no bakery word ("other talk") and 60 noise-only clips (as ``tune_filler.py``).

The demo's test sets are never used. When ``--start`` has no state scorer, a small one is
fitted first on part of the starter corpus's train split (``--corpus``; aligned with the
start) and kept in ``--base`` for later runs:

    python tests/benchmarks/scorer_adapt_dev.py --start starter --corpus recordings/starter \\
        --base /tmp/base-scorer.model --seeds 0 1 2 --variants all:0.25 output:0.25

A variant is ``LAYERS:RHO`` (``LAYERS`` all or output), optionally followed by
``,NAME=VALUE`` for any other field of ``ScorerAdaptConfig`` (for example
``all:0.5,max_frames=8000,learning_rate=0.001,prior=starter``).
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

from compare_data import dev_voices  # noqa: E402
from tune_filler import _rows, noise_only  # noqa: E402


def parse_variant(text: str, base):
    head, *rest = text.split(",")
    layers, rho = head.split(":")
    cfg = replace(base, layers=layers, rho=float(rho))
    for item in rest:
        name, value = item.split("=", 1)
        kind = type(getattr(base, name))
        cfg = replace(cfg, **{name: value if kind is str else kind(value)})
    return cfg


def base_scorer(start, corpus: Path, n: int, jobs: int):
    """A 256x256, 5-frame-context scorer fitted on ``n`` recordings of the corpus's train split."""
    from wordspot.corpus import read_manifest
    from wordspot.training.frame_labels import align_frames
    from wordspot.training.scorer_fit import ScorerConfig, fit_scorer_with_report

    utts = read_manifest(corpus / "train.csv")
    utts = utts[:: max(1, len(utts) // n)][:n]
    t0 = time.monotonic()
    got = align_frames(start, utts, jobs=jobs, background_share=0.1, seed=0)
    t1 = time.monotonic()
    cfg = ScorerConfig(hidden=(256, 256), context=5, max_frames=60_000, max_epochs=8, patience=2)
    scorer, rep = fit_scorer_with_report(got.frames, got.labels, start.mixtures.n_mixtures, cfg)
    print(f"base scorer: {len(got.items)} starter-corpus items aligned in {t1 - t0:.0f} s, fitted {cfg} in "
          f"{time.monotonic() - t1:.0f} s; epoch kept {rep.best_epoch}, held-out accuracy "
          f"{100 * rep.held_out_accuracy:.1f}%", flush=True)
    return scorer


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--start", default="starter")
    ap.add_argument("--corpus", type=Path, default=REPO / "recordings" / "starter",
                    help="the starter corpus (its dev.csv gives the other talk; train.csv a base scorer)")
    ap.add_argument("--base", type=Path, default=None, help="model file to keep / reuse the fitted base scorer in")
    ap.add_argument("--base-recordings", type=int, default=1500)
    ap.add_argument("--variants", nargs="+", default=["all:0.25", "output:0.25"])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--weights", type=float, nargs="+", default=[0.5, 1.0])
    ap.add_argument("--scale", type=float, default=1.0)
    ap.add_argument("--most-talk", type=int, default=150, help="other-talk files at most (0: all)")
    ap.add_argument("--jobs", type=int, default=1)
    args = ap.parse_args(argv)

    from wordspot.audio.features import compute_features
    from wordspot.audio.reading import load_audio
    from wordspot.corpus import read_manifest
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.scoring import align_words
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import AcousticModel, load_model, save_model
    from wordspot.training.adapt import AdaptationConfig, adapt, align_for_scorer, regression_classes
    from wordspot.training.data import prepare_items
    from wordspot.training.scorer_adapt import ScorerAdaptConfig, adapt_scorer

    start = load_model(args.start)
    if start.scorer is None:
        if args.base is not None and args.base.exists():
            start = replace(start, scorer=load_model(args.base).scorer)
            print(f"base scorer from {args.base}")
        else:
            start = replace(start, scorer=base_scorer(start, args.corpus, args.base_recordings, args.jobs))
            if args.base is not None:
                save_model(start, args.base)
    print(f"start {args.start}: scorer {start.scorer.hidden_sizes} context {start.scorer.context}")

    rec = REPO / "recordings"
    bakery = read_lexicon(REPO / "lexicon" / "bakery.txt")
    held = set(dev_voices(rec / "voices.csv"))
    utts = read_manifest(rec / "train.csv")
    user = [u for u in utts if u.speaker not in held]
    dev = [u for u in utts if u.speaker in held]
    t0 = time.monotonic()
    adapted, _ = adapt(user, bakery, start, config=AdaptationConfig(jobs=args.jobs, scorer=None))
    print(f"mixtures adapted on {len(user)} recordings of {len({u.speaker for u in user})} voices in "
          f"{time.monotonic() - t0:.0f} s; dev voices {', '.join(sorted(held))} ({len(dev)} recordings)", flush=True)
    items, _ = prepare_items(user, adapted.lexicon, start.units, start.features, jobs=args.jobs)
    t0 = time.monotonic()
    frames, labels = align_for_scorer(items, adapted.mixtures)
    align_s = time.monotonic() - t0
    dev_items, _ = prepare_items(dev, adapted.lexicon, start.units, start.features, jobs=args.jobs)
    dev_frames, dev_labels = align_for_scorer(dev_items, adapted.mixtures)
    speech = regression_classes(start.units) == 1
    dev_y = np.concatenate(dev_labels)
    dev_speech = speech[dev_y]
    print(f"user frames {sum(len(y) for y in labels)} (aligned in {align_s:.1f} s), dev frames {dev_y.size} "
          f"({100 * dev_speech.mean():.0f}% speech)", flush=True)

    # decoding sets
    rate = start.features.sample_rate
    words = [(compute_features(load_audio(u.path, sample_rate=rate), start.features), list(u.words)) for u in dev]
    vocab = set(bakery.words) | {r["transcript"] for r in _rows(rec / "new-words.csv")}
    talk_rows = [r for r in _rows(args.corpus / "dev.csv") if not (set(r["transcript"].split()) & vocab)]
    if args.most_talk:
        talk_rows = talk_rows[:: max(1, len(talk_rows) // args.most_talk)][: args.most_talk]
    talk_waves = [(load_audio(args.corpus / r["path"], sample_rate=rate), []) for r in talk_rows]
    noise = noise_only(talk_waves[:96], np.random.default_rng(20261203))
    sets = {"words": words,
            "other talk": [(compute_features(w, start.features), r) for w, r in talk_waves],
            "noise only": [(compute_features(w, start.features), r) for w, r in noise]}

    def frame_accuracy(scorer):
        hit = np.concatenate([np.argmax(scorer.log_posteriors(x), axis=1) for x in dev_frames]) == dev_y
        return 100 * hit.mean(), 100 * hit[dev_speech].mean()

    def decode(scorer, w):
        model = AcousticModel(adapted.features, adapted.units, adapted.mixtures, adapted.lexicon, adapted.bigrams,
                              {}, scorer=scorer)
        recog = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0, scorer_weight=w,
                                                                 scorer_scale=args.scale))
        out = []
        for name, part in sets.items():
            errors = n_words = with_command = 0
            for x, ref in part:
                hyp = [seg.word for seg in recog.decode(x).segments]
                a = align_words(ref, hyp)
                errors += a.substitutions + a.deletions + a.insertions
                n_words += len(ref)
                with_command += bool(hyp)
            out.append(100 * errors / n_words if name == "words" else 100 * with_command / len(part))
        return out

    print(f"decoding sets: dev commands {len(words)}, other talk {len(sets['other talk'])}, "
          f"noise only {len(sets['noise only'])}; scale {args.scale}", flush=True)
    print("| scorer | seed | epoch kept | tune s | dev frame acc % (speech) | "
          + " | ".join(f"w={w:g}: WER % / talk % / noise %" for w in args.weights) + " |")
    print("| --- | ---: | ---: | ---: | ---: |" + " ---: |" * len(args.weights))
    mix_only = decode(None, 0.0)
    print(f"| (mixtures alone, weight 0) | - | - | - | - | {mix_only[0]:.1f} / {mix_only[1]:.1f} / "
          f"{mix_only[2]:.1f} |", flush=True)
    results = {}

    def row(name, seed, scorer, epoch, secs):
        acc = frame_accuracy(scorer)
        dec = [decode(scorer, w) for w in args.weights]
        results.setdefault(name, []).append((acc, dec))
        print(f"| {name} | {seed} | {epoch} | {secs} | {acc[0]:.1f} ({acc[1]:.1f}) | "
              + " | ".join(f"{d[0]:.1f} / {d[1]:.1f} / {d[2]:.1f}" for d in dec) + " |", flush=True)

    row("starter (not tuned)", "-", start.scorer, "-", "-")
    for text in args.variants:
        for seed in args.seeds:
            cfg = replace(parse_variant(text, ScorerAdaptConfig()), seed=seed)
            t0 = time.monotonic()
            tuned, rep = adapt_scorer(start.scorer, frames, labels, cfg, speech_classes=speech)
            row(f"tuned {text}", seed, tuned, rep.best_epoch, f"{time.monotonic() - t0:.1f}")
    print("\nmeans over seeds:")
    for name, rows in results.items():
        acc = np.mean([r[0] for r in rows], axis=0)
        dec = np.mean([r[1] for r in rows], axis=0)
        print(f"| {name} | {len(rows)} | {acc[0]:.1f} ({acc[1]:.1f}) | "
              + " | ".join(f"{d[0]:.1f} / {d[1]:.1f} / {d[2]:.1f}" for d in dec) + " |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
