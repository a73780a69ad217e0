"""Word measures, calibrated confidence and the confidence threshold in the decoder."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.special import expit

from decoding_helpers import frames_along, gap_mixtures, pause_mixtures, tiny_model, word_mixtures
from wordspot.decoding.confidence import (BASE_MEASURE_NAMES, CONFIDENCE_SCALE, DEFAULT_MIN_CONFIDENCE,
                                          MEASURE_NAMES, heuristic_confidence, split_by_confidence, word_measures)
from wordspot.decoding.decoder import DecoderSettings, build_recognizer, recognize_features
from wordspot.errors import DecodingError, WordspotWarning
from wordspot.util.logistic import Calibration

ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"]], "tab": [["T", "AA", "B"]]}
TRANSCRIPTS = [["bat", "tab"], ["sack"], ["tab", "bat"]]


def _bat_tab(rng):
    """A model and frames along pause, bat (18 frames), gap (7), tab (27), pause."""
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    path = (pause_mixtures(model, 8) + word_mixtures(model, ["B", "AA", "T"], 2) + gap_mixtures(model, 7)
            + word_mixtures(model, ["T", "AA", "B"], 3) + pause_mixtures(model, 8))
    return model, frames_along(model, path, rng)


def _calibration(names=BASE_MEASURE_NAMES, coefficients=(0.5, 2.0, -0.25, 1.0, 0.5, -1.0, 0.3, 1.5)):
    k = len(names)
    return Calibration(tuple(names), np.linspace(-40.0, 0.0, k), np.linspace(1.0, 3.0, k),
                       np.array(coefficients[:k], dtype=float), 0.75)


def test_measures_of_a_worked_example():
    # Worked by hand: best state scores -1, -2, -3, -4, -5 per frame (running sums
    # 0, -1, -3, -6, -10, -15); a word over frames 1..4 (phones 1..3, pause at 4) of 2 phones
    # with acoustic score -16: per frame -4, margin (-16 - (-14)) / 4 = -0.5, log(3 / 2).
    best_free = np.array([0.0, -1.0, -3.0, -6.0, -10.0, -15.0])
    got = word_measures(acoustic=-16.0, best_free=best_free, start=1, phone_end=3, end=4, n_phones=2,
                        filler_margin=-0.25, runner_up_margin=1.5, next_to_filler=1, phone_filler_margin=-0.75)
    assert got[:8] == pytest.approx((-4.0, -0.5, math.log(1.5), -0.25, 1.5, 1.0, 2.0, -0.75), abs=1e-12)
    assert len(got) == len(MEASURE_NAMES) and np.isnan(got[8:]).all()  # no posteriors given
    # the heuristic of the module docstring: exp(min(d, 0) / 4)
    assert heuristic_confidence(got) == pytest.approx(math.exp(-0.5 / CONFIDENCE_SCALE), rel=1e-12)
    assert heuristic_confidence((0.0, 0.3, 0.0)) == 1.0


def test_decoder_measures_follow_the_known_frame_spans(rng):
    # The frames were made along a known path, so each word's frames are known by
    # construction: bat's 18 phone frames and its 7-frame pause, tab's 27 phone frames.
    model, frames = _bat_tab(rng)
    rec = build_recognizer(model)
    got = rec.decode(frames)
    bat, tab = got.segments
    ll = rec.emissions(frames).astype(np.float64)
    for seg, n_phone_frames, span in ((bat, 18, 25), (tab, 27, 27)):
        per_frame, margin, per_phone = seg.measures[:3]
        assert per_frame == pytest.approx(seg.acoustic / span, rel=1e-9)
        best = ll[seg.first_frame:seg.first_frame + span].max(axis=1).sum()  # the free upper bound
        assert margin == pytest.approx((seg.acoustic - best) / span, rel=1e-6, abs=1e-9)
        assert per_phone == pytest.approx(math.log(n_phone_frames / 3), rel=1e-12)
        assert seg.confidence == heuristic_confidence(seg.measures)  # no calibration in the model


def test_phone_margin_is_near_zero_on_the_words_own_phones_and_falls_on_a_wrong_phone(rng):
    # Constructed example (known by construction): frames drawn along B AA T are best
    # explained, phone by phone, by those very phones, so each phone's own model scores as
    # well as the free filler on its frames (margin 0 up to the filler's cheaper re-entry;
    # never above, since the phone's own item is one of the filler's paths). Along B AA K
    # the word "bat" must put T on K's frames, which the filler explains with K: the mean
    # falls by a third of that phone's per-frame gap, far below.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    rec = build_recognizer(model)
    net = rec.network
    bat = int(net.word_pron[net.word_first[net.words.index("bat") + 1]])
    right = frames_along(model, pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "T"])
                         + pause_mixtures(model, 6), rng)
    wrong = frames_along(model, pause_mixtures(model, 6) + word_mixtures(model, ["B", "AA", "K"])
                         + pause_mixtures(model, 6), rng)
    on_right = rec.phone_margin(rec.emissions(right).astype(np.float64), bat, 6, 32)
    on_wrong = rec.phone_margin(rec.emissions(wrong).astype(np.float64), bat, 6, 32)
    assert -1.0 < on_right <= 1e-9
    assert on_wrong < on_right - 3.0
    # the decoder stores the same number as the word's last measure
    seg = rec.decode(right).segments[0]
    assert seg.word == "bat"
    ll = rec.emissions(right).astype(np.float64)
    assert seg.measures[MEASURE_NAMES.index("phone_filler_margin")] == pytest.approx(
        rec.phone_margin(ll, bat, seg.first_frame, seg.last_frame), abs=1e-9)
    assert seg.measures[MEASURE_NAMES.index("phones")] == 3.0
    # without the filler there is nothing to compare with
    plain = build_recognizer(model, settings=DecoderSettings(filler=False))
    assert np.isnan(plain.phone_margin(ll, bat, 6, 32))


def test_calibration_turns_measures_into_the_logistic_probability(rng):
    model, frames = _bat_tab(rng)
    model = replace(model, calibration=_calibration())
    got = recognize_features(model, frames, settings=DecoderSettings(min_confidence=0.0))
    for seg in got.segments:
        cal = model.calibration
        z = (np.array(seg.measures[:8]) - cal.means) / cal.scales
        assert seg.confidence == pytest.approx(expit(cal.intercept + z @ cal.coefficients), rel=1e-12)  # scipy


def test_calibration_over_some_measures_reads_those_columns(rng):
    # A calibration names the measures it uses, in its own order: the decoder picks them out.
    model, frames = _bat_tab(rng)
    names = ("filler_margin", "free_margin")
    model = replace(model, calibration=_calibration(names=names))
    got = recognize_features(model, frames, settings=DecoderSettings(min_confidence=0.0))
    cal = model.calibration
    for seg in got.segments:
        x = np.array([seg.measures[MEASURE_NAMES.index(n)] for n in names])
        assert seg.confidence == pytest.approx(expit(cal.intercept + ((x - cal.means) / cal.scales)
                                                     @ cal.coefficients), rel=1e-12)  # scipy


def test_calibration_over_other_measures_falls_back_with_one_warning(rng):
    model, frames = _bat_tab(rng)
    model = replace(model, calibration=_calibration(names=("free_margin", "speaking_rate")))
    with pytest.warns(WordspotWarning, match="speaking_rate.*uncalibrated heuristic") as caught:
        rec = build_recognizer(model)
    assert len(caught) == 1
    got = rec.decode(frames)
    assert [s.confidence for s in got.segments] == [heuristic_confidence(s.measures) for s in got.segments]
    assert rec.min_confidence == 0.0  # the heuristic gets no default threshold


def test_threshold_drops_words_and_keeps_them_aside(rng):
    model, frames = _bat_tab(rng)
    every = recognize_features(model, frames, settings=DecoderSettings(min_confidence=0.0))
    assert every.words == ["bat", "tab"] and every.dropped == []
    cut = sorted(s.confidence for s in every.segments)[1]  # keeps only the more confident word
    some = recognize_features(model, frames, settings=DecoderSettings(min_confidence=cut))
    assert len(some.segments) == 1 and len(some.dropped) == 1
    assert {s.word for s in some.segments + some.dropped} == {"bat", "tab"}
    none = recognize_features(model, frames, settings=DecoderSettings(min_confidence=1.0))
    # transitions make d < 0, so no heuristic confidence reaches 1 (module docstring)
    assert none.segments == [] and [s.word for s in none.dropped] == ["bat", "tab"]
    assert none.reason.startswith("below the confidence threshold: every word heard (bat tab)")


def test_default_threshold_applies_only_to_calibrated_confidence(rng):
    model, _ = _bat_tab(rng)
    assert build_recognizer(model).min_confidence == 0.0
    calibrated = replace(model, calibration=_calibration())
    assert build_recognizer(calibrated).min_confidence == DEFAULT_MIN_CONFIDENCE
    assert build_recognizer(calibrated, settings=DecoderSettings(min_confidence=0.2)).min_confidence == 0.2


@pytest.mark.parametrize("value", [-0.1, 1.5, float("nan"), "0.5", True])
def test_bad_threshold_is_refused(value):
    with pytest.raises(DecodingError, match="min_confidence must be a number from 0 to 1"):
        DecoderSettings(min_confidence=value)


def test_split_keeps_order_and_ties_at_the_threshold():
    class W:
        def __init__(self, c):
            self.confidence = c

    words = [W(0.9), W(0.2), W(0.5), W(0.7)]
    kept, dropped = split_by_confidence(words, 0.5)
    assert [w.confidence for w in kept] == [0.9, 0.5, 0.7]  # ">= threshold" keeps a tie
    assert [w.confidence for w in dropped] == [0.2]
