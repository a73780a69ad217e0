"""The demo's sets and tables: word sets, commands among distractors, the long recordings."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from wordspot.demo import DemoRow, demo_row, demo_sets, long_row, render_table, side_by_side_det
from wordspot.evaluation.detection import normal_deviate, trade_off
from wordspot.errors import WordspotError

REPO = Path(__file__).resolve().parents[1]
RECORDINGS = REPO / "recordings"
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
    ev = evaluate_utterances(model, _small_set(), name="small", n_bootstrap=50)
    return mixed, ev


def _small_set():
    """6 noisy (5 dB) test files (some misses to count) and 6 distractors."""
    sets = {ds.name: ds for ds in demo_sets(RECORDINGS)}
    commands = list(sets["test-noisy-5dB"].utterances[::20][:6])
    quiet = [u for u in sets["test+distractors"].utterances if not u.words][::40][:6]
    return commands + quiet


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
    # the equal error rate of the set's trade-off, in the row and its JSON form
    assert row.equal_error_rate == trade_off([s.utterance for s in items]).equal_error_rate
    assert row.to_dict()["equal_error_rate"] == row.equal_error_rate


def _row(name, kind="words", **kw):
    base = dict(utterances=10, words=10, wer=0.1, wer_ci95=(0.0, 0.2), substitutions=1, deletions=0,
                insertions=0, note=f"note of {name}")
    base.update(kw)
    return DemoRow(name, kind=kind, **base)


def test_render_table_keeps_detection_and_long_rows_out_of_the_wer_table():
    long_a = dict(utterances=6, words=75, seconds=480.0, hits=60, false_accepts=4, false_accepts_per_hour=30.0,
                  on_time=0.9, scan_seconds=12.5)
    long_b = dict(long_a, hits=0, false_accepts=0, false_accepts_per_hour=0.0, on_time=None)
    rows = {
        "a": [_row("test"), _row("test+distractors", "detection", utterances=20, miss_rate=0.25,
                                 non_command_files=10, false_accept_files=1, false_accepts_per_hour=72.0,
                                 equal_error_rate=0.125),
              _row("long", "long", **long_a)],
        "b": [_row("test", wer=0.3), _row("test+distractors", "detection", utterances=20, miss_rate=None,
                                          non_command_files=10, false_accept_files=0, false_accepts_per_hour=0.0),
              _row("long", "long", **long_b)],
    }
    lines = render_table(rows).splitlines()
    wer_table = lines[:lines.index("")]
    assert len(wer_table) == 3 and wer_table[2].startswith("test ")
    assert "10.0% (0.0%-20.0%)" in wer_table[2] and "30.0%" in wer_table[2]
    detection = lines[lines.index("") + 1:]
    assert detection[0] == "test+distractors: note of test+distractors"
    assert detection[1] == "(10 command files with 10 words, 10 files with no command)"
    assert detection[2].split()[-1] == "EER"
    a, b = detection[4].split(), detection[5].split()
    assert a == ["a", "25.0%", "10.0%", "(1", "of", "10)", "72.0", "12.5%"]
    assert b == ["b", "-", "0.0%", "(0", "of", "10)", "0.0", "-"]
    assert lines[-5] == "long recordings (wordspot scan): 6 files, 8.0 min, 75 embedded commands (long.csv)"
    # 60 of 75 found = 80%; 30 per hour = 2.5 per 5 minutes (arithmetic)
    assert lines[-2].split() == ["a", "80.0%", "(60", "of", "75)", "4", "(2.5", "per", "5", "min)", "90.0%", "12.5"]
    assert lines[-1].split() == ["b", "0.0%", "(0", "of", "75)", "0", "(0.0", "per", "5", "min)", "-", "12.5"]


def test_long_row_scans_the_long_recordings():
    # The shipped starter with the bakery words on the demo's long set: the row counts
    # what long.csv lists (read with the csv module) and the audio's length (libsndfile).
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    model = load_model("starter")
    model.lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    row = long_row(model, RECORDINGS / "long.csv", jobs=1)
    with open(RECORDINGS / "long.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    files = list(dict.fromkeys(r["path"] for r in rows))
    assert row.kind == "long" and row.utterances == len(files) == 6
    assert row.words == sum(1 for r in rows if r["words"].strip())
    assert row.seconds == pytest.approx(sum(sf.info(str(RECORDINGS / f)).duration for f in files), abs=0.05)
    assert 0 < row.hits <= row.words and row.false_accepts >= 0
    assert row.false_accepts_per_hour == pytest.approx(row.false_accepts / (row.seconds / 3600), rel=1e-3)
    d = row.to_dict()
    assert d["hits"] == row.hits and d["hit_rate"] == pytest.approx(row.hits / row.words) and math.isnan(row.wer)


@pytest.fixture(scope="module")
def two_systems(small_evaluation):
    """The small set evaluated by the starter and by the starter without its scorer (its
    calibration reads the scorer, so without it the word confidences are the heuristic)."""
    from wordspot.evaluation.mixtures_only import without_scorer
    from wordspot.evaluation.run import evaluate_utterances
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    _, ev = small_evaluation
    bare = without_scorer(load_model("starter"))
    bare.lexicon = read_lexicon(RECORDINGS.parent / "lexicon" / "bakery.txt")
    other = evaluate_utterances(bare, _small_set(), name="small", n_bootstrap=50)
    return {"starter": [ev], "starter-no-scorer": [other]}


def _det_rows(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_side_by_side_det_draws_one_curve_per_system_from_their_own_tables(two_systems, tmp_path):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from wordspot.evaluation.report import _trade_offs_figure, write_report

    own = {}
    for name, (ev,) in two_systems.items():
        own[name] = _det_rows(write_report(ev.result, tmp_path / name / "small", picture=False).trade_off_table)
    # the two systems' confidences differ, so their trade-offs do
    assert [r["miss_rate"] for r in own["starter"]] != [r["miss_rate"] for r in own["starter-no-scorer"]] or \
        [r["false_accept_rate"] for r in own["starter"]] != [r["false_accept_rate"] for r in own["starter-no-scorer"]]
    table, picture = side_by_side_det(two_systems, tmp_path, set_name="small")
    assert table == tmp_path / "det.csv" and picture == tmp_path / "det.png"
    assert picture.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (PNG specification)
    combined = _det_rows(table)
    assert list(dict.fromkeys(r["system"] for r in combined)) == ["starter", "starter-no-scorer"]
    for name, rows in own.items():
        mine = [{k: v for k, v in r.items() if k != "system"} for r in combined if r["system"] == name]
        assert mine == rows
    # the picture's data: one curve per system, at the normal deviates of its own table's rates
    def make(**options):
        fig = Figure(**options)
        FigureCanvasAgg(fig)
        return fig

    curves = {name: trade_off([s.utterance for s in ev.result.scores]) for name, (ev,) in two_systems.items()}
    ax = _trade_offs_figure(curves, make, "t").axes[0]
    lines = {line.get_gid(): line for line in ax.get_lines() if line.get_gid() in own}
    assert list(lines) == ["starter", "starter-no-scorer"]
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert [t.split(" (")[0] for t in legend] == ["starter", "starter-no-scorer"]
    for name, rows in own.items():
        x = normal_deviate([float(r["false_accept_rate"]) for r in rows])
        y = normal_deviate([float(r["miss_rate"]) for r in rows])
        np.testing.assert_allclose(lines[name].get_xdata(), x, atol=1e-5)  # the table keeps 6 decimals
        np.testing.assert_allclose(lines[name].get_ydata(), y, atol=1e-5)


def test_side_by_side_det_needs_a_set_with_both_kinds(two_systems, tmp_path):
    assert side_by_side_det(two_systems, tmp_path, set_name="no such set") is None
    assert not (tmp_path / "det.png").exists()


def test_starter_no_scorer_without_the_dev_split_is_left_out_saying_why(tmp_path):
    from wordspot.demo import run_demo
    from wordspot.errors import WordspotWarning

    missing = tmp_path / "no-corpus" / "dev.csv"
    with pytest.warns(WordspotWarning, match=r"starter-no-scorer left out: .*no-corpus/dev\.csv is not there"):
        with pytest.raises(WordspotError, match="no demo system left to run"):
            run_demo(RECORDINGS, tmp_path / "out", systems=("starter-no-scorer",), starter_dev=missing, say=lambda _: None)
    with pytest.raises(WordspotError, match="unknown demo system"):
        run_demo(RECORDINGS, tmp_path / "out", systems=("starter-mixtures",), say=lambda _: None)
