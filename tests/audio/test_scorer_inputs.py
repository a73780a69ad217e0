"""The state scorer's inputs: log mel-band energies, per-utterance normalisation, the kinds."""

import numpy as np
import pytest
import scipy.signal

from wordspot.audio.features import FeatureSettings, compute_features, log_mel_bands
from wordspot.audio.scorer_inputs import INPUT_KINDS, LOG_MEL_BANDS, input_dim, normalise_per_utterance, scorer_inputs
from wordspot.errors import FeatureError


def vowel_like(rng, sr, seconds=0.6):
    t = np.arange(int(seconds * sr)) / sr
    y = sum(g * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
            for f, g in ((220, 1.0), (440, 0.6), (700, 0.5), (1200, 0.3), (2500, 0.2), (3400, 0.1)))
    y = 0.5 * y / np.max(np.abs(y))
    return y + 1e-3 * rng.standard_normal(t.shape)


@pytest.mark.parametrize("sr", [16000, 8000])
def test_log_mel_bands_match_librosa(rng, sr):
    import librosa

    s = FeatureSettings(sample_rate=sr)
    y = vowel_like(rng, sr)
    ours = log_mel_bands(y, s, 40)
    # Reference: librosa.feature.melspectrogram (Slaney mel scale and area-normalised filters,
    # power spectrum) on the pre-emphasised signal, framed as ours: librosa centres a window
    # shorter than n_fft inside the FFT frame, so the signal is padded by that offset
    # (tests/audio/test_features.py frames the MFCC check the same way).
    pre = scipy.signal.lfilter([1.0, -s.preemphasis], [1.0], y)  # first-order pre-emphasis (common practice)
    pad = (s.n_fft - s.window_length) // 2
    ref = librosa.feature.melspectrogram(
        y=np.pad(pre, pad), sr=sr, n_fft=s.n_fft, hop_length=s.hop_length, win_length=s.window_length,
        window=scipy.signal.windows.hamming(s.window_length, sym=True), center=False, n_mels=40,
        fmin=s.fmin, fmax=s.upper_frequency, power=2.0).T
    assert ours.shape == ref.shape == (1 + (len(y) - s.window_length) // s.hop_length, 40)
    np.testing.assert_allclose(ours, np.log(np.maximum(ref, 1e-10)), atol=1e-6, rtol=0)
    # the same frames as the model's features, one row each
    assert ours.shape[0] == compute_features(y, s).shape[0]


def test_log_mel_bands_refuse_a_bad_band_count(rng):
    with pytest.raises(FeatureError, match="n_bands must be a whole number >= 1, got 0"):
        log_mel_bands(vowel_like(rng, 16000), FeatureSettings(), 0)


def test_normalise_per_utterance_matches_scikit_learn(rng):
    from sklearn.preprocessing import StandardScaler

    x = rng.normal(3.0, 2.0, size=(50, 6)) * rng.uniform(0.1, 10, 6)
    x[:, 2] = 4.0  # a constant column (digital silence in one band)
    got = normalise_per_utterance(x)
    # Reference: scikit-learn's StandardScaler (population standard deviation; a constant
    # column is centred and left undivided, i.e. zeros)
    ref = StandardScaler().fit_transform(x)
    assert got.dtype == np.float32
    np.testing.assert_allclose(got, ref, atol=1e-5)
    np.testing.assert_array_equal(got[:, 2], 0.0)


def test_input_kinds(rng):
    s = FeatureSettings()
    y = vowel_like(rng, 16000)
    ceps = compute_features(y, s)
    assert INPUT_KINDS[0] == "cepstra"
    np.testing.assert_array_equal(scorer_inputs(y, s, "cepstra"), ceps)
    mel = scorer_inputs(y, s, "log-mel")
    # numpy: each band's mean and standard deviation over the utterance removed
    raw = log_mel_bands(y, s, LOG_MEL_BANDS)
    np.testing.assert_allclose(mel, (raw - raw.mean(0)) / raw.std(0), atol=1e-4)
    both = scorer_inputs(y, s, "cepstra+log-mel")
    np.testing.assert_array_equal(both, np.concatenate([ceps, mel], axis=1))
    np.testing.assert_array_equal(scorer_inputs(y, s, "cepstra+log-mel", cepstra=ceps), both)
    for kind in INPUT_KINDS:
        x = scorer_inputs(y, s, kind)
        assert x.dtype == np.float32 and x.shape == (ceps.shape[0], input_dim(kind, s.dim))
    assert [input_dim(k, 39) for k in INPUT_KINDS] == [39, 40, 79]
    with pytest.raises(FeatureError, match="scorer inputs must be one of cepstra, log-mel, cepstra\\+log-mel; got 'mel'"):
        scorer_inputs(y, s, "mel")
    with pytest.raises(FeatureError, match="got 'fbank'"):
        input_dim("fbank", 39)
