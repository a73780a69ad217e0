"""Tests for wordspot.audio.features: MFCC, mel filters, deltas, CMN, the settings object."""

import json
import math

import librosa
import numpy as np
import pytest
import scipy.fft
import scipy.signal
from hypothesis import given, settings as hsettings, strategies as st
from hypothesis.extra import numpy as hnp

from wordspot.errors import FeatureError
from wordspot.audio.features import (
    FeatureSettings,
    compute_features,
    dct_matrix,
    deltas,
    file_features,
    hz_to_mel,
    lifter_weights,
    mel_filterbank,
    mel_to_hz,
    warp_frequencies,
)

SR = 16000


def vowel_like(rng, *, seconds=1.0, sr=SR, f0=120.0):
    """Harmonics of f0 shaped by three formant resonances (an /a/-like vowel), plus a little noise."""
    t = np.arange(int(seconds * sr)) / sr
    # /a/-like formants, near the adult values measured by Peterson & Barney (1952)
    formants = [(700.0, 80.0), (1220.0, 90.0), (2600.0, 120.0)]
    y = np.zeros_like(t)
    for k in range(1, int((sr / 2 - 200) // f0)):
        f = k * f0
        gain = sum(1.0 / (1.0 + ((f - F) / B) ** 2) for F, B in formants)
        y += gain * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
    y = 0.5 * y / np.max(np.abs(y))
    return y + 1e-3 * rng.standard_normal(t.shape)


def librosa_frames_kwargs(s: FeatureSettings):
    """librosa settings that frame the signal exactly as wordspot does.

    librosa centres a window shorter than n_fft inside the FFT frame, so with center=False its
    frame t covers samples [t*hop + pad, t*hop + pad + win) where pad = (n_fft - win) // 2;
    padding the signal by `pad` on both sides puts the window on [t*hop, t*hop + win), as ours.
    """
    return dict(
        sr=s.sample_rate,
        n_fft=s.n_fft,
        hop_length=s.hop_length,
        win_length=s.window_length,
        window=scipy.signal.windows.hamming(s.window_length, sym=True),
        center=False,
        n_mels=s.n_mels,
        fmin=s.fmin,
        fmax=s.upper_frequency,
        power=2.0,
    )


def preemphasised(y, coef):
    # y[n] - a y[n-1] with zero initial state: the standard first-order pre-emphasis filter (common practice)
    return scipy.signal.lfilter([1.0, -coef], [1.0], y)


def test_default_settings_match_design_notes():
    s = FeatureSettings()
    # 16 kHz, 25 ms / 10 ms, 26 filters, 13 cepstra, lifter 22, +-2 deltas (common practice for
    # MFCC front ends; the lifter: Juang, Rabiner & Wilpon 1987)
    assert (s.sample_rate, s.window_length, s.hop_length, s.n_fft) == (16000, 400, 160, 512)
    assert (s.n_mels, s.n_cepstra, s.lifter, s.delta_window, s.dim) == (26, 13, 22.0, 2, 39)
    assert s.preemphasis == pytest.approx(0.97, abs=1e-12) and s.cmn and s.upper_frequency == 8000.0


def test_mfcc_matches_librosa_on_vowel(rng):
    s = FeatureSettings(cmn=False, cvn=False, delta_order=0, lifter=0)
    y = vowel_like(rng)
    ours = compute_features(y, s)
    pre = preemphasised(y, s.preemphasis)
    pad = (s.n_fft - s.window_length) // 2
    kw = librosa_frames_kwargs(s)
    mel_power = librosa.feature.melspectrogram(y=np.pad(pre, pad), **kw)
    # librosa.feature.mfcc clips the dB spectrum 80 dB below its peak; make sure that never bites here
    db = librosa.power_to_db(mel_power, top_db=None)
    assert db.max() - db.min() < 80.0
    ref = librosa.feature.mfcc(y=np.pad(pre, pad), n_mfcc=s.n_cepstra, lifter=0, **kw).T  # reference: librosa
    # librosa works in dB (10 log10), we in natural log: the cepstra differ by 10 / ln 10
    ref_ln = ref * (math.log(10.0) / 10.0)
    assert ours.shape == ref_ln.shape == (1 + (len(y) - 400) // 160, 13)
    np.testing.assert_allclose(ours, ref_ln, atol=1e-4 * np.abs(ref_ln).max(), rtol=0)
    assert np.std(ours[:, 1:]) > 0.1  # a real signal, not a flat one


def test_lifter_is_the_published_bandpass_lifter(rng):
    # Juang, Rabiner & Wilpon (1987): w_n = 1 + (L/2) sin(pi n / L), n counted from c0 (from memory).
    # librosa numbers the same weights from 1 (its c0 is scaled too); we leave c0 as it is.
    y = vowel_like(rng, seconds=0.5)
    plain = compute_features(y, FeatureSettings(cmn=False, cvn=False, delta_order=0, lifter=0))
    liftered = compute_features(y, FeatureSettings(cmn=False, cvn=False, delta_order=0, lifter=22))
    n = np.arange(13)
    np.testing.assert_allclose(liftered, plain * (1 + 11 * np.sin(np.pi * n / 22)), rtol=1e-5, atol=1e-5)
    np.testing.assert_allclose(lifter_weights(13, 0), np.ones(13), rtol=0, atol=0)


@pytest.mark.parametrize("sr,n_mels", [(16000, 26), (8000, 20), (22050, 40)])
def test_mel_filterbank_matches_librosa(sr, n_mels):
    s = FeatureSettings(sample_rate=sr, n_mels=n_mels)
    ref = librosa.filters.mel(sr=sr, n_fft=s.n_fft, n_mels=n_mels, fmin=0.0, fmax=sr / 2)  # reference: librosa
    np.testing.assert_allclose(mel_filterbank(s).T, ref, rtol=1e-6, atol=1e-9)


def test_mel_filterbank_with_band_limits_matches_librosa():
    s = FeatureSettings(fmin=64.0, fmax=7000.0)
    ref = librosa.filters.mel(sr=16000, n_fft=512, n_mels=26, fmin=64.0, fmax=7000.0)  # reference: librosa
    np.testing.assert_allclose(mel_filterbank(s).T, ref, rtol=1e-6, atol=1e-9)


def test_mel_scale_check_values():
    # Slaney (1998) Auditory Toolbox scale as librosa computes it: 1000 Hz -> 15 mel (librosa.hz_to_mel)
    assert float(hz_to_mel(1000.0)) == pytest.approx(15.0, abs=1e-12)
    assert float(librosa.hz_to_mel(1000.0)) == pytest.approx(15.0, abs=1e-12)
    f = np.array([0.0, 200.0, 999.0, 1000.0, 2500.0, 7999.0])
    np.testing.assert_allclose(hz_to_mel(f), librosa.hz_to_mel(f), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(mel_to_hz(hz_to_mel(f)), f, rtol=1e-12, atol=1e-9)
    # O'Shaughnessy (1987): m = 2595 log10(1 + f/700); 1000 Hz -> 999.99 mel, 700 Hz -> 2595 log10 2
    assert float(hz_to_mel(1000.0, scale="oshaughnessy")) == pytest.approx(1000.0, abs=0.05)
    assert float(hz_to_mel(700.0, scale="oshaughnessy")) == pytest.approx(2595 * math.log10(2), abs=1e-9)
    np.testing.assert_allclose(mel_to_hz(hz_to_mel(f, scale="oshaughnessy"), scale="oshaughnessy"), f, atol=1e-9)
    with pytest.raises(FeatureError, match="mel scale 'bark' is unknown"):
        hz_to_mel(1.0, scale="bark")


def test_oshaughnessy_filters_peak_at_their_centres():
    s = FeatureSettings(mel_scale="oshaughnessy")
    bank = mel_filterbank(s)
    centres = mel_to_hz(np.linspace(0, hz_to_mel(8000.0, scale="oshaughnessy"), 28)[1:-1], scale="oshaughnessy")
    peak_bins = np.argmax(bank, axis=0) * 16000 / 512
    assert np.all(np.abs(peak_bins - centres) <= 16000 / 512)  # within one FFT bin (definition)


@pytest.mark.parametrize("tone_hz", [300.0, 1000.0, 3150.0])
def test_tone_energy_lands_in_its_mel_band(tone_hz):
    # A pure tone's energy goes to the filter whose triangle peaks nearest its frequency (definition of the bank).
    s = FeatureSettings()
    t = np.arange(SR // 2) / SR
    y = 0.3 * np.sin(2 * np.pi * tone_hz * t)
    frames = np.lib.stride_tricks.sliding_window_view(y, 400)[::160] * np.hamming(400)
    power = np.abs(np.fft.rfft(frames, n=512)) ** 2
    band_energy = (power @ mel_filterbank(s)).mean(axis=0)
    centres = mel_to_hz(np.linspace(0, hz_to_mel(8000.0), 28))[1:-1]
    assert np.argmax(band_energy) == np.argmin(np.abs(centres - tone_hz))


def test_deltas_match_librosa(rng):
    c = rng.standard_normal((60, 13)).cumsum(axis=0)
    # librosa.feature.delta(width=5, mode="nearest") is a first-order Savitzky-Golay slope over 5 frames with
    # the edge frames repeated, i.e. the regression formula with N=2 (reference: librosa)
    ref = librosa.feature.delta(c.T, width=5, mode="nearest", axis=-1).T
    np.testing.assert_allclose(deltas(c, window=2), ref, rtol=1e-9, atol=1e-9)
    ref7 = librosa.feature.delta(c.T, width=7, mode="nearest", axis=-1).T
    np.testing.assert_allclose(deltas(c, window=3), ref7, rtol=1e-9, atol=1e-9)


def test_features_stack_deltas_of_deltas(rng):
    y = vowel_like(rng, seconds=0.6) * np.linspace(0.2, 1.0, int(0.6 * SR))
    s = FeatureSettings(cmn=False, cvn=False)
    full = compute_features(y, s).astype(np.float64)
    static = full[:, :13]
    # delta-deltas are the regression slope applied twice (common practice), reference: librosa
    d1 = librosa.feature.delta(static.T, width=5, mode="nearest").T
    d2 = librosa.feature.delta(d1.T, width=5, mode="nearest").T
    np.testing.assert_allclose(full[:, 13:26], d1, atol=1e-4, rtol=1e-4)
    np.testing.assert_allclose(full[:, 26:], d2, atol=1e-4, rtol=1e-4)


def test_cmn_zeroes_every_column_mean(rng):
    y = vowel_like(rng, seconds=0.8)
    feats = compute_features(y, FeatureSettings(cvn=False))
    assert feats.shape[1] == 39 and feats.dtype == np.float32
    np.testing.assert_allclose(feats.mean(axis=0), 0.0, atol=1e-4)
    raw = compute_features(y, FeatureSettings(cmn=False, cvn=False))
    np.testing.assert_allclose(feats, raw - raw.mean(axis=0), atol=1e-4, rtol=0)


def test_cmn_removes_a_fixed_gain(rng):
    # a gain g adds 2 ln g to every log mel energy, i.e. only to c0 after an orthonormal DCT (definition)
    y = vowel_like(rng, seconds=0.5)
    np.testing.assert_allclose(compute_features(y), compute_features(0.25 * y), atol=1e-3, rtol=0)


def test_digital_silence_gives_finite_features():
    feats = compute_features(np.zeros(SR // 2), FeatureSettings())
    assert np.all(np.isfinite(feats))


def test_settings_round_trip_and_validation():
    s = FeatureSettings(sample_rate=8000, n_mels=20, fmax=3800.0)
    assert FeatureSettings.from_dict(s.to_dict()) == s
    # keys a settings dict lacks take today's defaults, except cvn / static_c0 (older models, see below)
    assert FeatureSettings.from_dict({}) == FeatureSettings(cvn=False)
    assert FeatureSettings().cvn is True
    plain = FeatureSettings(n_mels=np.int64(24), window_ms=25, fmax=np.float32(7000)).to_dict()
    assert json.loads(json.dumps(plain)) == plain and type(plain["n_mels"]) is int
    with pytest.raises(FeatureError, match="unknown feature setting.*n_mel\\b"):
        FeatureSettings.from_dict({"n_mel": 26})
    with pytest.raises(FeatureError, match="preemphasis=1.5"):
        FeatureSettings(preemphasis=1.5)
    with pytest.raises(FeatureError, match="n_cepstra=40"):
        FeatureSettings(n_cepstra=40)
    with pytest.raises(FeatureError, match="fmax <= 4000"):
        FeatureSettings(sample_rate=8000, fmax=6000.0)
    with pytest.raises(FeatureError, match="n_mels=26.0.*whole number"):
        FeatureSettings(n_mels=26.0)
    with pytest.raises(FeatureError, match="cmn='yes'"):
        FeatureSettings(cmn="yes")
    with pytest.raises(FeatureError, match="must be a mapping"):
        FeatureSettings.from_dict([("n_mels", 26)])


def test_compute_features_rejects_bad_waves():
    with pytest.raises(FeatureError, match="one-dimensional"):
        compute_features(np.zeros((800, 2)))
    with pytest.raises(FeatureError, match="fewer than one 25 ms window"):
        compute_features(np.zeros(100))
    with pytest.raises(FeatureError, match="NaN or infinite"):
        compute_features(np.r_[np.zeros(1000), np.nan])
    with pytest.raises(FeatureError, match="real numbers"):
        compute_features(np.array(["a"] * 1000))


def test_frame_count_and_file_features(tmp_path, rng):
    import soundfile

    y = vowel_like(rng, seconds=0.5)
    soundfile.write(tmp_path / "knead.wav", y, SR, subtype="FLOAT")
    feats = file_features(tmp_path / "knead.wav")
    assert feats.shape == (1 + (len(y) - 400) // 160, 39)
    np.testing.assert_allclose(feats, compute_features(y.astype(np.float32)), atol=1e-4, rtol=0)


_shapes = hnp.array_shapes(min_dims=0, max_dims=2, min_side=0, max_side=900)


@hsettings(max_examples=60, deadline=None)
@given(
    st.one_of(
        hnp.arrays(dtype=st.sampled_from([np.float32, np.float64]), shape=_shapes,
                   elements=st.floats(allow_nan=True, allow_infinity=True, width=32)),
        hnp.arrays(dtype=np.int16, shape=_shapes),
    )
)
def test_random_arrays_give_features_or_feature_error(arr):
    try:
        out = compute_features(arr)
    except FeatureError:
        return
    assert out.ndim == 2 and out.shape[1] == 39 and np.all(np.isfinite(out))


# ----------------------------------------------------------------------------- CMVN, c0, warping


def test_cvn_gives_zero_mean_unit_variance_per_column(rng):
    # cepstral mean and variance normalisation: every column of an utterance standardised (definition)
    y = vowel_like(rng, seconds=0.8) * np.linspace(0.3, 1.0, int(0.8 * SR))
    s = FeatureSettings(cvn=True)
    feats = compute_features(y, s).astype(np.float64)
    np.testing.assert_allclose(feats.mean(axis=0), 0.0, atol=1e-4)
    np.testing.assert_allclose(feats.std(axis=0), 1.0, atol=1e-4)
    raw = compute_features(y, FeatureSettings(cmn=False, cvn=False)).astype(np.float64)
    np.testing.assert_allclose(feats, (raw - raw.mean(axis=0)) / raw.std(axis=0), atol=1e-3)


def test_cvn_keeps_digital_silence_finite_and_needs_cmn():
    feats = compute_features(np.zeros(SR // 2), FeatureSettings(cvn=True))
    assert np.all(np.isfinite(feats)) and np.all(np.abs(feats) < 1e-6)  # constant columns stay ~zero
    with pytest.raises(FeatureError, match="cvn.*needs cmn=True"):
        FeatureSettings(cvn=True, cmn=False)


def test_dropping_static_c0_removes_only_that_column(rng):
    y = vowel_like(rng, seconds=0.6)
    full = compute_features(y, FeatureSettings(cmn=False, cvn=False))
    s = FeatureSettings(cmn=False, cvn=False, static_c0=False)
    assert s.dim == 38
    np.testing.assert_array_equal(compute_features(y, s), full[:, 1:])


def test_older_settings_dicts_keep_the_features_they_were_trained_with():
    # a model file written before cvn and static_c0 existed was trained with neither
    old = FeatureSettings().to_dict()
    del old["cvn"], old["static_c0"]
    s = FeatureSettings.from_dict(old)
    assert s.cvn is False and s.static_c0 is True and s.dim == 39
    new = FeatureSettings(cvn=True, static_c0=False)
    assert FeatureSettings.from_dict(new.to_dict()) == new
    assert json.loads(json.dumps(new.to_dict())) == new.to_dict()


def test_warp_factor_one_gives_the_unwarped_features(rng):
    y = vowel_like(rng, seconds=0.5)
    s = FeatureSettings()
    np.testing.assert_array_equal(compute_features(y, s, warp=1.0), compute_features(y, s))
    np.testing.assert_array_equal(mel_filterbank(s, warp=1.0), mel_filterbank(s))


def test_warp_map_is_linear_below_the_knee_and_keeps_the_band_edges():
    f = np.linspace(0.0, 8000.0, 801)
    for a in (0.88, 0.94, 1.06, 1.12):
        w = warp_frequencies(f, a, upper=8000.0)
        assert w[0] == 0.0 and abs(w[-1] - 8000.0) < 1e-9  # band edges stay put (piecewise-linear warp)
        assert np.all(np.diff(w) > 0)  # increasing: the order of frequencies is kept
        low = f <= 0.85 * 8000.0 * min(1.0, 1.0 / a)
        np.testing.assert_allclose(w[low], a * f[low])
    with pytest.raises(FeatureError, match="warp factor"):
        compute_features(np.zeros(SR // 4), warp=0.0)


@pytest.mark.parametrize("tone_hz", [800.0, 1500.0, 3000.0])
def test_warping_moves_a_tone_to_the_expected_band(tone_hz):
    # With warp a, energy at f Hz is filed where f*a would be (below the knee): a > 1 moves the
    # peak band up, a < 1 down (vocal tract length perturbation; definition of the warp).
    s = FeatureSettings()
    t = np.arange(SR // 2) / SR
    y = 0.3 * np.sin(2 * np.pi * tone_hz * t)
    frames = np.lib.stride_tricks.sliding_window_view(y, 400)[::160] * np.hamming(400)
    power = np.abs(np.fft.rfft(frames, n=512)) ** 2
    centres = mel_to_hz(np.linspace(0, hz_to_mel(8000.0), 28))[1:-1]
    peaks = {}
    for a in (0.88, 1.0, 1.12):
        band_energy = (power @ mel_filterbank(s, warp=a)).mean(axis=0)
        peaks[a] = int(np.argmax(band_energy))
        assert peaks[a] == int(np.argmin(np.abs(centres - a * tone_hz)))
    assert peaks[0.88] < peaks[1.0] < peaks[1.12]


def test_scratch_reuse_keeps_calls_independent(rng):
    # compute_features reuses per-thread work arrays between calls; a longer call, a
    # shorter one and calls from other threads at the same time must each give what a
    # first call gives (common practice for reused buffers, no source).
    from concurrent.futures import ThreadPoolExecutor

    waves = [rng.normal(size=n).astype(np.float32) for n in (16000, 4000, 24000, 4000)]
    want = [compute_features(w) for w in waves]
    again = [compute_features(w) for w in reversed(waves)][::-1]
    for a, b in zip(want, again):
        np.testing.assert_array_equal(a, b)
    with ThreadPoolExecutor(max_workers=4) as pool:
        got = list(pool.map(compute_features, waves * 4))
    for i, g in enumerate(got):
        np.testing.assert_array_equal(g, want[i % len(waves)])


@pytest.mark.parametrize("n_in,n_out", [(26, 13), (40, 40), (20, 12)])
def test_dct_matrix_is_scipys_orthonormal_dct2(rng, n_in, n_out):
    x = rng.normal(size=(7, n_in))
    ref = scipy.fft.dct(x, type=2, norm="ortho", axis=1)[:, :n_out]  # reference: scipy.fft
    np.testing.assert_allclose(x @ dct_matrix(n_in, n_out), ref, rtol=0, atol=1e-12)
    # Orthonormal: the full basis is an orthogonal matrix.
    full = dct_matrix(n_in, n_in)
    np.testing.assert_allclose(full.T @ full, np.eye(n_in), rtol=0, atol=1e-12)
