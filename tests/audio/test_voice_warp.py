"""Choosing a recording's frequency warp by a voice mixture: features at several warps
from one spectrum, speech frames, the mixture's fit and scores, the choice."""

import csv
from pathlib import Path

import numpy as np
import pytest
import soxr

from wordspot.audio.features import FeatureSettings, compute_features, features_for_warps, log_mel_bands
from wordspot.audio.reading import load_audio
from wordspot.audio.scorer_inputs import LOG_MEL_BANDS, normalise_per_utterance, scorer_inputs
from wordspot.audio.voice_warp import (MIN_SPEECH_FRAMES, WARP_GRID, VoiceMixture, choose_warp, fit_voice_mixture,
                                       speech_frames, warp_fits)
from wordspot.errors import FeatureError

REC = Path(__file__).resolve().parents[2] / "recordings"
#: A fine grid, so that a change of 10% shows as several steps.
FINE = tuple(np.round(np.arange(0.80, 1.3001, 0.02), 2))


def _rows():
    with open(REC / "train.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _wave(row):
    return load_audio(REC / row["path"], sample_rate=16000)


@pytest.fixture(scope="module")
def demo_voice():
    """A voice mixture of every third demo training recording of the voices other than the
    three held out for the checks below, and those three voices' first 8 recordings each,
    joined (one long recording per voice: a stable choice)."""
    rows = _rows()
    voices = sorted({r["speaker"] for r in rows})
    held = voices[:3]
    s = FeatureSettings()
    frames = []
    for r in [r for r in rows if r["speaker"] not in held][::3]:
        (f,), e = features_for_warps(_wave(r), s, [1.0])
        frames.append(f[speech_frames(e)])
    mixture = fit_voice_mixture(np.concatenate(frames), 16, seed=0)
    joined = {v: np.concatenate([_wave(r) for r in rows if r["speaker"] == v][:8]) for v in held}
    return mixture, joined


def vowel_like(rng, sr=16000, seconds=0.8):
    t = np.arange(int(seconds * sr)) / sr
    y = sum(g * np.sin(2 * np.pi * f * t) for f, g in ((220, 1.0), (700, 0.5), (1200, 0.3), (2500, 0.2)))
    return 0.5 * y / np.max(np.abs(y)) + 1e-3 * rng.standard_normal(t.shape)


def test_features_at_every_warp_equal_compute_features_bit_for_bit(rng):
    s = FeatureSettings()
    y = vowel_like(rng)
    feats, energy = features_for_warps(y, s, WARP_GRID)
    for a, f in zip(WARP_GRID, feats):
        np.testing.assert_array_equal(f, compute_features(y, s, warp=a))
    # warp 1 is today's features exactly, with the default call
    np.testing.assert_array_equal(feats[WARP_GRID.index(1.0)], compute_features(y, s))
    assert energy.shape == (feats[0].shape[0],)
    # different warps give different features
    assert not np.allclose(feats[0], feats[-1])


def test_frame_energy_is_the_log_of_the_frames_power(rng):
    # the power of a frame by Parseval over the one-sided spectrum (common practice, no source):
    # here only checked to grow by 20 dB when the samples grow tenfold
    s = FeatureSettings()
    y = vowel_like(rng)
    _, e1 = features_for_warps(y, s, [1.0])
    _, e10 = features_for_warps(10 * y, s, [1.0])
    np.testing.assert_allclose(e10 - e1, np.log(100.0), atol=1e-9)


def test_bad_warp_lists_are_refused(rng):
    y = vowel_like(rng)
    with pytest.raises(FeatureError, match="warp factors"):
        features_for_warps(y, FeatureSettings(), [])
    with pytest.raises(FeatureError, match="warp factors"):
        features_for_warps(y, FeatureSettings(), [1.0, -0.5])
    with pytest.raises(FeatureError, match="warp factors"):
        features_for_warps(y, FeatureSettings(), [1.0, "wide"])


def test_scorer_inputs_are_warped_as_the_features(rng):
    s = FeatureSettings()
    y = vowel_like(rng)
    both = scorer_inputs(y, s, "cepstra+log-mel", warp=1.08)
    np.testing.assert_array_equal(both[:, :s.dim], compute_features(y, s, warp=1.08))
    np.testing.assert_array_equal(both[:, s.dim:],
                                  normalise_per_utterance(log_mel_bands(y, s, LOG_MEL_BANDS, warp=1.08)))
    np.testing.assert_array_equal(scorer_inputs(y, s, "log-mel", warp=1.0), scorer_inputs(y, s, "log-mel"))
    assert not np.allclose(both[:, s.dim:], scorer_inputs(y, s, "log-mel"))


def test_speech_frames_are_the_loud_ones(rng):
    quiet = 1e-4 * rng.standard_normal(8000)
    y = np.concatenate([quiet, vowel_like(rng), quiet])
    (_,), e = features_for_warps(y, FeatureSettings(), [1.0])
    mask = speech_frames(e)
    hop = 160
    centre = (np.arange(mask.size) * hop + 200) / 16000.0
    # the vowel spans 0.5-1.3 s; frames well inside it are speech, frames well outside not
    assert mask[(centre > 0.55) & (centre < 1.25)].all()
    assert not mask[(centre < 0.45) | (centre > 1.35)].any()


def test_mixture_scores_match_scikit_learn(rng):
    from sklearn.mixture import GaussianMixture

    k, d = 5, 7
    w = rng.uniform(0.2, 1.0, k)
    w /= w.sum()
    mu, var = rng.normal(size=(k, d)), rng.uniform(0.3, 2.0, (k, d))
    x = rng.normal(size=(200, d)) * 1.5
    ours = VoiceMixture(w, mu, var).frame_log_likelihoods(x)
    # reference: scikit-learn's diagonal GaussianMixture.score_samples with the same parameters
    ref = GaussianMixture(k, covariance_type="diag")
    ref.weights_, ref.means_, ref.covariances_ = w, mu, var
    ref.precisions_cholesky_ = 1.0 / np.sqrt(var)
    np.testing.assert_allclose(ours, ref.score_samples(x), rtol=1e-10, atol=1e-9)


def test_fit_finds_separated_clusters_and_is_deterministic(rng):
    centres = np.array([[-6.0, 0.0, 2.0], [0.0, 5.0, -3.0], [6.0, -4.0, 0.0]])
    share = np.array([0.5, 0.3, 0.2])
    labels = rng.choice(3, size=3000, p=share)
    x = centres[labels] + rng.normal(scale=0.5, size=(3000, 3))
    vm = fit_voice_mixture(x, 3, seed=1)
    order = np.argsort(vm.means[:, 0])
    np.testing.assert_allclose(vm.means[order], centres, atol=0.1)
    np.testing.assert_allclose(vm.weights[order], share, atol=0.03)
    np.testing.assert_allclose(vm.variances, 0.25, rtol=0.15)
    again = fit_voice_mixture(x, 3, seed=1)
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(vm, name), getattr(again, name))


