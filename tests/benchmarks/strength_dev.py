#!/usr/bin/env python3
"""The adaptation strength on the dev split of the demo's training voices.

The starter is adapted on the training voices that are not dev voices (``dev_candidate``
in ``recordings/voices.csv``), with all their takes or only the first take of each word,
three ways: the fixed-strength MAP of before (``strength`` 0), optionally fixed strengths
(``--fixed``) and variants of the following passes (``--variants``), the strength chosen on
held-out recordings (the default, three seeds: the seed draws the held-out recordings, the
background items and the noisy copies), and trained from scratch (``TrainingConfig()``).
Each model is scored on the dev voices (WER with substitutions / deletions, word loop,
confidence threshold 0): their clean commands, the same commands in the demo's kind of
babble or fan noise at 20 dB and at 10 dB SNR (``_dev_sets``), and joined stand-ins of
phrases (2-4 commands with pauses). A last part leaves the words of one fold out of the
adaptation data and scores the dev voices saying them ("new words"). ``--whole`` instead
trains through ``api.train`` (calibration, scorer tuning) and also scores at the default
confidence threshold (the strength chosen, or ``--strength``; ``--whole-new-words`` also
without the first fold's words). The demo's test sets are never used here.

    python tests/benchmarks/strength_dev.py                 # everything (about half an hour)
    python tests/benchmarks/strength_dev.py --no-scratch    # without the from-scratch models
    python tests/benchmarks/strength_dev.py --amounts all --fixed 1 --variants default \\
        "before (clean and speed copies)" --no-chosen --no-scratch --no-new-words
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
sys.path.insert(0, str(REPO / "recordings"))

from compare_data import dev_voices  # noqa: E402

RATE = 16000
FOLD = ("oven", "seven", "cancel", "next", "timer")  # the first fold of tune_adaptation.py


def _babble_streams(held, seed: int, workdir: Path) -> list:
    """Running speech of the training voices that are not dev voices (the recipe of the
    demo's babble, ``synthesize.babble_streams``, without the dev voices)."""
    import synthesize as syn

    talkers = [v for v in syn.VOICES if v.split == "train" and v.engine in ("espeak", "flite")
               and v.voice_id not in held]
    requests = [(v, text, None, workdir / f"babble-{i:02d}-{j:02d}.wav")
                for i, v in enumerate(talkers) for j, text in enumerate(syn.BABBLE_TEXT)]
    syn.synthesize_raw(requests, 1)
    streams = []
    for i, v in enumerate(talkers):
        rng = syn.rng_for(seed, f"babble-order/{v.voice_id}")
        parts = []
        for j in rng.permutation(len(syn.BABBLE_TEXT)):
            s = syn.trim_silence(syn.read_engine_audio(workdir / f"babble-{i:02d}-{j:02d}.wav", []))
            parts += [s / np.sqrt(np.mean(s ** 2)), np.zeros(int(0.15 * RATE))]
        streams.append(np.concatenate(parts))
    return streams


def _dev_sets(rec, held, seed=20261203):
    """The dev voices' commands clean, in the demo's two noises at 20 and 10 dB, and joined.

    The noisy sets follow the demo's test-noisy recipe (``recordings/synthesize.py``:
    ``make_noise`` babble of 4-6 running talkers or fan noise, scaled so that the SNR over
    the manifest's speech span is the label, added to the recording with its room tone),
    every dev recording at both SNRs with one noise kind per voice and word (a seeded
    half of the words babble, the other half fan); babble from the non-dev training voices.
    """
    import csv
    import tempfile

    import synthesize as syn
    from wordspot.audio.reading import load_audio
    from wordspot.corpus import read_manifest

    utts = [u for u in read_manifest(rec / "train.csv") if u.speaker in held]
    with open(rec / "train.csv", newline="", encoding="utf-8") as fh:
        spans = {r["path"]: (float(r["speech_start"]), float(r["speech_end"])) for r in csv.DictReader(fh)}
    words = [(load_audio(u.path, sample_rate=RATE), list(u.words), u.speaker, u.path) for u in utts]
    with tempfile.TemporaryDirectory() as work:
        streams = _babble_streams(held, seed, Path(work))
    rng = np.random.default_rng(seed)
    voices = sorted(held)
    sets = {"clean": [(w, r) for w, r, _, _ in words]}
    for snr in (20, 10):
        noisy = []
        for wave, ref, spk, path in words:
            order = syn.rng_for(seed, f"noise-type/{spk}").permutation(len(syn.VOCABULARY))
            kind = "babble" if ref[0] in {syn.VOCABULARY[i] for i in order[:len(syn.VOCABULARY) // 2]} else "fan"
            rel = str(Path(path).relative_to(rec))
            noise = syn.make_noise(kind, len(wave), syn.rng_for(seed, f"{rel}/{snr}"), streams)
            a, b = (min(len(wave) - 1, int(round(t * RATE))) for t in spans[rel])
            p_speech, p_noise = np.mean(wave[a:b].astype(np.float64) ** 2), np.mean(noise[a:b] ** 2)
            noise *= np.sqrt(p_speech / (p_noise * 10 ** (snr / 10)))
            noisy.append(((wave + noise).astype(np.float32), ref))
        sets[f"{snr} dB"] = noisy
    joined = []
    for i in range(60):
        pool = [(w, r) for w, r, s, _ in words if s == voices[i % len(voices)]]
        picks = [pool[k] for k in rng.choice(len(pool), size=rng.integers(2, 5), replace=False)]
        parts = []
        for wave, _ in picks:
            parts += [wave, np.zeros(int(rng.uniform(0.2, 0.6) * RATE), np.float32)]
        joined.append((np.concatenate(parts), [w for _, r in picks for w in r]))
    sets["joined"] = joined
    return sets


def _tally(model, clips, min_confidence=0.0) -> dict:
    """WER, substitutions, deletions and insertions of ``model`` on ``clips`` (word loop)."""
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.scoring import align_words

    rec = build_recognizer(model, settings=DecoderSettings(min_confidence=min_confidence))
    out = dict(sub=0, dele=0, ins=0, words=0)
    for wave, ref in clips:
        got = [s.word for s in rec.decode(compute_features(wave, model.features)).segments]
        a = align_words(ref, got)
        out["sub"] += a.substitutions
        out["dele"] += a.deletions
        out["ins"] += a.insertions
        out["words"] += len(ref)
    out["wer"] = (out["sub"] + out["dele"] + out["ins"]) / max(out["words"], 1)
    return out


def _cell(t: dict) -> str:
    return f"{100 * t['wer']:.1f} ({t['sub']}/{t['dele']})"


#: Following-pass variants of the 2026-12-03 dev runs (``--variants``, ``--whole``): AdaptationConfig
#: fields. Those run with options since removed (pause states kept, variance floors, weights kept)
#: are in docs/experiments/2026-12-03-adaptation-in-noise.md.
VARIANTS = {
    "default": {},
    "before (clean and speed copies)": {"follow_noise_copies": 0},
    "noisy copy 0-25 dB": {"follow_noise_copies": 1, "follow_noise_snr": (0.0, 25.0)},
    "2 noisy copies 10-25 dB": {"follow_noise_copies": 2, "follow_noise_snr": (10.0, 25.0)},
    "means + weights": {"follow_variances": False},
    "no speed copies": {"follow_speeds": ()},
    "calibrated on whole speakers": {"unheard_calibration": True},
    "calibration's model kept (--no-refit)": {},
    "calibration on the choosing model": {"calibrate_choosing_model": True},
}

#: ``CalibrationConfig`` fields of the ``--whole`` variants that change the calibration
#: (the others use ``api.train``'s default calibration, docs/experiments/2026-12-03-training-time.md).
CALIBRATION_VARIANTS = {
    "calibration's model kept (--no-refit)": {"refit": False},
}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--no-scratch", action="store_true")
    ap.add_argument("--no-new-words", action="store_true")
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--amounts", nargs="+", default=["all", "1"], help="takes per word and voice")
    ap.add_argument("--follow-weight", type=float, nargs="+", default=[10.0])
    ap.add_argument("--fixed", type=int, nargs="*", default=[], help="also these fixed strengths (all takes)")
    ap.add_argument("--variants", nargs="*", default=[], choices=sorted(VARIANTS),
                    help="following-pass variants, at the --fixed strengths per seed and chosen per seed (all takes)")
    ap.add_argument("--no-chosen", action="store_true", help="skip the chosen-strength runs")
    ap.add_argument("--whole", nargs="*", default=None, choices=sorted(VARIANTS),
                    help="instead: these variants through api.train (calibration, scorer tuned), "
                         "scored at the default confidence threshold and at 0 (all takes)")
    ap.add_argument("--strength", type=int, default=None,
                    help="with --whole: fix the strength (default: chosen, as wordspot train does)")
    ap.add_argument("--whole-new-words", action="store_true",
                    help="with --whole: also adapt without the words of the first fold and score the dev "
                         "voices saying them")
    args = ap.parse_args(argv)
    if args.whole is not None:
        return whole(args)

    from wordspot.corpus import read_manifest
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model
    from wordspot.training.adapt import AdaptationConfig, ItemCache, adapt
    from wordspot.training.trainer import TrainingConfig, train

    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model("starter")
    every = [u for u in read_manifest(rec / "train.csv") if u.speaker not in held]
    sets = _dev_sets(rec, held)
    print(f"dev voices {', '.join(sorted(held))}; " + ", ".join(f"{k} {len(v)}" for k, v in sets.items()), flush=True)
    print("| system | " + " | ".join(f"{k} WER (sub/del)" for k in sets) + " | strength | CPU s |", flush=True)
    rows = []
    cache = ItemCache()

    def run(label, make, clips=sets):
        t0 = time.process_time()
        model = make()
        secs = time.process_time() - t0
        tallies = {k: _tally(model, v) for k, v in clips.items()}
        st = model.info.get("strength", {})
        rows.append((label, tallies, secs, st.get("follow_passes", "-")))
        print("| " + label + " | " + " | ".join(_cell(t) for t in tallies.values())
              + f" | {rows[-1][3]} | {secs:.0f} |", flush=True)

    def adapted(data, **fields):
        return adapt(data, lexicon, start, config=AdaptationConfig(scorer=None, jobs=args.jobs, **fields),
                     cache=cache)[0]

    for amount in args.amounts:
        seen: dict = {}
        data = []
        for u in every:
            key = (u.speaker, u.words)
            seen[key] = seen.get(key, 0) + 1
            if amount == "all" or seen[key] <= int(amount):
                data.append(u)
        tag = f"{amount} takes ({len(data)} recordings)"
        run(f"{tag}: MAP only (strength 0, before)", lambda: adapted(data, strength=0))
        for name in (args.variants or [None]) if amount == "all" else [None]:
            fields = VARIANTS[name] if name else {}
            what = f", {name}" if name else ""
            for k in args.fixed if amount == "all" else ():
                for seed in args.seeds if name else [0]:
                    run(f"{tag}: strength {k}{what}, seed {seed}",
                        lambda: adapted(data, strength=k, seed=seed, **fields))
            if args.no_chosen:
                continue
            for fw in args.follow_weight:
                for seed in args.seeds:
                    run(f"{tag}: chosen strength{what}, follow weight {fw:g}, seed {seed}",
                        lambda: adapted(data, seed=seed, follow_weight=fw, **fields))
        if not args.no_scratch:
            run(f"{tag}: from scratch", lambda: train(data, lexicon, config=TrainingConfig(jobs=args.jobs))[0])
    if args.no_new_words:
        return 0
    # new words: the fold's words left out of the adaptation data
    data = [u for u in every if not set(u.words) & set(FOLD)]
    new = {"new words": [(w, r) for w, r in sets["clean"] if set(r) & set(FOLD)]}
    run("new words: MAP only", lambda: adapted(data, strength=0), new)
    for seed in args.seeds:
        run(f"new words: chosen strength, seed {seed}", lambda: adapted(data, seed=seed), new)
    return 0


def whole(args) -> int:
    """The dev split through ``api.train`` as ``wordspot train`` runs it (strength chosen
    unless ``--strength``); with ``--whole-new-words`` also without the first fold's words."""
    import csv
    import tempfile

    from wordspot import api
    from wordspot.corpus import read_manifest
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.training.adapt import AdaptationConfig

    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    sets = _dev_sets(rec, held)
    if args.whole_new_words:
        sets["new words"] = [(w, r) for w, r in sets["clean"] if set(r) & set(FOLD)]
    with open(rec / "train.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    print("| system | " + " | ".join(f"{k} WER (sub/del)" for k in sets) + " | "
          + " | ".join(f"{k}, threshold 0" for k in sets) + " | strength | CPU s |", flush=True)
    with tempfile.TemporaryDirectory() as tmp:
        manifests = {}
        for name, keep in (("all", lambda r: True), ("new words", lambda r: not set(r["transcript"].split()) & set(FOLD))):
            if name == "new words" and not args.whole_new_words:
                continue
            manifests[name] = Path(tmp) / f"dev-train-{len(manifests)}.csv"
            with open(manifests[name], "w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(["path", "transcript", "speaker"])
                for r in rows:
                    if r["speaker"] not in held and keep(r):
                        w.writerow([str(rec / r["path"]), r["transcript"], r["speaker"]])
        assert len(read_manifest(manifests["all"])) == 950
        for seed in args.seeds:
            for name in args.whole:
                for data, manifest in manifests.items():
                    clips = sets if data == "all" else {"new words": sets["new words"]}
                    t0 = time.process_time()
                    cal = CalibrationConfig(**CALIBRATION_VARIANTS[name]) if name in CALIBRATION_VARIANTS else True
                    model = api.train(manifest, REPO / "lexicon" / "bakery.txt", start="starter",
                                      config=AdaptationConfig(jobs=args.jobs, strength=args.strength, seed=seed,
                                                              **VARIANTS[name]), calibration=cal)
                    secs = time.process_time() - t0
                    cells = {k: _cell(_tally(model, clips[k], None)) if k in clips else "" for k in sets}
                    zero = {k: _cell(_tally(model, clips[k], 0.0)) if k in clips else "" for k in sets}
                    label = f"{name}, seed {seed}" + (", new words left out" if data != "all" else "")
                    print(f"| {label} | " + " | ".join(cells.values()) + " | " + " | ".join(zero.values())
                          + f" | {model.info['strength']['follow_passes']} | {secs:.0f} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
