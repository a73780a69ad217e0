"""Matching found commands to time labels and the scores built on it."""

import numpy as np
import pytest

from wordspot.errors import ScoringError
from wordspot.evaluation.time_labels import LabelledRecording, TimedCommand
from wordspot.evaluation.timed import format_timed_score, match_commands, score_timed


def C(start, end, words):
    return TimedCommand(start, end, tuple(words.split()))


def test_matching_worked_by_hand():
    # Labels:  L0 "oven start" 10-12,  L1 "stop" 20-21,  L2 "stop" 21.5-22.5
    # Found:   F0 "oven start" 11-13  (overlaps L0 by 1.0)
    #          F1 "stop" 20.8-21.8     (overlaps L1 by 0.2, L2 by 0.3)
    #          F2 "stop" 21.9-22.4     (overlaps L2 by 0.5)
    #          F3 "stop" 30-31         (overlaps nothing)
    # Pairs by overlap: F0-L0 1.0, F2-L2 0.5, F1-L2 0.3 (L2 taken), F1-L1 0.2.
    # So F0-L0, F1-L1, F2-L2 are hits and F3 a false accept.
    labels = [C(10, 12, "oven start"), C(20, 21, "stop"), C(21.5, 22.5, "stop")]
    found = [C(11, 13, "oven start"), C(20.8, 21.8, "stop"), C(21.9, 22.4, "stop"), C(30, 31, "stop")]
    got = [(m.label, m.found, round(m.overlap, 9)) for m in match_commands(labels, found)]
    assert got == [(0, 0, 1.0), (1, 1, 0.2), (2, 2, 0.5)]


def test_wrong_words_and_touching_spans_do_not_match():
    labels = [C(1, 2, "oven start")]
    assert match_commands(labels, [C(1, 2, "oven stop")]) == []
    assert match_commands(labels, [C(2, 3, "oven start")]) == []  # overlap 0 s


def test_scores_worked_by_hand():
    # Two recordings, half an hour each: 3 labels, 2 hits (start errors +0.1 and -0.5,
    # end errors +0.2 and 0.0), 1 miss, 2 false accepts (one of them wrong words on the
    # missed label) -> 2 per hour.
    a = LabelledRecording("a.wav", (C(10, 11, "oven start"), C(50, 51, "timer")))
    b = LabelledRecording("b.wav", (C(5, 6, "stop"),))
    found = {"a.wav": [C(10.1, 11.2, "oven start"), C(50, 51, "mixer")], "b.wav": [C(4.5, 6, "stop"), C(9, 9.5, "no")]}
    s = score_timed([a, b], found, {"a.wav": 1800.0, "b.wav": 1800.0})
    assert (s.labels, s.hits, s.misses, s.false_accepts, s.wrong_words) == (3, 2, 1, 2, 1)
    assert s.false_accepts_per_hour == pytest.approx(2.0)
    np.testing.assert_allclose(s.start_errors, [0.1, -0.5])
    np.testing.assert_allclose(s.end_errors, [0.2, 0.0], atol=1e-12)
    b_ = s.boundary()
    assert b_["start_mean"] == pytest.approx(0.3) and b_["start_median"] == pytest.approx(0.3)
    assert b_["on_time"] == pytest.approx(0.5)  # only the first hit has both ends within 0.3 s
    text = format_timed_score(s)
    assert "found with the right words 2 (66.7%: hits), missed 1" in text and "2.0 per hour" in text


def test_recording_without_commands_and_missing_duration():
    quiet = LabelledRecording("q.wav", ())
    s = score_timed([quiet], {}, {"q.wav": 3600.0})
    assert (s.labels, s.hits, s.false_accepts) == (0, 0, 0) and np.isnan(s.hit_rate)
    with pytest.raises(ScoringError, match="q.wav: no duration"):
        score_timed([quiet], {}, {})
    with pytest.raises(ScoringError, match="no labelled recordings"):
        score_timed([], {}, {})
