#!/usr/bin/env python3
"""Choose the filler and pause penalties on dev material only.

Dev material (no demo test voice, no demo test recording):

* ``words``: the demo training recordings of the dev voices (``dev_candidate`` in
  ``recordings/voices.csv``), one command each, recognised in the word loop;
* ``joined``: 2-4 of those recordings of one voice joined by 0.3-1 s gaps of white or pink
  noise, mains hum or dithered digital silence at -70 to -40 dBFS (as
  ``joined_pauses.py`` does with the test voices);
* ``phrases``: 2-4 of those recordings of one voice cut to their spoken span (the
  ``speech_start`` / ``speech_end`` columns of ``train.csv``) and joined with 30-120 ms of
  the first recording's own room tone between them: commands said in one breath, without
  the coarticulation of a real phrase (a stand-in; the demo's phrases are test voices);
* ``real phrases``: 90 multi-word commands synthesised by the dev voices
  (``dev_phrases.py``; only where the text-to-speech engines are installed): quicker and
  coarticulated, as the demo's test phrases are;
* ``other talk``: the starter corpus's dev recordings (its own dev voices) whose words are
  none of the lexicon's: every command word recognised there is a false accept;
* ``noise only``: 60 clips of 1-4 s of one background each, drawn with the training
  recipes (:func:`wordspot.training.backgrounds.plan_backgrounds`, another seed; babble
  from the other-talk recordings): every command word there is a false accept.

The model must not have heard the dev voices: adapt the starter on the other training
voices first, e.g.::

    python tests/benchmarks/tune_filler.py --model dev.model

(``--make-model`` writes that model first: the starter adapted with the current defaults,
or with ``--background-share F`` / ``--model-seed N``.) Emissions are computed once per
file; every setting then re-runs only the search.
"""

from __future__ import annotations

import argparse
import csv
import sys
import tempfile
from collections import defaultdict
from itertools import product
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))

from compare_data import dev_voices  # noqa: E402
from joined_pauses import KINDS, RATE, background  # noqa: E402


#: The sets without commands: every word heard there is a false accept.
NO_COMMAND = ("other talk", "noise only", "everyday words", "impacts", "other impacts")


def _rows(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def write_dev_train_manifest(path: Path) -> Path:
    """A manifest of the demo training recordings whose voices are not dev voices."""
    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["path", "transcript", "speaker"])
        for r in _rows(rec / "train.csv"):
            if r["speaker"] not in held:
                w.writerow([str(rec / r["path"]), r["transcript"], r["speaker"]])
    return path


def make_dev_model(out: Path, background_share: float | None = None, seed: int = 0) -> None:
    """Adapt the starter on the demo training voices that are not dev voices."""
    from wordspot import api
    from wordspot.training.adapt import AdaptationConfig

    with tempfile.TemporaryDirectory() as tmp:
        manifest = write_dev_train_manifest(Path(tmp) / "dev-train.csv")
        share = {} if background_share is None else {"background_share": background_share}
        api.train(manifest, REPO / "lexicon" / "bakery.txt", out=out, start="starter",
                  config=AdaptationConfig(seed=seed, **share))


