"""Tests for wordspot.audio.impacts: knocks, clinks, taps and scrapes."""

import numpy as np
import pytest
import scipy.stats
from scipy import signal

from wordspot.audio.augment import background, rms_dbfs
from wordspot.audio.impacts import IMPACT_KINDS, impact_event, impact_noise
from wordspot.errors import AugmentError

RATE = 16000


def _share_below(x, hz, rate=RATE):
    """Share of the power spectrum (scipy.signal.welch, the reference estimate) below ``hz``."""
    f, p = signal.welch(x, fs=rate, nperseg=min(1024, len(x)))
    return float(p[f < hz].sum() / p.sum())


def test_noise_has_unit_power_the_length_and_depends_only_on_the_seed():
    x = impact_noise(2 * RATE + 3, np.random.default_rng(4))
    assert x.shape == (2 * RATE + 3,)
    assert np.mean(x**2) == pytest.approx(1.0)
    np.testing.assert_array_equal(x, impact_noise(2 * RATE + 3, np.random.default_rng(4)))
    assert not np.array_equal(x, impact_noise(2 * RATE + 3, np.random.default_rng(5)))


def test_noise_is_impulsive_where_steady_noise_is_not(rng):
    # excess kurtosis: 0 for Gaussian noise, large for rare loud events (scipy.stats.kurtosis, Fisher's definition)
    clips = [impact_noise(3 * RATE, rng) for _ in range(10)]
    assert min(scipy.stats.kurtosis(x) for x in clips) > 5.0
    assert abs(scipy.stats.kurtosis(background("fan", 3 * RATE, -30.0, rng))) < 1.0
    # most of the clip is near silence between the events
    quiet = [np.mean(np.abs(x) < 0.05 * np.max(np.abs(x))) for x in clips]
    assert np.median(quiet) > 0.5


def test_each_kind_of_event_sounds_as_described(rng):
    for kind in IMPACT_KINDS:
        ev = impact_event(kind, rng)
        assert np.max(np.abs(ev)) == pytest.approx(1.0)
    knocks = [impact_event("knock", rng) for _ in range(20)]
    clinks = [impact_event("clink", rng) for _ in range(20)]
    taps = [impact_event("tap", rng) for _ in range(20)]
    scrapes = [impact_event("scrape", rng) for _ in range(20)]
    assert np.median([_share_below(np.r_[k, np.zeros(2048)], 700) for k in knocks]) > 0.8  # low resonances
    assert np.median([_share_below(np.r_[c, np.zeros(2048)], 1200) for c in clinks]) < 0.1  # high partials
    assert max(len(t) for t in taps) <= 0.02 * RATE + 8  # a few milliseconds
    assert all(0.08 * RATE - 1 <= len(s) <= 0.6 * RATE for s in scrapes)
    assert np.median([_share_below(np.r_[s, np.zeros(2048)], 200) for s in scrapes]) < 0.1  # band-passed


def test_background_kind_impacts_has_its_level_also_at_8_khz(rng):
    # dBFS of float audio: 20 log10(RMS), full scale 1 (common practice)
    for rate in (8000, 16000):
        x = background("impacts", 2 * rate, -40.0, rng, sample_rate=rate)
        assert rms_dbfs(x) == pytest.approx(-40.0, abs=0.01)
        f, p = signal.welch(x, fs=rate, nperseg=512)
        assert p[f > 0.47 * rate].sum() < 0.05 * p.sum()  # nothing made above the band


def test_refuses_an_empty_clip(rng):
    with pytest.raises(AugmentError, match="at least one sample"):
        impact_noise(0, rng)
