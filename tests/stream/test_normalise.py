"""Feature normalisation over a window around each frame (wordspot.stream.normalise)."""

import numpy as np
import pytest

from wordspot.audio.features import FeatureSettings, compute_features
from wordspot.stream.normalise import stretch_features, window_normalise, window_normalise_reference


def test_worked_by_hand():
    # worked by hand, window 2: frame 0 uses rows 0-1 (mean 0, sd 0: left undivided),
    # frame 2 rows 1-2 (mean 0, sd 0), frame 3 rows 2-3 (mean 3, sd 3): (6 - 3) / 3 = 1
    x = np.array([[0.0], [0.0], [0.0], [6.0]])
    assert window_normalise(x, 2).ravel().tolist() == [0.0, 0.0, 0.0, 1.0]
    # mean only, window 4 (the whole column): 6 - 1.5 = 4.5
    assert window_normalise(x, 4, variance=False).ravel().tolist() == [-1.5, -1.5, -1.5, 4.5]


@pytest.mark.parametrize("window", [1, 3, 50, 199, 200, 500])
def test_vectorised_matches_the_reference(rng, window):
    x = rng.normal(size=(200, 5)) * [1, 2, 3, 4, 5] + [10, 0, -3, 2, 1]
    for variance in (True, False):
        np.testing.assert_allclose(window_normalise(x, window, variance), window_normalise_reference(x, window, variance),
                                   rtol=1e-4, atol=1e-4)


def test_a_window_longer_than_the_stretch_is_the_whole_utterance_normalisation(rng):
    # the reference is compute_features' own per-utterance mean and variance normalisation
    wave = (0.1 * rng.normal(size=16000)).astype(np.float32)
    settings = FeatureSettings()
    whole = compute_features(wave, settings)
    windowed = stretch_features(wave, settings, window_seconds=5.0)
    np.testing.assert_allclose(windowed, whole, rtol=1e-3, atol=1e-3)
    assert stretch_features(wave, settings, 0.0) is not None
    np.testing.assert_array_equal(stretch_features(wave, settings, 0.0), whole)


def test_a_short_window_follows_a_change_of_level(rng):
    # the second half is 30 dB louder: over a 1 s window each half is evened out on its own,
    # over the whole stretch the quiet half stays far below the loud one in c0
    wave = np.concatenate([0.003 * rng.normal(size=32000), 0.1 * rng.normal(size=32000)]).astype(np.float32)
    settings = FeatureSettings()
    whole = stretch_features(wave, settings, 0.0)
    windowed = stretch_features(wave, settings, 1.0)
    n = whole.shape[0]
    first = slice(0, n // 2 - 60)
    assert abs(windowed[first, 0].mean()) < 0.5 < abs(whole[first, 0].mean())
