#!/usr/bin/env python3
"""Pronunciations learned from the user's recordings, on one accented dev user, over seeds.

The accented user (per seed): one espeak-ng dev voice of the demo (espeak-en-gb-m3 for even
seeds, espeak-en-gb-x-gbclan-f5 for odd ones; never a demo test voice or accent) says every
word of ``lexicon/bakery.txt`` with ONE fixed accent: a table of vowel moves drawn by the
seed from the shifted-vowel set's tables (``shifted_vowels.py``: each vowel moved with
probability one half, to its :data:`STRESSED` or :data:`SECOND` neighbour, at least four
vowels moved), applied to every vowel of the word's first pronunciation except unstressed
AH and ER (the reduced vowel, which accents keep). Six takes a word through the demo
generator (its rate, pitch, levels and room tone, seeded by the take's name): takes 1-4
train, takes 5-6 test.

Two cases per seed, each trained as ``wordspot train`` adapts the starter (its calibration
with ``CalibrationConfig(seed=s)``, ``AdaptationConfig(seed=s)``), with learning off and on:

* **user alone**: the accented user's training takes (132);
* **with the dev training voices**: the demo training voices that are not dev voices
  (``tune_filler.write_dev_train_manifest``) together with the user's takes.

Each model recognises (its own lexicon, learned pronunciations included): the user's test
takes clean and in the demo's kind of noise at 20 dB (babble of the other dev voices for
even files, steady fan noise for odd ones), the dev voices' commands and real phrases, the
dev commands at 20 dB, and the no-command sets (the starter corpus dev voices' other talk,
noise only), as ``tune_filler.dev_sets`` builds them. Printed per case and system, mean
(min-max) over seeds: WER at the default threshold and at threshold 0 (the search alone),
no-command files with a command, the user's WER at the threshold giving the same other-talk
firing as learning off at the default, the pronunciations learned, and the CPU time of the
training (the main process, after one training that compiles every kernel; ratio on / off
side by side in one run).

    OPENBLAS_NUM_THREADS=1 python tests/benchmarks/learned_pronunciations_dev.py --seeds 0 1 2
"""

from __future__ import annotations

import argparse
import csv
import sys
import tempfile
import time
from pathlib import Path
from types import SimpleNamespace

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(REPO))

from shifted_vowels import SECOND, STRESSED, espeak_dev_voices, espeak_phonemes, stressed_pronunciation  # noqa: E402

TAKES, TRAIN_TAKES = 6, 4
#: Seed of the takes' rate, pitch and room tone (not the demo's, not the other dev sets').
TAKE_SEED = 20261205
SCHWA = {"AH", "ER"}


def draw_accent(seed: int) -> dict:
    """One accent: {vowel: the phones said instead}, from the shifted-vowel tables."""
    rng = np.random.default_rng([seed, 0x61636E74])
    while True:
        table = {}
        for v in sorted(STRESSED):
            if rng.random() < 0.5:
                table[v] = (STRESSED if rng.random() < 0.5 else SECOND)[v]
        if len(table) >= 4:
            return table


def accented(pron, table) -> list[tuple[str, int]]:
    """(phone, stress) pairs with the accent's moves (not on unstressed AH, ER)."""
    out = []
    for p, s in pron:
        if s < 0 or p not in table or (s == 0 and p in SCHWA):
            out.append((p, s))
            continue
        first, *rest = table[p]
        out += [(first, s)] + [(c, -1) for c in rest]
    return out


