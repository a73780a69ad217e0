"""Tests of "no command here" scoring, misses, false accepts and the detection trade-off."""

import csv
import json
import sys
import re

import jiwer
import numpy as np
import pytest
from scipy.stats import norm

from wordspot.errors import ScoringError, WordspotWarning
from wordspot.evaluation.detection import DET_TICKS, equal_error_rate, normal_deviate, trade_off
from wordspot.evaluation.report import render_summary, write_report
from wordspot.evaluation.scoring import ScoredUtterance, score_utterances


def _utt(name, reference, recognised, confidences, seconds):
    return ScoredUtterance(name, "ana", tuple(reference.split()), tuple(recognised.split()),
                           seconds=seconds, confidences=tuple(confidences))


def _bakery_set():
    # Four commands, one word each, recognised right with confidences 0.9, 0.8, 0.6, 0.3;
    # four recordings with no command (the mixer, the radio, ...), 450 s each, on which one
    # word each was recognised with confidences 0.7, 0.5, 0.4, 0.2.
    return [
        _utt("c1.wav", "oven", "oven", [0.9], 2.0),
        _utt("c2.wav", "knead", "knead", [0.8], 2.0),
        _utt("c3.wav", "proof", "proof", [0.6], 2.0),
        _utt("c4.wav", "bake", "bake", [0.3], 2.0),
        _utt("n1.wav", "", "oven", [0.7], 450.0),
        _utt("n2.wav", "", "stop", [0.5], 450.0),
        _utt("n3.wav", "", "knead", [0.4], 450.0),
        _utt("n4.wav", "", "proof", [0.2], 450.0),
    ]


def test_normal_deviate_is_the_standard_normal_quantile():
    # Phi^-1(0.5) = 0 and Phi(1) = 0.841344746 (standard normal table; scipy.stats.norm).
    assert normal_deviate(0.5) == pytest.approx(0.0, abs=1e-12)
    assert normal_deviate(norm.cdf(1.0)) == pytest.approx(1.0, abs=1e-12)
    assert normal_deviate(0.8413) == pytest.approx(1.0, abs=1e-3)
    # Rates of 0 and 1 are drawn at the edge (0.05% and 99.95%) instead of at infinity.
    np.testing.assert_allclose(normal_deviate([0.0, 1.0]), norm.ppf([0.0005, 0.9995]), rtol=1e-12)
    assert list(DET_TICKS) == sorted(DET_TICKS)


def test_empty_reference_insertions_match_jiwer():
    # jiwer 4 (process_words) accepts an empty reference and aligns every hypothesis word
    # as an insertion; our false accepts are those same insertions.
    refs = ["", "oven on", "", "set timer ten"]
    hyps = ["oven on", "oven on", "", "set timer ten minutes please"]
    out = jiwer.process_words(refs, hyps)
    recs = [ScoredUtterance.from_text(f"{k}.wav", "ana", r, h) for k, (r, h) in enumerate(zip(refs, hyps))]
    ours = score_utterances(recs, n_bootstrap=10, seed=1)
    assert (ours.hits, ours.substitutions, ours.deletions, ours.insertions) == (
        out.hits, out.substitutions, out.deletions, out.insertions)
    quiet = [jiwer.process_words(r, h) for r, h in zip(refs, hyps) if not r]
    assert ours.false_accepts == sum(q.insertions for q in quiet) == 2
    assert ours.non_command_utterances == 2 and ours.non_command_seconds is None
    assert ours.false_accepts_per_hour is None  # durations not given
    # miss rate = (S + D) / N over the command words (jiwer's counts): 5 reference words.
    assert ours.miss_rate == pytest.approx((out.substitutions + out.deletions) / 5, abs=1e-12)
    assert (out.insertions, ours.false_accepts) == (4, 2)  # two in commands are not false accepts


def test_false_accepts_per_hour_worked_by_hand():
    # Worked by hand: 4 words on 4 x 450 s = 0.5 h of non-command audio -> 8 per hour;
    # no command word was missed (miss rate 0).
    r = score_utterances(_bakery_set(), n_bootstrap=10, seed=1)
    assert r.false_accepts == 4 and r.non_command_seconds == pytest.approx(1800.0, abs=1e-9)
    assert r.false_accepts_per_hour == pytest.approx(8.0, abs=1e-12)
    assert r.miss_rate == pytest.approx(0.0, abs=1e-12)
    d = r.to_dict()
    assert d["false_accepts"] == 4 and d["false_accepts_per_hour"] == pytest.approx(8.0, abs=1e-12)
    assert d["miss_rate"] == 0.0 and d["non_command_utterances"] == 4