def test_fit_refuses_too_few_frames():
    with pytest.raises(FeatureError, match="at least 8"):
        fit_voice_mixture(np.zeros((5, 3)), 8)


def test_malformed_mixtures_are_refused():
    with pytest.raises(ValueError, match="shapes"):
        VoiceMixture(np.ones(2) / 2, np.zeros((3, 4)), np.ones((3, 4)))
    with pytest.raises(ValueError, match="sum to 1"):
        VoiceMixture(np.ones(2), np.zeros((2, 4)), np.ones((2, 4)))
    with pytest.raises(ValueError, match="variances"):
        VoiceMixture(np.ones(2) / 2, np.zeros((2, 4)), np.zeros((2, 4)))


def test_choice_recovers_a_known_frequency_scaling(demo_voice):
    # Resampling a recording to 1.1 times its samples and playing it at the old rate scales
    # every frequency by 1/1.1; the warp chosen for it must then be about 1.1 times the one
    # chosen for the recording itself (the method's premise: Lee & Rose 1998), and about
    # 1/1.1 times for the opposite scaling.
    mixture, joined = demo_voice
    s = FeatureSettings()
    for voice, wave in joined.items():
        own, _ = choose_warp(wave, s, mixture, FINE)
        lower, _ = choose_warp(soxr.resample(wave, 16000, 17600), s, mixture, FINE)
        higher, _ = choose_warp(soxr.resample(wave, 16000, round(16000 / 1.1)), s, mixture, FINE)
        assert 1.04 <= lower / own <= 1.16, (voice, own, lower)
        assert 1.04 <= own / higher <= 1.16, (voice, own, higher)


def test_choice_is_the_best_fit_its_features_and_deterministic(demo_voice):
    mixture, joined = demo_voice
    s = FeatureSettings()
    wave = next(iter(joined.values()))
    warp, frames = choose_warp(wave, s, mixture)
    feats, energy = features_for_warps(wave, s, WARP_GRID)
    fits = warp_fits(feats, energy, mixture)
    assert warp == WARP_GRID[int(np.argmax(fits))]
    np.testing.assert_array_equal(frames, compute_features(wave, s, warp=warp))
    again = choose_warp(wave, s, mixture)
    assert again[0] == warp
    np.testing.assert_array_equal(again[1], frames)


def test_recording_without_speech_keeps_warp_one(demo_voice, rng):
    mixture, _ = demo_voice
    s = FeatureSettings()
    for wave in (np.zeros(16000), 0.01 * rng.standard_normal(16000)):  # digital silence, steady noise
        (_,), e = features_for_warps(wave, s, [1.0])
        assert speech_frames(e).sum() < MIN_SPEECH_FRAMES
        warp, frames = choose_warp(wave, s, mixture)
        assert warp == 1.0
        np.testing.assert_array_equal(frames, compute_features(wave, s))
        # also with a grid that lacks 1
        assert choose_warp(wave, s, mixture, (0.9, 1.1))[0] == 1.0


def test_mixture_of_another_width_is_refused(rng):
    vm = VoiceMixture(np.ones(1), np.zeros((1, 5)), np.ones((1, 5)))
    with pytest.raises(FeatureError, match="5 values"):
        choose_warp(vowel_like(rng), FeatureSettings(), vm)
