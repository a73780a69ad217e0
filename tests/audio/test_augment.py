"""Tests for wordspot.audio.augment: mixing at an SNR, babble, steady machine noise, backgrounds."""

import numpy as np
import pytest

from scipy import signal

from wordspot.audio.augment import (
    LSB_16,
    NoiseSettings,
    background,
    dithered_silence,
    mains_hum,
    pink_noise,
    rms_dbfs,
    babble,
    fit_length,
    measured_snr,
    mix_at_snr,
    speech_span,
    steady_noise,
    talker_stream,
)
from wordspot.errors import AugmentError

RATE = 16000


def _utterance(rng, lead=0.3, speech=0.5, tail=0.4):
    """Quiet room tone, a loud 'speech' burst (two tones), quiet room tone."""
    n = [int(s * RATE) for s in (lead, speech, tail)]
    t = np.arange(n[1]) / RATE
    burst = 0.2 * np.sin(2 * np.pi * 220 * t) + 0.1 * np.sin(2 * np.pi * 1300 * t)
    x = np.concatenate([np.zeros(n[0]), burst, np.zeros(n[2])])
    return x + 1e-4 * rng.standard_normal(x.size), (n[0], n[0] + n[1])


@pytest.mark.parametrize("snr", [-5.0, 0.0, 7.5, 20.0])
def test_mixed_snr_is_the_requested_one_over_the_speech_span(rng, snr):
    # SNR = 10 log10(P_speech / P_noise), powers over the same span (common practice);
    # measured again from (noisy - clean) as recordings/README.md does for test-noisy.
    x, span = _utterance(rng)
    noise = rng.standard_normal(x.size) * np.linspace(0.5, 2.0, x.size)
    y = mix_at_snr(x, noise, snr, span=span)
    assert y.dtype == np.float32 and y.shape == x.shape
    added = y.astype(np.float64) - x
    assert measured_snr(x, added, span) == pytest.approx(snr, abs=1e-3)
    # by hand, the same definition
    a, b = span
    ps, pn = np.mean(x[a:b] ** 2), np.mean(added[a:b] ** 2)
    assert 10 * np.log10(ps / pn) == pytest.approx(snr, abs=1e-3)


def test_whole_signal_snr_when_no_span_is_given(rng):
    x, _ = _utterance(rng)
    noise = rng.standard_normal(x.size)
    y = mix_at_snr(x, noise, 10.0)
    assert measured_snr(x, y.astype(np.float64) - x) == pytest.approx(10.0, abs=1e-3)


def test_mixing_refuses_undefined_snr_and_mismatched_lengths(rng):
    x, span = _utterance(rng)
    with pytest.raises(AugmentError, match="power above zero"):
        mix_at_snr(x, np.zeros(x.size), 10.0)
    with pytest.raises(AugmentError, match="fit_length"):
        mix_at_snr(x, np.ones(10), 10.0)
    with pytest.raises(AugmentError, match="span must satisfy"):
        mix_at_snr(x, np.ones(x.size), 10.0, span=(5, 5))


def test_speech_span_finds_the_loud_part(rng):
    x, (a, b) = _utterance(rng)
    s0, s1 = speech_span(x, RATE)
    hop = RATE // 100
    assert abs(s0 - a) <= hop and abs(s1 - b) <= hop


def test_fit_length_crops_and_loops(rng):
    v = np.arange(10.0)
    out = fit_length(v, 25, rng)
    assert out.shape == (25,)
    # consecutive samples follow the loop 0..9, 0..9, ...
    assert np.all((np.diff(out) == 1) | (np.diff(out) == -9))


def test_babble_is_deterministic_and_built_only_from_its_streams(rng):
    streams = [talker_stream([np.full(300, float(k + 1))]) for k in range(3)]
    one = babble(streams, 1000, np.random.default_rng(5))
    two = babble(streams, 1000, np.random.default_rng(5))
    np.testing.assert_array_equal(one, two)
    # each stream is constant, so the sum is a constant: the three unit-power streams at
    # gains within +-3 dB
    assert np.ptp(one) == pytest.approx(0.0, abs=1e-12)
    assert 3 * 10 ** (-3 / 20) <= one[0] <= 3 * 10 ** (3 / 20)


def test_talker_stream_keeps_only_the_speech_parts():
    a, b = np.arange(10.0), np.arange(100.0, 110.0)
    np.testing.assert_array_equal(talker_stream([a, b], [(2, 4), (0, 1)]), [2.0, 3.0, 100.0])


