"""The voice mixture of a model trained from scratch: a small Gaussian mixture of the
unwarped features of its recordings' speech frames (:mod:`wordspot.audio.voice_warp`),
by which recognition may choose each file's frequency warp."""

from __future__ import annotations

import numpy as np

from wordspot.audio.features import FeatureSettings, features_for_warps
from wordspot.audio.reading import load_audio
from wordspot.audio.voice_warp import VoiceMixture, fit_voice_mixture, speech_frames
from wordspot.errors import WordspotError

__all__ = ["voice_of_recordings", "MOST_FRAMES"]

#: Speech frames the mixture is fitted on at the most (spread evenly over the recordings).
MOST_FRAMES = 100_000


def voice_of_recordings(paths, settings: FeatureSettings, n_components: int = 32, *,
                        seed: int = 0) -> VoiceMixture | None:
    """Fit a voice mixture on the speech frames of the recordings ``paths`` (each read once;
    one that cannot be read is passed over, as training passed over it). None when the
    recordings hold fewer than 20 speech frames per Gaussian."""
    frames = []
    for path in paths:
        try:
            wave = load_audio(path, sample_rate=settings.sample_rate)
            (f,), energy = features_for_warps(wave, settings, [1.0])
        except WordspotError:
            continue
        frames.append(f[speech_frames(energy)])
    x = np.concatenate(frames) if frames else np.zeros((0, settings.dim), np.float32)
    if x.shape[0] < 20 * n_components:
        return None
    if x.shape[0] > MOST_FRAMES:
        x = x[np.linspace(0, x.shape[0] - 1, MOST_FRAMES).astype(np.int64)]
    return fit_voice_mixture(x, n_components, seed=seed)