def user_takes(lexicon, seed: int, folder: Path):
    """(train manifest, test [(waveform, [word])], voice, {word: phones said}) of the accented user."""
    from dev_phrases import demo_generator

    demo = demo_generator("accented takes")
    if demo is None:
        raise SystemExit("learned_pronunciations_dev.py: needs the text-to-speech engines")
    voice = espeak_dev_voices(demo)[seed % 2]
    table = draw_accent(seed)
    said, takes = {}, []
    for word in lexicon.words:
        pron = accented(stressed_pronunciation(word, lexicon.pronunciations(word)[0]), table)
        said[word] = " ".join(p for p, _ in pron)
        for k in range(1, TAKES + 1):
            takes.append((demo.Take("dev-accent", voice, espeak_phonemes(pron), k,
                                    f"dev-accent-{seed}/{voice.voice_id}/{word}-{k}.flac"), word))
    raw = {t.rel_path: folder / f"raw-{i:04d}.wav" for i, (t, _) in enumerate(takes)}
    demo.synthesize_raw([(t.voice, t.text, demo.draw_for(TAKE_SEED + seed, t.rel_path), raw[t.rel_path])
                         for t, _ in takes], 2)
    from wordspot.audio.writing import write_wav

    rows, test = [], []
    for i, (t, word) in enumerate(takes):
        _, q, _, _ = demo.finish_take(t, raw[t.rel_path], TAKE_SEED + seed)
        wave = (q / 32768.0).astype(np.float32)
        if t.take <= TRAIN_TAKES:
            path = folder / f"{word}-{t.take}.wav"
            write_wav(path, wave, 16000)
            rows.append([str(path), word, "accented-user"])
        else:
            test.append((wave, [word]))
    manifest = folder / "user.csv"
    with open(manifest, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows([["path", "transcript", "speaker"]] + rows)
    return manifest, test, voice.voice_id, table, said


def in_noise(items, others, snr: float, seed: int):
    """``items`` in babble of ``others`` (even files) or steady fan noise (odd files) at ``snr`` dB."""
    from wordspot.audio.augment import babble, mix_at_snr, speech_span, steady_noise, talker_stream

    rng = np.random.default_rng(seed)
    stream = [talker_stream([w for w, _ in others[k::3]]) for k in range(3)]
    out = []
    for i, (wave, ref) in enumerate(items):
        noise = steady_noise(len(wave), rng) if i % 2 else babble(stream, len(wave), rng)
        out.append((mix_at_snr(wave, noise, snr, span=speech_span(wave, 16000)).astype(np.float32), ref))
    return out


def heard(model, sets):
    """{set: [(reference, words, confidences)]}, every file recognised once with no threshold."""
    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer

    from dataclasses import replace

    rec = build_recognizer(model, settings=replace(DecoderSettings(), min_confidence=0.0))
    out = {}
    for name, items in sets.items():
        out[name] = []
        for wave, ref in items:
            segs = rec.decode(compute_features(wave, model.features)).segments
            out[name].append((ref, [g.word for g in segs], np.array([g.confidence for g in segs])))
    return out


def wer(items, t: float) -> float:
    from wordspot.evaluation.scoring import align_words

    e = n = 0
    for ref, words, conf in items:
        a = align_words(ref, [w for w, c in zip(words, conf) if c >= t])
        e += a.substitutions + a.deletions + a.insertions
        n += len(ref)
    return 100 * e / n


def firing(items, t: float) -> float:
    return 100 * float(np.mean([bool((c >= t).any()) for _, _, c in items]))


FINE = np.unique(np.r_[0.0, np.geomspace(0.001, 0.9, 120)])
COMMAND_SETS = ("user", "user 20 dB", "words", "real phrases", "noisy 20 dB")
NO_COMMAND_SETS = ("other talk", "noise only")


def figures(h, target_talk: float | None):
    """Row of figures of one model's recognitions; ``target_talk``: other-talk firing to match."""
    from wordspot.decoding.confidence import DEFAULT_MIN_CONFIDENCE as T

    row = {}
    for name in COMMAND_SETS:
        if name in h:
            row[f"{name} WER"] = wer(h[name], T)
    for name in ("user", "user 20 dB"):
        row[f"{name} WER, search alone"] = wer(h[name], 0.0)
    for name in NO_COMMAND_SETS:
        row[f"{name} firing"] = firing(h[name], T)
    if target_talk is not None:
        t = next((x for x in FINE if firing(h["other talk"], x) <= target_talk + 1e-9), FINE[-1])
        row["threshold at equal other talk"] = float(t)
        for name in ("user", "user 20 dB", "words"):
            row[f"{name} WER at equal other talk"] = wer(h[name], t)
        row["noise only firing at equal other talk"] = firing(h["noise only"], t)
    return row


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2])
    ap.add_argument("--cases", nargs="+", default=["alone", "with dev voices"], choices=["alone", "with dev voices"])
    ap.add_argument("--min-gain", type=float, nargs="+", default=None,
                    help="learning settings to try beside off (default: the LearningConfig default)")
    ap.add_argument("--min-share", type=float, default=None, help="the share of a speaker's takes to win "
                    "(default: the LearningConfig default)")
    args = ap.parse_args(argv)

    from tune_filler import dev_sets, write_dev_train_manifest
    from wordspot import api
    from wordspot.evaluation.calibrate import CalibrationConfig
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.adapt import AdaptationConfig
    from wordspot.training.pronunciations import LearningConfig

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    common = dev_sets(SimpleNamespace(lexicon=lexicon), 0, snrs=(20.0,))  # other talk: no bakery word
    common = {k: v for k, v in common.items() if k in ("words", "real phrases", "noisy 20 dB") + NO_COMMAND_SETS}
    print("dev sets: " + ", ".join(f"{k} {len(v)}" for k, v in common.items()), flush=True)
    systems = {"off": LearningConfig(enabled=False)}
    for g in args.min_gain or [LearningConfig.min_gain]:
        share = LearningConfig.min_share if args.min_share is None else args.min_share
        systems[f"on (gain {g:g}, share {share:g})"] = LearningConfig(enabled=True, min_gain=g, min_share=share)
    results: dict = {}
    for seed in args.seeds:
        with tempfile.TemporaryDirectory(prefix="wordspot-accent-") as tmp:
            tmp = Path(tmp)
            manifest, test, voice, table, said = user_takes(lexicon, seed, tmp)
            moves = ", ".join(f"{v}->{' '.join(t)}" for v, t in sorted(table.items()))
            print(f"\nseed {seed}: {voice}, accent {moves}", flush=True)
            sets = {"user": test, "user 20 dB": in_noise(test, common["words"], 20.0, seed), **common}
            dev_train = write_dev_train_manifest(tmp / "dev-train.csv")
            both = tmp / "both.csv"
            with open(both, "w", encoding="utf-8") as fh:
                fh.write(Path(dev_train).read_text(encoding="utf-8"))
                fh.write("".join(Path(manifest).read_text(encoding="utf-8").splitlines(True)[1:]))
            if seed == args.seeds[0]:  # compile every kernel once, so the timed trainings compare alike
                api.train(manifest, lexicon, start="starter", config=AdaptationConfig(
                    seed=seed, pronunciations=LearningConfig(enabled=True)), calibration=CalibrationConfig(seed=seed))
            for case in args.cases:
                target = None
                for name, learning in systems.items():
                    config = AdaptationConfig(seed=seed, pronunciations=learning)
                    c0 = time.process_time()
                    model = api.train(manifest if case == "alone" else both, lexicon, start="starter",
                                      config=config, calibration=CalibrationConfig(seed=seed))
                    cpu = time.process_time() - c0
                    h = heard(model, sets)
                    row = figures(h, target)
                    if target is None:
                        target = row["other talk firing"]
                    row["training CPU s"] = cpu
                    learned = model.info.get("learned_pronunciations", {})
                    row["words learned"] = len(learned)
                    right = sum(any(p == said[w] for p in ps) for w, ps in learned.items())
                    row["learned as said"] = right
                    row["learning CPU s (the run)"] = model.info.get("learning_cpu_seconds", 0.0)
                    results.setdefault((case, name), []).append(row)
                    print(f"  {case} / {name}: " + ", ".join(f"{k} {v:.3g}" for k, v in row.items()), flush=True)
                    if learned:
                        print("    learned: " + "; ".join(f"{w} {' | '.join(ps)} (said {said[w]})"
                                                       for w, ps in sorted(learned.items())), flush=True)
    print()
    for case in args.cases:
        keys = list(results[(case, "off")][0])
        print(f"\n{case}: mean (min-max) over seeds {args.seeds}\n")
        print("| figure | " + " | ".join(systems) + " |")
        print("| --- |" + " ---: |" * len(systems))
        for k in keys:
            cells = []
            for name in systems:
                a = np.array([r.get(k, np.nan) for r in results[(case, name)]], dtype=float)
                cells.append(f"{a.mean():.2f} ({a.min():.2f}-{a.max():.2f})" if np.isfinite(a).all() else "-")
            print(f"| {k} | " + " | ".join(cells) + " |")
        off = np.array([r["training CPU s"] for r in results[(case, "off")]])
        for name in list(systems)[1:]:
            on = np.array([r["training CPU s"] for r in results[(case, name)]])
            print(f"\nCPU time ratio {name} / off: " + ", ".join(f"{x:.3f}" for x in on / off))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