def test_trade_off_and_equal_error_rate_worked_by_hand():
    t = trade_off(_bakery_set())
    # Worked by hand: thresholds 0, each confidence, and inf (words below are dropped).
    np.testing.assert_allclose(t.thresholds, [0, .2, .3, .4, .5, .6, .7, .8, .9, np.inf], rtol=0, atol=0)
    assert t.misses.tolist() == [0, 0, 0, 1, 1, 1, 2, 2, 3, 4]
    assert t.false_accepts.tolist() == [4, 4, 3, 3, 2, 1, 1, 0, 0, 0]
    np.testing.assert_allclose(t.false_accepts_per_hour, [8, 8, 6, 6, 4, 2, 2, 0, 0, 0], rtol=0, atol=1e-12)
    # At 0.6: one command of four missed (0.3 dropped), one quiet item of four accepted (0.7).
    assert t.equal_error_rate == pytest.approx(0.25, abs=1e-12)


def test_substitution_counts_as_a_miss_and_dropping_it_keeps_it_one():
    # "oven on" heard as "oven off" (conf 0.9, 0.4): one miss (a substitution); above 0.4 the
    # wrong word is dropped and the miss is a deletion, still one; above 0.9 both are missed.
    t = trade_off([_utt("c.wav", "oven on", "oven off", [0.9, 0.4], 1.0), _utt("n.wav", "", "", [], 1.0)])
    assert t.misses.tolist() == [1, 1, 1, 2] and t.accepting_items.tolist() == [0, 0, 0, 0]


def test_equal_error_rate_between_points():
    # Worked by hand: between (fa 0.4, miss 0) and (fa 0.1, miss 0.5) the straight line meets
    # miss = fa halfway, at 0.25.
    assert equal_error_rate([0.0, 0.5], [0.4, 0.1]) == pytest.approx(0.25, abs=1e-12)
    assert equal_error_rate([0.6, 0.9], [0.2, 0.0]) is None  # misses more even keeping all
    assert equal_error_rate([0.0, 0.1], [0.5, 0.3]) is None  # the rates never meet
    with pytest.raises(ScoringError, match="equal-length"):
        equal_error_rate([0.1], [0.1, 0.2])


def test_trade_off_needs_confidences_and_both_kinds():
    with pytest.raises(ScoringError, match=r"c\.wav: the detection trade-off needs one confidence"):
        trade_off([ScoredUtterance("c.wav", "ana", ("oven",), ("oven",))])
    with pytest.raises(ScoringError, match="recordings with commands and recordings with none"):
        trade_off([_utt("c.wav", "oven", "oven", [0.5], 1.0)])


def test_summary_prints_misses_false_accepts_and_eer():
    text = render_summary(score_utterances(_bakery_set(), n_bootstrap=10, seed=1))
    assert re.search(r"\nmiss rate +0\.00%", text)
    assert "4 word(s) heard on 4 recording(s) without a command, 1800.0 s: 8.0 per hour" in text
    assert re.search(r"\nequal error rate +25\.00%", text)
    plain = render_summary(score_utterances([ScoredUtterance.from_text("a.wav", "ana", "oven on", "oven")],
                                            n_bootstrap=10, seed=1))
    assert re.search(r"\nmiss rate +50\.00%", plain) and re.search(r"\nfalse accepts +not measured", plain)


def test_report_writes_the_trade_off(tmp_path):
    files = write_report(score_utterances(_bakery_set(), n_bootstrap=10, seed=1), tmp_path)
    assert files.trade_off.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    with open(files.trade_off_table, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["threshold"] for r in rows][:3] == ["0", "0.2", "0.3"] and rows[-1]["threshold"] == "inf"
    assert [float(r["false_accepts_per_hour"]) for r in rows][:3] == [8.0, 8.0, 6.0]
    assert json.loads(files.summary.read_text())["false_accepts_per_hour"] == pytest.approx(8.0, abs=1e-9)


@pytest.mark.filterwarnings("ignore:matplotlib is not installed, so confusions.png")
def test_report_without_matplotlib_keeps_the_table(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "matplotlib.figure", None)
    monkeypatch.setitem(sys.modules, "matplotlib.backends.backend_agg", None)
    with pytest.warns(WordspotWarning, match="det.png was not drawn"):
        files = write_report(score_utterances(_bakery_set(), n_bootstrap=10, seed=1), tmp_path)
    assert files.trade_off is None and files.trade_off_table.is_file()


def test_wer_interval_with_only_quiet_draws_is_infinite_not_nan(rng):
    from wordspot.evaluation.scoring import _quantile, bootstrap_wer_interval

    # For finite values the quantile is numpy's default linear one (numpy.quantile).
    values = rng.normal(size=37)
    for q in (0.025, 0.5, 0.975):
        assert _quantile(values, q) == pytest.approx(float(np.quantile(values, q)), rel=1e-12)
    # Two recordings, one a command said right, one with no command and a word: a replicate
    # drawing the quiet one twice has WER inf (word_error_rate's rule for N = 0).
    low, high = bootstrap_wer_interval(np.array([0, 1]), np.array([2, 0]), n_bootstrap=400, seed=3)
    assert low == 0.0 and high == np.inf
