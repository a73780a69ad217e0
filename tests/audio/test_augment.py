"""Tests for wordspot.audio.augment: mixing at an SNR, babble, steady machine noise."""

import numpy as np
import pytest

from wordspot.audio.augment import (
    NoiseSettings,
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
