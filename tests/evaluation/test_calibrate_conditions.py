"""Calibration examples in the conditions of use: noisy copies, joined phrases, noise-only clips."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from wordspot.audio.augment import measured_snr, speech_span
from wordspot.corpus import Utterance
from wordspot.decoding.confidence import MEASURE_NAMES
from wordspot.errors import TrainingError
from wordspot.evaluation.calibrate import (SOURCES, CalibrationConfig, calibration_examples, clips_of_impacts,
                                           fit_calibration, joined_phrases, noise_only_clips, noisy_copies)

REPO = Path(__file__).resolve().parents[2]
RATE = 16000


@pytest.fixture(scope="module")
def model():
    from wordspot.language.lexicon import read_lexicon
    from wordspot.model import load_model

    m = load_model("starter")
    m.lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    return m


def _utts():
    out = []
    for voice in ("flite-rms", "espeak-en-029-m4"):
        for w in ("oven", "minutes", "cancel"):
            path = REPO / "recordings" / "audio" / "test" / voice / f"{w}-t1.flac"
            out.append(Utterance(path, (w,), voice, len(out) + 2))
    return out


def _waves(utts):
    from wordspot.audio.reading import load_audio

    return [load_audio(u.path, sample_rate=RATE) for u in utts]


def test_the_test_recordings_exist():
    missing = [str(u.path) for u in _utts() if not u.path.exists()]
    assert not missing, missing


def test_noisy_copies_are_at_the_drawn_snr_and_seeded():
    # SNR = 10 log10(P_speech / P_noise) over the speech part (common practice, no source);
    # the added noise is the copy minus the recording, so the measured SNR must fall in the
    # range the copies are drawn from.
    utts = _utts()
    waves = _waves(utts)
    speakers = [u.speaker for u in utts]
    got = noisy_copies(waves, speakers, 2, snr_db=(5.0, 25.0), seed=3, sample_rate=RATE)
    assert [k for k, _ in got] == list(range(len(waves))) * 2  # copy-major, one per recording and copy
    snrs = []
    for k, noisy in got:
        clean = waves[k].astype(np.float64)
        span = speech_span(clean, RATE)
        snrs.append(measured_snr(clean, noisy.astype(np.float64) - clean, span))
    assert all(5.0 - 0.1 <= s <= 25.0 + 0.1 for s in snrs), snrs
    assert len({round(s, 3) for s in snrs}) == len(snrs)  # drawn anew for every copy
    again = noisy_copies(waves, speakers, 2, snr_db=(5.0, 25.0), seed=3, sample_rate=RATE)
    assert all(np.array_equal(a, b) for (_, a), (_, b) in zip(got, again))
    other = noisy_copies(waves, speakers, 2, snr_db=(5.0, 25.0), seed=4, sample_rate=RATE)
    assert not np.array_equal(got[0][1], other[0][1])


def test_joined_phrases_say_two_or_three_takes_of_one_speaker():
    utts = _utts()
    waves = _waves(utts)
    words = [u.words for u in utts]
    speakers = [u.speaker for u in utts]
    got = joined_phrases(waves, words, speakers, 12, speeds=(1.0,), seed=5, sample_rate=RATE)
    assert len(got) == 12
    spoken = sorted({u.speaker for u in utts})
    for i, (said, wave) in enumerate(got):
        assert 2 <= len(said) <= 3 and len(set(said)) == len(said)  # distinct takes
        speaker = spoken[i % 2]  # speakers take turns
        assert set(said) <= {u.words[0] for u in utts if u.speaker == speaker}
        # the takes' speech parts (20 ms kept either side), the pauses of 50-300 ms between
        # them and 0.2 s before and after: the length must lie within those bounds
        idx = [next(j for j, u in enumerate(utts) if u.speaker == speaker and u.words[0] == w) for w in said]
        speech = sum(min(speech_span(waves[j], RATE)[1] + 320, len(waves[j]))
                     - max(speech_span(waves[j], RATE)[0] - 320, 0) for j in idx)
        lo = speech + 0.4 * RATE + (len(said) - 1) * 0.05 * RATE
        hi = speech + 0.4 * RATE + (len(said) - 1) * 0.3 * RATE
        assert lo - 2 <= wave.shape[0] <= hi + 2
    again = joined_phrases(waves, words, speakers, 12, speeds=(1.0,), seed=5, sample_rate=RATE)
    assert all(a == b and np.array_equal(x, y) for (a, x), (b, y) in zip(got, again))
    # played faster: shorter by the speed factor (speed perturbation, Ko et al. 2015)
    fast = joined_phrases(waves, words, speakers, 12, speeds=(1.25,), seed=5, sample_rate=RATE)
    assert [a for a, _ in fast] == [a for a, _ in got]
    assert all(abs(y.shape[0] - x.shape[0] / 1.25) <= 2 for (_, x), (_, y) in zip(got, fast))
    # a speaker with one take cannot make a phrase
    assert joined_phrases(waves[:1], words[:1], speakers[:1], 5, seed=5, sample_rate=RATE) == []


def test_noise_only_clips_are_one_to_four_seconds_and_seeded():
    utts = _utts()
    waves = _waves(utts)
    speakers = [u.speaker for u in utts]
    clips = noise_only_clips(waves, speakers, 10, seed=2, sample_rate=RATE)
    assert len(clips) == 10 and all(RATE <= c.shape[0] <= 4 * RATE for c in clips)
    # at -60 to -20 dBFS (a faint floor of -85 to -75 dBFS beneath; dither is one LSB)
    assert all(np.sqrt(np.mean(c.astype(np.float64) ** 2)) <= 10 ** (-19.5 / 20) for c in clips)
    again = noise_only_clips(waves, speakers, 10, seed=2, sample_rate=RATE)
    assert all(np.array_equal(a, b) for a, b in zip(clips, again))


def test_impact_clips_are_one_to_four_seconds_impulsive_and_seeded():
    clips = clips_of_impacts(10, seed=2, sample_rate=RATE)
    assert len(clips) == 10 and all(RATE <= c.shape[0] <= 4 * RATE for c in clips)
    power = [np.mean(c.astype(np.float64) ** 2) for c in clips]
    # at -50 to -20 dBFS over a floor of -85 to -75 dBFS
    assert all(10 ** (-50.5 / 10) <= p <= 10 ** (-19.5 / 10) for p in power)
    # impulsive: the peak stands far above the mean power (crest factor; white noise has
    # about 4, i.e. 12 dB, at these lengths; common practice, no source)
    assert np.median([np.max(np.abs(c)) / np.sqrt(p) for c, p in zip(clips, power)]) > 6
    again = clips_of_impacts(10, seed=2, sample_rate=RATE)
    assert all(np.array_equal(a, b) for a, b in zip(clips, again))
    assert not np.array_equal(clips[0], clips_of_impacts(1, seed=3, sample_rate=RATE)[0])
    assert clips_of_impacts(0) == []


def test_impact_clips_add_only_wrong_words_and_leave_every_other_example(model):
    # Our own labelling rule, checked by counting: the words heard in clips of impacts
    # come after every other kind, all wrong, marked as heard with no command and as
    # "impacts"; the examples of every other kind (noise clips too) are those of before,
    # and the same seed gives the same words.
    utts = _utts()
    plain = calibration_examples(model, utts, speeds=(1.0,), jumbled=2, seed=1, noise_clips=3)
    full = calibration_examples(model, utts, speeds=(1.0,), jumbled=2, seed=1, noise_clips=3, impact_clips=6)
    n = plain.right.size
    np.testing.assert_array_equal(full.measures[:n], plain.measures)
    np.testing.assert_array_equal(full.right[:n], plain.right)
    np.testing.assert_array_equal(full.source[:n], plain.source)
    assert full.right.size > n and (full.source[n:] == "impacts").all()  # the starter hears words in impacts
    assert not full.right[n:].any() and full.own_words_removed[n:].all() and not full.jumbled[n:].any()
    again = calibration_examples(model, utts, speeds=(1.0,), jumbled=2, seed=1, noise_clips=3, impact_clips=6)
    np.testing.assert_array_equal(again.measures, full.measures)
    alone = calibration_examples(model, utts, speeds=(1.0,), jumbled=2, seed=1, impact_clips=6)
    np.testing.assert_array_equal(alone.measures[alone.source == "impacts"], full.measures[n:])


def test_examples_gain_words_in_noise_and_in_phrases_only_when_asked(model):
    # Our own labelling rule, checked by counting: the new kinds add rows after the
    # ordinary ones and leave those as they were (so a calibration fitted with the options
    # off is the one of before); words heard in noisy copies and phrases with the whole
    # lexicon are labelled by the alignment (some right), with own words removed or in
    # noise-only clips all wrong.
    utts = _utts()
    plain = calibration_examples(model, utts, speeds=(1.0,), jumbled=4, seed=1)
    assert set(plain.source) <= {"held-out", "held-out, own words removed", "jumbled"}
    full = calibration_examples(model, utts, speeds=(1.0,), jumbled=4, seed=1, noisy=1, phrases=4,
                                noise_clips=4)
    n = plain.right.size
    np.testing.assert_array_equal(full.measures[:n], plain.measures)
    np.testing.assert_array_equal(full.right[:n], plain.right)
    np.testing.assert_array_equal(full.source[:n], plain.source)
    assert set(full.source) <= set(SOURCES)
    new = full.source[n:]
    assert {"noisy", "phrase"} <= set(new)
    assert full.right[n:][new == "noisy"].any() and full.right[n:][new == "phrase"].any()
    for kind in ("noisy, own words removed", "phrase, own words removed", "noise only"):
        assert not full.right[full.source == kind].any()
    assert (full.own_words_removed == ~np.isin(full.source, ("held-out", "noisy", "phrase"))).all()
    assert (full.jumbled == (full.source == "jumbled")).all()
    # only the kinds of before give the calibration of before
    old = full.subset(np.isin(full.source, ("held-out", "held-out, own words removed", "jumbled")))
    config = CalibrationConfig(min_items=1, min_per_class=1)
    a, b = fit_calibration(plain, config=config), fit_calibration(old, config=config)
    assert a.to_dict() == b.to_dict()
    # deterministic for a seed
    again = calibration_examples(model, utts, speeds=(1.0,), jumbled=4, seed=1, noisy=1, phrases=4, noise_clips=4)
    np.testing.assert_array_equal(again.measures, full.measures)
    np.testing.assert_array_equal(again.right, full.right)
    np.testing.assert_array_equal(again.source, full.source)


def test_default_configuration_and_old_examples_keep_their_sources():
    from wordspot.evaluation.calibrate import CalibrationExamples

    # examples made without sources (as before) get them from the two marks
    ex = CalibrationExamples(np.zeros((3, 12)), np.array([True, False, False]), np.array([False, True, True]),
                             np.array([False, False, True]))
    assert ex.source.tolist() == ["held-out", "held-out, own words removed", "jumbled"]


@pytest.mark.parametrize("field, value", [("noisy", -1), ("phrases", 1.5), ("noise_clips", True),
                                          ("noisy", "2"), ("impact_clips", -3), ("impact_clips", 2.0)])
def test_bad_counts_are_refused(field, value):
    with pytest.raises(TrainingError, match=f"calibration \\({field}\\) must be a whole number >= 0"):
        CalibrationConfig(**{field: value})


@pytest.mark.parametrize("snr", [(25.0, 5.0), (5.0,), ("a", "b"), (float("nan"), 5.0)])
def test_bad_snr_range_is_refused(snr):
    with pytest.raises(TrainingError, match="noise SNR range must be two finite numbers"):
        CalibrationConfig(noise_snr_db=snr)


def test_training_asks_for_the_new_kinds_only_when_configured(monkeypatch):
    # The default configuration gathers none of the new kinds, so a model trained with it
    # gets the calibration of before; asked for, they reach calibration_examples (divided
    # among folds like the jumbled clips) and the model's info counts them.
    from dataclasses import replace as _replace

    from decoding_helpers import tiny_model
    from wordspot.evaluation import calibrate
    from wordspot.evaluation.calibrate import CalibrationExamples, train_calibrated

    assert (CalibrationConfig().noisy, CalibrationConfig().phrases, CalibrationConfig().noise_clips,
            CalibrationConfig().impact_clips) == (0, 0, 0, 0)
    utts = [Utterance(Path(f"{w}-{s}-{t}.wav"), (w,), f"baker-{s}", 2 + 12 * i + 3 * s + t)
            for i, w in enumerate(("oven", "stop", "start")) for s in range(4) for t in range(3)]
    model = tiny_model(np.random.default_rng(0), {w: [["AA", "B"]] for w in ("oven", "stop", "start")})
    seen = []

    def fake_examples(m, held, **kw):
        seen.append(kw)
        rng = np.random.default_rng(len(seen))
        n = 40
        right = np.arange(n) % 2 == 0
        source = np.where(right, "noisy", "noise only") if kw["noisy"] else np.where(right, "held-out", "jumbled")
        if kw["impact_clips"]:
            source = np.where(right, source, np.where(np.arange(n) % 4 == 1, "impacts", source))
        x = np.c_[rng.normal(right * 2.0, 1.0, size=(8, n)).T, np.full((n, len(MEASURE_NAMES) - 8), np.nan)]
        return CalibrationExamples(x, right, ~right, source == "jumbled", recordings=len(held), source=source)

    monkeypatch.setattr(calibrate, "calibration_examples", fake_examples)

    def train(part):
        return _replace(model, info={}), None

    out, _ = train_calibrated(train, utts, config=CalibrationConfig(min_items=5, refit=False))
    assert {k: seen[-1][k] for k in ("noisy", "phrases", "noise_clips", "impact_clips")} == {
        "noisy": 0, "phrases": 0, "noise_clips": 0, "impact_clips": 0}
    assert "words_in_noisy_copies" not in out.info["calibration"]
    lines = []
    out, _ = train_calibrated(train, utts, config=CalibrationConfig(min_items=5, refit=False, noisy=2, phrases=30,
                                                                    noise_clips=10, noise_snr_db=(10, 20)),
                              report=lines.append)
    assert {k: seen[-1][k] for k in ("noisy", "phrases", "noise_clips", "noise_snr_db")} == {
        "noisy": 2, "phrases": 30, "noise_clips": 10, "noise_snr_db": (10, 20)}
    info = out.info["calibration"]
    assert info["words_in_noisy_copies"] == 20 and info["words_in_noise_clips"] == 20
    assert "20 in noisy copies, 0 in joined phrases, 20 in noise-only clips" in lines[-1]
    assert "impact_clips" not in info and "clips of impacts" not in lines[-1]
    out, _ = train_calibrated(train, utts, config=CalibrationConfig(min_items=5, refit=False, impact_clips=12),
                              report=lines.append)
    assert seen[-1]["impact_clips"] == 12
    info = out.info["calibration"]
    assert info["impact_clips"] == 12 and info["words_in_impact_clips"] == 10
    assert "10 in clips of impacts" in lines[-1] and "(0 of them heard with" in lines[-1]
