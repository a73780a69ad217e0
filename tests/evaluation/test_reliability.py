"""The reliability table: worked by hand, against scikit-learn, and in the reports."""

import csv
import re
from pathlib import Path

import numpy as np
import pytest

from wordspot.errors import ScoringError
from wordspot.evaluation.detection import trade_off
from wordspot.evaluation.html_report import write_html_report
from wordspot.evaluation.reliability import (expected_calibration_error, reliability_of, reliability_table,
                                             word_hits)
from wordspot.evaluation.report import render_result, write_report
from wordspot.evaluation.run import ManifestEvaluation
from wordspot.evaluation.scoring import ScoredUtterance, score_utterances

# Worked by hand: eight words in four of ten bins.
#   bin 0.0-0.1: 0.05 wrong                 -> 1 word, 0 right, mean 0.05
#   bin 0.1-0.2: 0.15 wrong, 0.12 right     -> 2 words, 1 right, mean 0.135
#   bin 0.5-0.6: 0.55 right, 0.58 wrong     -> 2 words, 1 right, mean 0.565
#   bin 0.9-1.0: 0.95, 1.0, 0.91 all right  -> 3 words, 3 right, mean 0.95333...
# expected calibration error = 1/8 * 0.05 + 2/8 * 0.365 + 2/8 * 0.065 + 3/8 * 0.046667 = 0.13125
CONFIDENCES = [0.05, 0.15, 0.12, 0.55, 0.58, 0.95, 1.0, 0.91]
CORRECT = [False, False, True, True, False, True, True, True]


def test_table_worked_by_hand():
    rows = reliability_table(CONFIDENCES, CORRECT)
    assert len(rows) == 10 and rows[0].low == 0.0 and rows[-1].high == 1.0
    filled = {k: r for k, r in enumerate(rows) if r.words}
    assert sorted(filled) == [0, 1, 5, 9]
    assert [(filled[k].words, filled[k].correct) for k in (0, 1, 5, 9)] == [(1, 0), (2, 1), (2, 1), (3, 3)]
    assert [filled[k].mean_confidence for k in (0, 1, 5, 9)] == pytest.approx([0.05, 0.135, 0.565, 2.86 / 3])
    assert filled[5].share_correct == 0.5 and rows[3].share_correct is None and rows[3].mean_confidence is None
    assert expected_calibration_error(rows) == pytest.approx(0.13125, abs=1e-12)


def test_table_matches_scikit_learn_calibration_curve(rng):
    # sklearn.calibration.calibration_curve (strategy "uniform") gives the share right and
    # the mean confidence of each non-empty equal-width bin.
    from sklearn.calibration import calibration_curve

    conf = rng.uniform(0.0, 1.0, 500)
    right = rng.uniform(size=500) < conf
    share, mean = calibration_curve(right, conf, n_bins=10, strategy="uniform")
    rows = [r for r in reliability_table(conf, right) if r.words]
    np.testing.assert_allclose([r.share_correct for r in rows], share, rtol=1e-12)
    np.testing.assert_allclose([r.mean_confidence for r in rows], mean, rtol=1e-12)


def test_words_are_right_when_the_alignment_makes_them_hits():
    # "oven start" said, "oven stop start timer" heard: oven and start are hits, stop and
    # timer insertions (minimum edit distance, worked by hand)
    assert word_hits(("oven", "start"), ("oven", "stop", "start", "timer")) == (True, False, True, False)
    assert word_hits(("oven",), ("stop",)) == (False,)  # a substitution
    assert word_hits((), ("yes", "no")) == (False, False)  # nothing was said


def test_bad_input_is_refused():
    with pytest.raises(ScoringError, match="one label per confidence"):
        reliability_table([0.5, 0.6], [True])
    with pytest.raises(ScoringError, match="from 0 to 1"):
        reliability_table([1.5], [True])
    with pytest.raises(ScoringError, match="bins must be"):
        reliability_table([0.5], [True], bins=0)


def _with_dropped_words():
    """A command item whose 'start' fell below the threshold, and a quiet item with a dropped 'stop'."""
    return [
        ScoredUtterance("a.wav", "ann", ("oven", "start"), ("oven",), 2.0, (0.9,),
                        heard=("oven", "start"), heard_confidences=(0.9, 0.3)),
        ScoredUtterance("b.wav", "ann", (), (), 3.0, (), heard=("stop",), heard_confidences=(0.2,)),
    ]


def test_dropped_words_count_in_the_table_and_the_trade_off():
    result = score_utterances(_with_dropped_words(), n_bootstrap=10)
    assert result.deletions == 1 and result.false_accepts == 0  # the kept words are what is scored
    rows = reliability_of(result)
    assert [(r.words, r.correct) for r in rows if r.words] == [(1, 0), (1, 1), (1, 1)]  # 0.2, 0.3, 0.9
    # worked by hand: thresholds 0, 0.2, 0.3, 0.9, inf; misses 0, 0, 0, 1, 2; false accepts 1, 1, 0, 0, 0
    points = trade_off([s.utterance for s in result.scores])
    np.testing.assert_array_equal(points.thresholds, [0.0, 0.2, 0.3, 0.9, np.inf])
    np.testing.assert_array_equal(points.misses, [0, 0, 0, 1, 2])
    np.testing.assert_array_equal(points.false_accepts, [1, 1, 0, 0, 0])


def test_reports_show_the_table(tmp_path):
    scored = [ScoredUtterance(f"u{k}.wav", "ann", ("oven",), (w,), 1.0, (c,))
              for k, (w, c) in enumerate(zip(["oven" if ok else "stop" for ok in CORRECT], CONFIDENCES))]
    result = score_utterances(scored, n_bootstrap=10)
    text = render_result(result)
    assert "confidences are off by 13.13% on average: expected calibration error" in text  # 13.125% rounded
    assert re.search(r"\n0\.9-1\.0 +3 +0\.95 +100\.00%", text)
    files = write_report(result, tmp_path / "report", picture=False)
    with open(files.reliability, newline="") as fh:
        table = list(csv.DictReader(fh))
    assert len(table) == 10 and table[5]["words"] == "2" and table[5]["share_correct"] == "0.500000"
    page = write_html_report(ManifestEvaluation("set", result, [], [], 0.1, 8.0), tmp_path / "report")
    assert ("confidences are off by 13.13% on average over 8 words heard (expected calibration error"
            in Path(page).read_text(encoding="utf-8"))