def dev_sets(model, n_joined: int, seed: int = 20261203, snrs=(10.0,), no_command: bool = False, voice=None):
    """(name, list of (waveform, reference words)) for the dev sets.

    ``snrs``: the SNRs of the sets of dev commands in noise ("noisy 10 dB", ...), each
    with the same noise (babble for even, fan for odd recordings). ``no_command``: also the
    sets "everyday words" (the dev voices saying frequent words that are no command) and
    "impacts" (knocks, clinks, taps, scrapes) and "other impacts" (a second recipe, dev only)
    of ``dev_no_command.py``. ``voice``: a function ``(waveform, speaker)`` applied to every
    recording of the dev voices and every real phrase (``far_voices_dev.py``: another vocal
    tract), not to the sets without commands."""
    from wordspot.audio.reading import load_audio

    rec = REPO / "recordings"
    held = set(dev_voices(rec / "voices.csv"))
    words = [r for r in _rows(rec / "train.csv") if r["speaker"] in held]
    voice = voice or (lambda w, _: w)
    sets = {"words": [(voice(load_audio(rec / r["path"], sample_rate=RATE), r["speaker"]), r["transcript"].split())
                      for r in words]}

    rng = np.random.default_rng(seed)
    by_voice = defaultdict(list)
    for (wave, ref), r in zip(sets["words"], words):
        by_voice[r["speaker"]].append((wave, ref))
    voices = sorted(by_voice)
    joined = []
    for i in range(n_joined):
        pool = by_voice[voices[i % len(voices)]]
        picks = [pool[k] for k in rng.choice(len(pool), size=rng.integers(2, 5), replace=False)]
        kind, level = KINDS[i % len(KINDS)], rng.uniform(-70, -40)
        parts = [background(kind, int(0.3 * RATE), level, rng)]
        for j, (wave, _) in enumerate(picks):
            parts.append(wave)
            gap = int(rng.uniform(0.3, 1.0) * RATE) if j < len(picks) - 1 else int(0.3 * RATE)
            parts.append(background(kind, gap, level, rng))
        joined.append((np.concatenate(parts).astype(np.float32), [w for _, ref in picks for w in ref]))
    sets["joined"] = joined

    spans = {}
    for (wave, ref), r in zip(sets["words"], words):
        a, b = int(float(r["speech_start"]) * RATE), int(float(r["speech_end"]) * RATE)
        spans.setdefault(r["speaker"], []).append((wave, ref, a, b))
    phrases = []
    for i in range(n_joined):
        pool = spans[voices[i % len(voices)]]
        picks = [pool[k] for k in rng.choice(len(pool), size=rng.integers(2, 5), replace=False)]
        first, _, a0, _ = picks[0]
        tone = first[:max(a0 - int(0.02 * RATE), int(0.05 * RATE))]
        parts = [tone]
        for j, (wave, _, a, b) in enumerate(picks):
            parts.append(wave[a:b])
            gap = int(rng.uniform(0.03, 0.12) * RATE) if j < len(picks) - 1 else len(tone)
            parts.append(np.resize(tone, gap))
        phrases.append((np.concatenate(parts).astype(np.float32), [w for _, ref, _, _ in picks for w in ref]))
    sets["phrases"] = phrases
    from dev_phrases import dev_phrase_set  # real phrases by the dev voices (needs the TTS engines)

    real = dev_phrase_set()
    if real:
        speakers = dev_voices(rec / "voices.csv")  # dev_phrases.py: phrase i said by dev voice i mod 3, in this order
        sets["real phrases"] = [(voice(w, speakers[i % len(speakers)]), ref) for i, (w, ref) in enumerate(real)]

    # the dev commands in babble (other dev voices' speech) or fan noise at 10 dB SNR
    from wordspot.audio.augment import babble, mix_at_snr, speech_span, steady_noise, talker_stream

    streams = {v: talker_stream([w for w, _ in by_voice[v]]) for v in voices}
    noisy = {snr: [] for snr in snrs}
    for i, ((wave, ref), r) in enumerate(zip(sets["words"], words)):
        if i % 2:
            noise = steady_noise(len(wave), rng)
        else:
            others = [streams[v] for v in voices if v != r["speaker"]]
            noise = babble(others, len(wave), rng)
        span = speech_span(wave, RATE)
        for snr in snrs:
            noisy[snr].append((mix_at_snr(wave, noise, snr, span=span).astype(np.float32), ref))
    for snr in snrs:
        sets[f"noisy {snr:g} dB"] = noisy[snr]

    vocab = set(model.lexicon.words) | set(_demo_new_words())
    starter_dev = rec / "starter" / "dev.csv"
    if starter_dev.exists():
        other = [r for r in _rows(starter_dev) if not (set(r["transcript"].split()) & vocab)]
        sets["other talk"] = [(load_audio(starter_dev.parent / r["path"], sample_rate=RATE), []) for r in other]
    else:
        print(f"note: {starter_dev} is missing (python recordings/starter.py build); no 'other talk' set")
    sets["noise only"] = noise_only(sets.get("other talk") or sets["words"], rng)
    if no_command:
        from dev_no_command import everyday_word_set, impact_set, other_impact_set

        words_alone = everyday_word_set()
        if words_alone:
            sets["everyday words"] = words_alone
        sets["impacts"] = impact_set()
        sets["other impacts"] = other_impact_set()
    return sets


