"""What the state scorer reads per frame, computed from a waveform.

Three kinds (:data:`INPUT_KINDS`), each one row per 10 ms frame of the model's features
(same window and hop, so a forced alignment's labels line up frame by frame):

- ``"cepstra"``: the model's own features (:func:`wordspot.audio.features.compute_features`;
  the default, and what every scorer written before the choice reads);
- ``"log-mel"``: :data:`LOG_MEL_BANDS` log mel-band energies
  (:func:`wordspot.audio.features.log_mel_bands`), each band's mean and standard
  deviation over the utterance removed (:func:`normalise_per_utterance`);
- ``"cepstra+log-mel"``: both side by side, the cepstra first.

The per-utterance normalisation needs the whole utterance: the live path
(:mod:`wordspot.stream`) normalises over a window instead and does not compute these
inputs yet, so recognition refuses a scorer with inputs other than ``"cepstra"``.
"""

from __future__ import annotations

import numpy as np

from wordspot.audio.features import FeatureSettings, compute_features, log_mel_bands
from wordspot.errors import FeatureError

__all__ = ["INPUT_KINDS", "LOG_MEL_BANDS", "input_dim", "normalise_per_utterance", "scorer_inputs"]

#: What a state scorer can read per frame; the first is the default.
INPUT_KINDS = ("cepstra", "log-mel", "cepstra+log-mel")

#: Mel bands of the ``log-mel`` inputs (a common size for network inputs, not tuned).
LOG_MEL_BANDS = 40

#: Columns whose standard deviation is below this are centred but not divided.
_MIN_SD = 1e-8


def input_dim(kind: str, feature_dim: int) -> int:
    """Values per frame of inputs ``kind`` for a model whose features have ``feature_dim``.

    Raises
    ------
    FeatureError
        ``kind`` is not one of :data:`INPUT_KINDS`.
    """
    _check_kind(kind)
    return {"cepstra": feature_dim, "log-mel": LOG_MEL_BANDS, "cepstra+log-mel": feature_dim + LOG_MEL_BANDS}[kind]


def _check_kind(kind) -> None:
    if kind not in INPUT_KINDS:
        raise FeatureError(f"scorer inputs must be one of {', '.join(INPUT_KINDS)}; got {kind!r}")


def normalise_per_utterance(frames: np.ndarray) -> np.ndarray:
    """Every column minus its mean, divided by its standard deviation (population, over
    the rows); a constant column becomes zeros. (T, D) -> (T, D) float32."""
    x = np.asarray(frames, dtype=np.float64)
    x = x - x.mean(axis=0, keepdims=True)
    sd = x.std(axis=0, keepdims=True)
    return np.ascontiguousarray(x / np.where(sd > _MIN_SD, sd, 1.0), dtype=np.float32)


def scorer_inputs(wave, settings: FeatureSettings, kind: str, *, cepstra: np.ndarray | None = None,
                  warp: float = 1.0) -> np.ndarray:
    """The frames a scorer reading ``kind`` takes for ``wave``, (T, input_dim) float32.

    Parameters
    ----------
    wave : ndarray, shape (n,)
        Mono samples at ``settings.sample_rate``.
    settings : FeatureSettings
        The model's feature settings.
    kind : str
        One of :data:`INPUT_KINDS`.
    cepstra : ndarray, optional
        ``compute_features(wave, settings, warp=warp)`` when already at hand (not computed again).
    warp : float > 0
        The frequency warp of the recording (:mod:`wordspot.audio.voice_warp`), applied
        to the cepstra and the mel bands alike; 1: none.

    Raises
    ------
    FeatureError
        An unknown ``kind``, or a waveform :func:`compute_features` refuses.
    """
    _check_kind(kind)
    parts = []
    if kind in ("cepstra", "cepstra+log-mel"):
        parts.append(compute_features(wave, settings, warp=warp) if cepstra is None
                     else np.asarray(cepstra, np.float32))
    if kind in ("log-mel", "cepstra+log-mel"):
        parts.append(normalise_per_utterance(log_mel_bands(wave, settings, LOG_MEL_BANDS, warp=warp)))
    return parts[0] if len(parts) == 1 else np.ascontiguousarray(np.concatenate(parts, axis=1))
