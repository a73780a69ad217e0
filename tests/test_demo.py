"""The demo's sets and tables: word sets, commands among distractors, the long recordings."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from wordspot.demo import DemoRow, demo_row, demo_sets, long_row, read_long_reference, render_table
from wordspot.errors import WordspotError

RECORDINGS = Path(__file__).resolve().parents[1] / "recordings"
pytestmark = pytest.mark.skipif(not (RECORDINGS / "distractors.csv").is_file(), reason="demo recordings not present")


def test_demo_sets_add_the_test_commands_among_the_distractors():
    sets = {ds.name: ds for ds in demo_sets(RECORDINGS)}
    assert [n for n, ds in sets.items() if ds.kind == "words"] == [
        "test", "test-noisy-20dB", "test-noisy-10dB", "test-noisy-5dB", "test-phrases", "new-words"]
    mixed = sets["test+distractors"]
    assert mixed.kind == "detection"
    quiet = [u for u in mixed.utterances if not u.words]
    assert mixed.utterances[:250] == sets["test"].utterances
    assert len(quiet) == 240 == len(mixed.utterances) - 250  # recordings/README.md


@pytest.fixture(scope="module")
def small_evaluation():
    """The shipped starter with the bakery words on 6 noisy (5 dB) test files and 6 distractors."""
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    model = load_model("starter")
    model.lexicon = read_lexicon(RECORDINGS.parent / "lexicon" / "bakery.txt")
    sets = {ds.name: ds for ds in demo_sets(RECORDINGS)}
    mixed = sets["test+distractors"]
    commands = list(sets["test-noisy-5dB"].utterances[::20][:6])  # noisy: some misses to count
    quiet = [u for u in mixed.utterances if not u.words][::40][:6]
    ev = evaluate_utterances(model, commands + quiet, name="small", n_bootstrap=50)
    return mixed, ev


def test_detection_row_counts_match_an_independent_count(small_evaluation):
    jiwer = pytest.importorskip("jiwer")
    ds, ev = small_evaluation
    row = demo_row(ds, ev.result)
    items = ev.result.scores
    commands = [(s.utterance.reference, rec) for s, rec in zip(items, ev.recognitions) if s.utterance.reference]
    quiet = [rec for s, rec in zip(items, ev.recognitions) if not s.utterance.reference]
    assert row.kind == "detection" and row.non_command_files == len(quiet) == 6
    # Miss rate (S + D) / N on the command items, counted by jiwer's word alignment.
    out = jiwer.process_words([" ".join(r) for r, _ in commands], [" ".join(rec.words) or "" for _, rec in commands])
    n = sum(len(r) for r, _ in commands)
    assert row.miss_rate == pytest.approx((out.substitutions + out.deletions) / n, abs=1e-12)
    # False accepts: files with any word, and words per hour of the no-command audio.
    assert row.false_accept_files == sum(1 for rec in quiet if rec.words)
    hours = sum(sf.info(str(s.utterance.path)).duration for s in items if not s.utterance.reference) / 3600
    words = sum(len(rec.words) for rec in quiet)
    # Recognition.duration is whole frames (10 ms hop): within a frame or two of the file length.
    assert row.false_accepts_per_hour == pytest.approx(words / hours, rel=0.02, abs=1e-9)
    assert row.to_dict()["false_accept_share"] == pytest.approx(row.false_accept_files / 6, abs=1e-12)


def _row(name, kind="words", **kw):
    base = dict(utterances=10, words=10, wer=0.1, wer_ci95=(0.0, 0.2), substitutions=1, deletions=0,
                insertions=0, note=f"note of {name}")
    base.update(kw)
    return DemoRow(name, kind=kind, **base)


def test_render_table_keeps_detection_and_long_rows_out_of_the_wer_table():
    rows = {
        "a": [_row("test"), _row("test+distractors", "detection", utterances=20, miss_rate=0.25,
                                 non_command_files=10, false_accept_files=1, false_accepts_per_hour=72.0),
              _row("long", "long", utterances=6, words=75, seconds=480.0, note="long-recording results: "
                   "not available in this build")],
        "b": [_row("test", wer=0.3), _row("test+distractors", "detection", utterances=20, miss_rate=None,
                                          non_command_files=10, false_accept_files=0, false_accepts_per_hour=0.0),
              _row("long", "long", utterances=6, words=75, seconds=480.0, note="long-recording results: "
                   "not available in this build")],
    }
    lines = render_table(rows).splitlines()
    wer_table = lines[:lines.index("")]
    assert len(wer_table) == 3 and wer_table[2].startswith("test ")
    assert "10.0% (0.0%-20.0%)" in wer_table[2] and "30.0%" in wer_table[2]
    detection = lines[lines.index("") + 1:]
    assert detection[0] == "test+distractors: note of test+distractors"
    assert detection[1] == "(10 command files with 10 words, 10 files with no command)"
    a, b = detection[4].split(), detection[5].split()
    assert a == ["a", "25.0%", "10.0%", "(1", "of", "10)", "72.0"]
    assert b == ["b", "-", "0.0%", "(0", "of", "10)", "0.0"]
    assert lines[-2] == "long recordings: 6 files, 8.0 min, 75 embedded commands (long.csv)"
    assert lines[-1] == "long-recording results: not available in this build"


def test_long_reference_counts_files_commands_and_minutes():
    ref = read_long_reference(RECORDINGS / "long.csv")
    with open(RECORDINGS / "long.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert ref.commands == len(rows) == sum(1 for r in rows if r["words"])
    assert [p.relative_to(RECORDINGS).as_posix() for p in ref.files] == list(dict.fromkeys(r["path"] for r in rows))
    # soundfile's frame count over the sample rate, file by file (reference: libsndfile).
    seconds = 0.0
    for p in ref.files:
        x, sr = sf.read(str(p), dtype="int16")
        seconds += len(x) / sr
    assert ref.seconds == pytest.approx(seconds, abs=1e-9)


def test_long_reference_errors_name_the_file(tmp_path):
    bad = tmp_path / "long.csv"
    bad.write_text("path,transcript,speaker\nx.flac,,\n", encoding="utf-8")
    with pytest.raises(WordspotError, match=r"long\.csv: expected a CSV with the header path,start,end,words"):
        read_long_reference(bad)
    bad.write_text("path,start,end,words\nmissing.flac,1.000,2.000,stop\n", encoding="utf-8")
    with pytest.raises(WordspotError, match=r"not found: .*missing\.flac"):
        read_long_reference(bad)


def test_long_row_without_scan_says_so():
    row = long_row(None, read_long_reference(RECORDINGS / "long.csv"), scan=None)
    assert row.kind == "long" and row.utterances == 6 and 60 * 6 <= row.seconds <= 120 * 6
    assert row.note == "long-recording results: not available in this build"
    assert row.to_dict()["commands"] == row.words and math.isnan(row.wer)
    assert np.isnan(row.wer_ci95).all()
