"""Tests of wordspot.evaluation.report: text rendering and the report folder."""

import csv
import json
import re
import sys

import numpy as np
import pytest

from wordspot.errors import WordspotError, WordspotWarning
from wordspot.evaluation.report import (
    DELETED_LABEL,
    render_result,
    render_speaker_table,
    render_summary,
    render_word_table,
    write_report,
)
from wordspot.evaluation.scoring import ScoredUtterance, score_utterances


def _result():
    # (worked by hand, same set as tests/evaluation/test_scoring.py::test_tables_on_small_example)
    # S=1, D=3, I=1, N=10, WER 50.00%; 3 of 4 utterances wrong (75.00%);
    # ann WER 1/4 = 25.00%, bo WER 4/6 = 66.67%.
    recs = [
        ScoredUtterance.from_text("ann/1.wav", "ann", "oven on", "oven on"),
        ScoredUtterance.from_text("ann/2.wav", "ann", "mixer off", "mixer of off"),
        ScoredUtterance.from_text("bo/1.wav", "bo", "set timer ten minutes", "set ten minute"),
        ScoredUtterance.from_text("bo/2.wav", "bo", "oven off", ""),
    ]
    return score_utterances(recs, n_bootstrap=300, seed=2)


def _read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_summary_shows_the_figures():
    r = _result()
    text = render_summary(r, title="bakery test set")
    low, high = r.wer_ci95
    assert text.splitlines()[0] == "bakery test set"
    assert "50.00%" in text
    assert f"{100 * low:.2f}%" in text and f"{100 * high:.2f}%" in text
    assert "likely lie between" in text and "300 bootstrap draws" in text
    assert "3 of 4" in text and "75.00%" in text
    for label, value in [("heard as another word", 1), ("missed", 3), ("heard but not said", 1), ("words said", 10),
                         ("recordings scored", 4)]:
        line = next(line.strip() for line in text.splitlines() if line.strip().startswith(label))
        assert line[len(label):].split()[0] == str(value)
    # in plain words; the trade's terms only in parentheses
    assert "utterance" not in text and "replicates" not in text and "reference words" not in text
    assert "(substitutions)" in text and "(deletions)" in text and "(insertions)" in text


def test_tables_show_the_rows():
    r = _result()
    words = render_word_table(r)
    minutes = next(line for line in words.splitlines() if line.startswith("minutes"))
    assert minutes.split() == ["minutes", "1", "1", "100.00%", "0", "minute", "x1"]
    timer = next(line for line in words.splitlines() if line.startswith("timer"))
    assert f"{DELETED_LABEL} x1" in timer
    short = render_word_table(r, limit=2)
    assert len(short.splitlines()) == 2 + 2 + 1  # header, rule, two rows, the "more words" note
    assert f"({len(r.word_table) - 2} more words" in short
    speakers = render_speaker_table(r)
    # Column names spelt out, the same words as the HTML report's speaker table.
    from wordspot.evaluation.html_report import _speaker_table

    html_names = re.findall(r"<th>([^<]*)</th>", _speaker_table(r))
    assert [c.strip() for c in re.split(r" {2,}", speakers.splitlines()[0])] == html_names
    assert html_names[3:6] == ["substituted", "deleted", "inserted"]
    ann = next(line for line in speakers.splitlines() if line.startswith("ann"))
    bo = next(line for line in speakers.splitlines() if line.startswith("bo"))
    assert ann.split() == ["ann", "2", "4", "0", "0", "1", "25.00%", "1"]
    assert bo.split() == ["bo", "2", "6", "1", "3", "0", "66.67%", "2"]
    whole = render_result(r)
    assert "By word" in whole and "By speaker" in whole and "50.00%" in whole


def test_report_folder(tmp_path):
    r = _result()
    files = write_report(r, tmp_path / "report" / "inner")
    for path in (files.errors, files.words, files.speakers, files.summary, files.confusions):
        assert path.is_file() and path.stat().st_size > 0
    errors = _read_csv(files.errors)
    # only the three utterances with errors, in input order (worked by hand)
    assert [row["file"] for row in errors] == ["ann/2.wav", "bo/1.wav", "bo/2.wav"]
    assert errors[1] == {"file": "bo/1.wav", "reference": "set timer ten minutes", "recognised": "set ten minute"}
    assert errors[2]["recognised"] == ""
    words = {row["word"]: row for row in _read_csv(files.words)}
    assert set(words) == {row.word for row in r.word_table}
    assert (words["oven"]["reference_count"], words["oven"]["errors"]) == ("2", "1")
    assert words["of"]["inserted"] == "1" and words["of"]["error_rate"] == ""
    speakers = _read_csv(files.speakers)
    assert [s["speaker"] for s in speakers] == ["ann", "bo"]
    assert float(speakers[1]["wer"]) == pytest.approx(4 / 6, abs=1e-6)
    assert json.loads(files.summary.read_text()) == json.loads(json.dumps(r.to_dict()))
    assert files.confusions.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_report_without_matplotlib(tmp_path, monkeypatch):
    # A None entry in sys.modules makes the import fail as if matplotlib were not installed.
    monkeypatch.setitem(sys.modules, "matplotlib.figure", None)
    monkeypatch.setitem(sys.modules, "matplotlib.backends.backend_agg", None)
    with pytest.warns(WordspotWarning, match="matplotlib is not installed"):
        files = write_report(_result(), tmp_path)
    assert files.confusions is None
    assert not (tmp_path / "confusions.png").exists()
    assert files.errors.is_file()


def test_report_folder_that_is_a_file(tmp_path):
    target = tmp_path / "taken"
    target.write_text("not a folder")
    with pytest.raises(WordspotError, match="report folder .*taken"):
        write_report(_result(), target)


def _rgb(hex_colour):
    return tuple(int(hex_colour[k:k + 2], 16) for k in (1, 3, 5))


def test_confusion_picture_draws_with_the_reports_own_palette(tmp_path):
    from matplotlib.colors import to_hex
    from matplotlib.image import imread

    from wordspot.evaluation import html_report
    from wordspot.evaluation.report import (COUNT_COLOURS, INK_COLOUR, PAGE_COLOUR, WAVE_COLOUR,
                                            _confusion_figure, _figure_class)

    # The palette is the HTML page's: its style sheet paints the page, the text and the
    # waveform with these very colours.
    assert f"background: {PAGE_COLOUR}" in html_report._STYLE and f"color: {INK_COLOUR}" in html_report._STYLE
    assert f"stroke: {WAVE_COLOUR}" in html_report._STYLE
    fig = _confusion_figure(_result(), _figure_class("confusions.png"))
    (image,) = fig.axes[0].images
    cmap = image.get_cmap()
    assert COUNT_COLOURS == (PAGE_COLOUR, WAVE_COLOUR)
    assert to_hex(cmap(0.0)) == PAGE_COLOUR and to_hex(cmap(1.0)) == WAVE_COLOUR
    # The count labels are in the palette's colours too.
    assert {to_hex(t.get_color()) for t in fig.axes[0].texts} <= {PAGE_COLOUR, INK_COLOUR}
    # And the written picture shows the largest count in the waveform blue.
    files = write_report(_result(), tmp_path)
    pixels = np.round(imread(files.confusions)[:, :, :3] * 255).astype(int)
    assert (pixels == _rgb(WAVE_COLOUR)).all(axis=2).sum() > 100
