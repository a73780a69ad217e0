#!/usr/bin/env python3
"""The adaptation strength on the dev split of the demo's training voices.

The starter is adapted on the training voices that are not dev voices (``dev_candidate``
in ``recordings/voices.csv``), with all their takes or only the first take of each word,
three ways: the fixed-strength MAP of before (``strength`` 0), optionally fixed strengths
(``--fixed``), the strength chosen on held-out recordings (the default, three seeds: the
seed draws the held-out recordings and the background items), and trained from scratch (``TrainingConfig()``). Each model is
scored on the dev voices (WER in the word loop, no confidence threshold): their clean
commands, the same commands in babble or fan noise at 10 dB SNR, and joined stand-ins of
phrases (2-4 commands with pauses). A last part leaves the words of one fold out of the
adaptation data and scores the dev voices saying them ("new words"). The demo's test sets
are never used here.

    python tests/benchmarks/strength_dev.py                 # everything (about half an hour)
    python tests/benchmarks/strength_dev.py --no-scratch    # without the from-scratch models
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

RATE = 16000
FOLD = ("oven", "seven", "cancel", "next", "timer")  # the first fold of tune_adaptation.py


def _dev_sets(rec, held, seed=20261203):
    from wordspot.audio.augment import babble, mix_at_snr, speech_span, steady_noise, talker_stream
    from wordspot.audio.reading import load_audio
    from wordspot.corpus import read_manifest

    utts = [u for u in read_manifest(rec / "train.csv") if u.speaker in held]
    words = [(load_audio(u.path, sample_rate=RATE), list(u.words), u.speaker) for u in utts]
    rng = np.random.default_rng(seed)
    voices = sorted(held)
    by_voice = {v: [w for w, _, s in words if s == v] for v in voices}
    streams = {v: talker_stream(by_voice[v]) for v in voices}
    noisy = []
    for i, (wave, ref, spk) in enumerate(words):
        noise = steady_noise(len(wave), rng) if i % 2 else babble([streams[v] for v in voices if v != spk],
                                                                    len(wave), rng)
        noisy.append((mix_at_snr(wave, noise, 10.0, span=speech_span(wave, RATE)).astype(np.float32), ref))
    joined = []
    for i in range(60):
        pool = [(w, r) for w, r, s in words if s == voices[i % len(voices)]]
        picks = [pool[k] for k in rng.choice(len(pool), size=rng.integers(2, 5), replace=False)]
        parts = []
        for wave, _ in picks:
            parts += [wave, np.zeros(int(rng.uniform(0.2, 0.6) * RATE), np.float32)]
        joined.append((np.concatenate(parts), [w for _, r in picks for w in r]))
    return {"clean": [(w, r) for w, r, _ in words], "noisy 10 dB": noisy, "joined": joined}


def _wer(model, clips) -> float:
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.scoring import align_words

    rec = build_recognizer(model, settings=DecoderSettings(min_confidence=0.0))
    errors = total = 0
    for wave, ref in clips:
        got = [s.word for s in rec.decode(compute_features(wave, model.features)).segments]
        a = align_words(ref, got)
        errors += a.errors
        total += len(ref)
    return errors / max(total, 1)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--no-scratch", action="store_true")
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--amounts", nargs="+", default=["all", "1"], help="takes per word and voice")
    ap.add_argument("--follow-weight", type=float, nargs="+", default=[10.0])
    ap.add_argument("--fixed", type=int, nargs="*", default=[], help="also these fixed strengths (all takes)")
    args = ap.parse_args(argv)

    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig, adapt
    from wordspot.training.trainer import TrainingConfig, train

    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model("starter")
    every = [u for u in read_manifest(rec / "train.csv") if u.speaker not in held]
    sets = _dev_sets(rec, held)
    print(f"dev voices {', '.join(sorted(held))}; " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), flush=True)
    rows = []

    def run(label, make, clips=sets):
        t0 = time.process_time()
        model = make()
        secs = time.process_time() - t0
        wers = {k: _wer(model, v) for k, v in clips.items()}
        st = model.info.get("strength", {})
        rows.append((label, wers, secs, st.get("follow_passes", "-"), st.get("speech_minutes", "-")))
        print("| " + label + " | " + " | ".join(f"{100 * v:.1f}" for v in wers.values())
              + f" | {rows[-1][3]} | {secs:.0f} |", flush=True)

    for amount in args.amounts:
        seen: dict = {}
        data = []
        for u in every:
            key = (u.speaker, u.words)
            seen[key] = seen.get(key, 0) + 1
            if amount == "all" or seen[key] <= int(amount):
                data.append(u)
        tag = f"{amount} takes ({len(data)} recordings)"
        run(f"{tag}: MAP only (strength 0, before)",
            lambda: adapt(data, lexicon, start, config=AdaptationConfig(strength=0, scorer=None, jobs=args.jobs))[0])
        for k in args.fixed if amount == "all" else ():
            run(f"{tag}: strength {k}",
                lambda: adapt(data, lexicon, start, config=AdaptationConfig(strength=k, scorer=None, jobs=args.jobs))[0])
        for fw in args.follow_weight:
            for seed in args.seeds:
                cfg = AdaptationConfig(seed=seed, follow_weight=fw, scorer=None, jobs=args.jobs)
                run(f"{tag}: chosen strength, follow weight {fw:g}, seed {seed}",
                    lambda: adapt(data, lexicon, start, config=cfg)[0])
        if not args.no_scratch:
            run(f"{tag}: from scratch", lambda: train(data, lexicon, config=TrainingConfig(jobs=args.jobs))[0])
    # new words: the fold's words left out of the adaptation data
    data = [u for u in every if not set(u.words) & set(FOLD)]
    new = {"new words": [(w, r) for w, r in sets["clean"] if set(r) & set(FOLD)]}
    run("new words: MAP only", lambda: adapt(data, lexicon, start, config=AdaptationConfig(
        strength=0, scorer=None, jobs=args.jobs))[0], new)
    for seed in args.seeds:
        run(f"new words: chosen strength, seed {seed}", lambda: adapt(data, lexicon, start, config=AdaptationConfig(
            seed=seed, scorer=None, jobs=args.jobs))[0], new)
    return 0


if __name__ == "__main__":
    sys.exit(main())