def test_steady_noise_has_unit_power_mains_hum_and_is_seeded():
    x = steady_noise(RATE, np.random.default_rng(3), sample_rate=RATE)
    np.testing.assert_array_equal(x, steady_noise(RATE, np.random.default_rng(3), sample_rate=RATE))
    assert np.mean(x**2) == pytest.approx(1.0, rel=1e-9)
    # one second: 1 Hz bins; mains hum at 50 or 60 Hz towers over the broadband floor
    power = np.abs(np.fft.rfft(x)) ** 2
    assert max(power[50], power[60]) > 100 * np.median(power)
    assert not np.array_equal(x, steady_noise(RATE, np.random.default_rng(4), sample_rate=RATE))


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"copies": -1}, "copies must be a whole number"),
        ({"snr_db": (20.0, 5.0)}, "low <= high"),
        ({"snr_db": (0.0,)}, "two numbers"),
        ({"kinds": ("rain",)}, "noise kinds must be some of"),
        ({"talkers": (0, 2)}, "talkers must be"),
    ],
)
def test_noise_settings_reject_bad_values(kwargs, message):
    with pytest.raises(AugmentError, match=message):
        NoiseSettings(**kwargs)


@pytest.mark.parametrize("kind", ["white", "pink", "hum", "fan", "babble", "impacts"])
@pytest.mark.parametrize("dbfs", [-70.0, -45.0, -30.0])
def test_background_level_is_the_requested_dbfs(rng, kind, dbfs):
    # dBFS of float audio: 20 log10(RMS), full scale 1 (common practice), computed here by hand
    streams = [rng.standard_normal(3000), 0.3 * rng.standard_normal(5000)]
    x = background(kind, 2 * RATE + 7, dbfs, rng, sample_rate=RATE, mains=60.0, streams=streams)
    assert x.shape == (2 * RATE + 7,)
    assert 20 * np.log10(np.sqrt(np.mean(x**2))) == pytest.approx(dbfs, abs=0.5)
    assert rms_dbfs(x) == pytest.approx(dbfs, abs=0.5)


def test_rms_dbfs_of_known_signals():
    # a full-scale sine has RMS 1/sqrt(2): -3.01 dBFS; a square wave of +-0.1 is -20 dBFS (from memory)
    t = np.arange(RATE) / RATE
    assert rms_dbfs(np.sin(2 * np.pi * 440 * t)) == pytest.approx(-3.0103, abs=1e-3)
    assert rms_dbfs(np.where(t < 0.5, 0.1, -0.1)) == pytest.approx(-20.0, abs=1e-9)
    assert rms_dbfs(np.zeros(10)) == -np.inf
    with pytest.raises(AugmentError, match="unknown background kind 'rain'"):
        background("rain", 10, -40.0, rng=np.random.default_rng(0))


def test_pink_noise_falls_three_db_per_octave(rng):
    # 1/f noise: power halves per doubling of frequency, 10 log10(1/2) = -3.01 dB per octave
    # (a published property of pink noise). Welch spectrum (scipy.signal.welch), 8 s,
    # least-squares slope of dB against octaves over 100 Hz - 6 kHz.
    x = pink_noise(8 * RATE, rng, sample_rate=RATE)
    f, p = signal.welch(x, fs=RATE, nperseg=4096)
    band = (f >= 100) & (f <= 6000)
    slope = np.polyfit(np.log2(f[band]), 10 * np.log10(p[band]), 1)[0]
    assert slope == pytest.approx(-3.01, abs=0.25)
    assert np.mean(x**2) == pytest.approx(1.0, rel=1e-9)


@pytest.mark.parametrize("mains", [50.0, 60.0])
def test_hum_energy_sits_at_multiples_of_the_mains_frequency(rng, mains):
    # one second at 16 kHz: numpy's FFT has 1 Hz bins, so whole-period sines fall on single bins
    x = mains_hum(RATE, rng, sample_rate=RATE, mains=mains)
    power = np.abs(np.fft.rfft(x)) ** 2
    multiples = np.arange(1, 8) * int(mains)
    assert power[multiples].sum() / power.sum() > 0.999
    # amplitudes fall as 1/h: the 2nd harmonic has a quarter of the fundamental's power
    assert power[multiples[1]] / power[multiples[0]] == pytest.approx(0.25, rel=1e-6)


def test_dither_stays_within_one_lsb_of_16_bit(rng):
    # one LSB of 16-bit audio is 2^-15 on the [-1, 1) scale (the PCM convention soundfile reads)
    x = dithered_silence(RATE, rng)
    assert LSB_16 == 2.0**-15
    assert set(np.unique(np.round(x / LSB_16)).tolist()) == {-1.0, 0.0, 1.0}
    assert np.max(np.abs(x)) <= LSB_16
    # it survives a round trip through 16-bit integers exactly
    np.testing.assert_array_equal((x * 32768).astype(np.int16) / 32768.0, x)
    np.testing.assert_array_equal(background("dither", RATE, -40.0, np.random.default_rng(5)),
                                  dithered_silence(RATE, np.random.default_rng(5)))