def noise_only(talk, rng, n: int = 60):
    """``n`` clips of 1-4 s of one background each, from the training recipes."""
    from wordspot.training.backgrounds import background_wave, plan_backgrounds

    pool = {f"t{k % 8}": [] for k in range(8)}  # eight babble talkers from the given recordings
    for k, (wave, _) in enumerate(talk[:96]):
        pool[f"t{k % 8}"].append((k, wave))
    recipes = plan_backgrounds(n, sorted(pool), seed=int(rng.integers(2**31)), seconds=(1.0, 4.0))
    return [(background_wave(r, pool, RATE), []) for r in recipes]


def _demo_new_words() -> list[str]:
    return [r["transcript"] for r in _rows(REPO / "recordings" / "new-words.csv")]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--model", type=Path, required=True)
    ap.add_argument("--make-model", action="store_true", help="adapt the starter on the non-dev voices first")
    ap.add_argument("--background-share", type=float, default=None,
                    help="with --make-model: the adaptation's background share (default: its default)")
    ap.add_argument("--model-seed", type=int, default=0, help="with --make-model: the adaptation's seed")
    ap.add_argument("--joined", type=int, default=100)
    ap.add_argument("--phone", type=float, nargs="+", default=[-20.0, -30.0, -40.0, -50.0, -60.0])
    ap.add_argument("--pause", type=float, nargs="+", default=[0.0, -10.0, -30.0])
    ap.add_argument("--frame", type=float, nargs="+", default=[0.0])
    ap.add_argument("--single-word", action="store_true")
    args = ap.parse_args(argv)

    from wordspot.audio.features import compute_features
    from wordspot.decoding.decoder import DecoderSettings, build_recognizer
    from wordspot.evaluation.scoring import align_words
    from wordspot.model import load_model

    if args.make_model:
        make_dev_model(args.model, args.background_share, args.model_seed)
    model = load_model(args.model)
    sets = dev_sets(model, args.joined)
    base = build_recognizer(model, settings=DecoderSettings(single_word=args.single_word))
    cached = {name: [(base.emissions(compute_features(w, model.features)), ref) for w, ref in items]
              for name, items in sets.items()}
    print(f"model {args.model}; " + ", ".join(f"{k} {len(v)} files" for k, v in cached.items()))
    print("| filler | phone | pause | frame | " + " | ".join(
        f"{k}: files with a word" if k in NO_COMMAND else f"{k}: right, WER" for k in cached) + " |")

    def run(settings):
        rec = build_recognizer(model, settings=settings)
        assert np.array_equal(rec.network.used_mixtures, base.network.used_mixtures) or not settings.filler
        cells = []
        for name, items in cached.items():
            right = errors = words = 0
            for ll, ref in items:
                ll_used = ll if settings.filler else ll[:, np.searchsorted(base.network.used_mixtures,
                                                                           rec.network.used_mixtures)]
                hyp = rec.search(ll_used).words
                right += hyp == ref
                a = align_words(ref, hyp)
                errors += a.substitutions + a.deletions + a.insertions
                words += len(ref)
            if name in NO_COMMAND:
                cells.append(f"{100 * (1 - right / len(items)):.1f}% with a word")
            else:
                cells.append(f"{100 * right / len(items):.0f}%, {100 * errors / max(words, 1):.1f}%")
        return cells

    print("| off | | | | " + " | ".join(run(DecoderSettings(filler=False, single_word=args.single_word))) + " |",
          flush=True)
    for phone, pause, frame in product(args.phone, args.pause, args.frame):
        s = DecoderSettings(single_word=args.single_word, filler_penalty=phone, pause_penalty=pause,
                            filler_frame_penalty=frame)
        print(f"| on | {phone:g} | {pause:g} | {frame:g} | " + " | ".join(run(s)) + " |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
