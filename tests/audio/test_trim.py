"""Tests of wordspot.audio.trim: quiet ends found as librosa finds them, take warnings."""

import librosa
import numpy as np
import pytest

from wordspot.audio.trim import TrimSettings, check_take, loud_frames, speech_bounds
from wordspot.errors import AudioError

RATE = 16000


def _burst(rng, before=0.6, speech=0.5, after=0.7, level=0.3, noise=1e-4):
    """Quiet noise, a tone burst with a rough envelope, quiet noise."""
    n0, n1, n2 = (int(RATE * t) for t in (before, speech, after))
    t = np.arange(n1) / RATE
    burst = level * np.sin(2 * np.pi * 220 * t) * np.hanning(n1) ** 0.3
    x = np.concatenate([np.zeros(n0), burst, np.zeros(n2)])
    return x + noise * rng.normal(size=x.size)


@pytest.mark.parametrize("threshold", [30.0, 40.0, 60.0])
def test_loud_frames_match_librosa_trim(rng, threshold):
    # Reference: librosa.effects.trim keeps frames whose RMS power is within top_db of the
    # loudest frame (centred frames, zero padding) and returns [first * hop, (last + 1) * hop).
    x = _burst(rng)
    frame, hop = 400, 160
    _, (ref_start, ref_end) = librosa.effects.trim(x, top_db=threshold, frame_length=frame, hop_length=hop)
    settings = TrimSettings(frame_seconds=frame / RATE, hop_seconds=hop / RATE, threshold_db=threshold)
    assert speech_bounds(x, RATE, settings, margin=0.0) == (ref_start, ref_end)
    loud = loud_frames(x, frame, hop, threshold)
    ref_rms = librosa.feature.rms(y=x, frame_length=frame, hop_length=hop)[0]
    assert loud.shape == ref_rms.shape


def test_margin_widens_within_the_take(rng):
    x = _burst(rng)
    bare = speech_bounds(x, RATE, margin=0.0)
    wide = speech_bounds(x, RATE, margin=0.25)
    assert wide == (bare[0] - 4000, bare[1] + 4000)
    edge = speech_bounds(x, RATE, margin=10.0)
    assert edge == (0, x.size)


def test_speech_bounds_of_silence_are_empty():
    assert speech_bounds(np.zeros(8000), RATE) == (0, 0)


def test_a_good_take_has_no_warnings(rng):
    check = check_take(_burst(rng), RATE)
    assert check.warnings == ()
    # the burst lasts 0.5 s; its faded edges are below the threshold (tolerance one hop each side)
    assert check.speech_seconds == pytest.approx(0.5, abs=0.1)
    assert check.peak_db == pytest.approx(20 * np.log10(0.3), abs=0.1)


@pytest.mark.parametrize(
    ("kwargs", "pattern"),
    [
        ({"level": 1.2}, "too loud"),  # np.clip below makes full-scale samples
        ({"level": 0.01}, "too quiet"),
        ({"speech": 0.05}, "too short"),
        ({"before": 0.0}, "cut off"),
    ],
)
def test_problems_are_named(rng, kwargs, pattern):
    x = np.clip(_burst(rng, **kwargs), -1.0, 1.0)
    warnings = check_take(x, RATE).warnings
    assert any(pattern in w for w in warnings), warnings


def test_silence_is_named():
    check = check_take(np.zeros(16000), RATE)
    assert check.warnings and "silent" in check.warnings[0]
    assert check.to_dict(RATE)["peak_db"] is None


def test_bad_settings_are_refused():
    with pytest.raises(AudioError, match="margin"):
        TrimSettings(margin=-1.0)
    with pytest.raises(AudioError, match="hop_seconds"):
        TrimSettings(hop_seconds=0.0)
