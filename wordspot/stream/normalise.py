"""Mean (and variance) normalisation of features over a window around each frame.

A speech stretch of a long recording can last many seconds and hold other talk as well as
commands; normalising its features over the whole stretch gives a command other
statistics than the short recordings the model was trained on (one command with a little
pause around it). Here each frame is normalised with the mean (and standard deviation) of
the ``window`` frames around it; the window keeps its length at the ends of the stretch
by sliding inwards, so a stretch no longer than the window is normalised exactly as a
whole utterance is (:func:`wordspot.audio.features.compute_features`).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from wordspot.audio.features import compute_features

__all__ = ["window_normalise", "window_normalise_reference", "stretch_features"]

#: Columns whose standard deviation is below this are left undivided (as the features do).
MIN_SD = 1e-8


def window_normalise(feats: np.ndarray, window: int, variance: bool = True) -> np.ndarray:
    """Normalise each row of ``feats`` (T, D) over the ``window`` rows around it.

    Row ``t`` uses rows ``[lo, lo + W)`` with ``W = min(window, T)`` and
    ``lo = clip(t - W // 2, 0, T - W)``. Sums are cumulative (one pass, float64).
    """
    x = np.asarray(feats, dtype=np.float64)
    n = x.shape[0]
    if n == 0:
        return x.astype(np.float32)
    w = int(min(max(1, window), n))
    lo = np.clip(np.arange(n) - w // 2, 0, n - w)
    c1 = np.concatenate([np.zeros((1, x.shape[1])), np.cumsum(x, axis=0)])
    mean = (c1[lo + w] - c1[lo]) / w
    out = x - mean
    if variance:
        c2 = np.concatenate([np.zeros((1, x.shape[1])), np.cumsum(x * x, axis=0)])
        var = np.maximum((c2[lo + w] - c2[lo]) / w - mean * mean, 0.0)
        sd = np.sqrt(var)
        out = out / np.where(sd > MIN_SD, sd, 1.0)
    return np.ascontiguousarray(out, dtype=np.float32)


def window_normalise_reference(feats: np.ndarray, window: int, variance: bool = True) -> np.ndarray:
    """Readable version of :func:`window_normalise`: one window at a time."""
    x = np.asarray(feats, dtype=np.float64)
    n = x.shape[0]
    w = int(min(max(1, window), n))
    out = np.empty_like(x)
    for t in range(n):
        lo = min(max(t - w // 2, 0), n - w)
        seg = x[lo : lo + w]
        row = x[t] - seg.mean(axis=0)
        if variance:
            sd = seg.std(axis=0)
            row = row / np.where(sd > MIN_SD, sd, 1.0)
        out[t] = row
    return out.astype(np.float32)


def stretch_features(wave: np.ndarray, settings, window_seconds: float) -> np.ndarray:
    """Features of one stretch: as the model's settings say, but normalised over a window.

    ``window_seconds`` 0, or a model whose features are not mean-normalised: the features
    of :func:`compute_features` unchanged (normalised over the whole stretch).
    """
    if window_seconds <= 0 or not settings.cmn:
        return compute_features(wave, settings)
    raw = compute_features(wave, replace(settings, cmn=False, cvn=False))
    frames = int(round(window_seconds * settings.sample_rate / settings.hop_length))
    return window_normalise(raw, frames, variance=settings.cvn)
