"""Choosing a recording's frequency warp so that its voice looks like the training voices.

A talker with a shorter or longer vocal tract than the training voices has every formant
moved up or down by roughly one factor. Recognition can undo that per recording: the
features are computed at every factor of a small grid (:data:`WARP_GRID`; one power
spectrum, only the filterbank changes: :func:`wordspot.audio.features.features_for_warps`)
and the factor whose speech frames fit a small "voice mixture" best is kept (maximum
likelihood warp choice: Lee & Rose 1998, "A frequency warping approach to speaker
normalization", IEEE Trans. Speech and Audio Processing 6(1); a mixture of all speech
instead of the full recogniser as the judge: Wegmann et al. 1996, "Speaker normalization
on conversational telephone speech", ICASSP).

The voice mixture (:class:`VoiceMixture`) is a diagonal Gaussian mixture of the unwarped,
normalised features of the model's training speech (:func:`fit_voice_mixture`, plain EM).
Speech frames are those at least :data:`SPEECH_ABOVE_FLOOR_DB` above the recording's
quiet floor (its 10th percentile of frame energy); a recording with fewer than
:data:`MIN_SPEECH_FRAMES` of them keeps the factor 1 (no voice to judge).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from wordspot.audio.features import FeatureSettings, features_for_warps
from wordspot.errors import FeatureError

__all__ = [
    "WARP_GRID",
    "SPEECH_ABOVE_FLOOR_DB",
    "MIN_SPEECH_FRAMES",
    "VoiceMixture",
    "speech_frames",
    "fit_voice_mixture",
    "warp_fits",
    "choose_warp",
]

#: Warp factors tried per recording: 0.88 to 1.12 in steps of 0.04 (the usual range of
#: vocal tract length factors, Lee & Rose 1998).
WARP_GRID = (0.88, 0.92, 0.96, 1.0, 1.04, 1.08, 1.12)

#: A frame is speech when its energy is this many dB above the recording's quiet floor.
SPEECH_ABOVE_FLOOR_DB = 10.0

#: Fewer speech frames than this: no choice, the factor 1.
MIN_SPEECH_FRAMES = 10

#: The quiet floor: this percentile of the frames' log energies.
_FLOOR_PERCENTILE = 10.0

#: Variances of the voice mixture are kept at least this share of the data's per column.
_VARIANCE_FLOOR = 1e-3

_LOG_2PI = math.log(2.0 * math.pi)


@dataclass(frozen=True)
class VoiceMixture:
    """A diagonal Gaussian mixture of training speech frames (the judge of a warp).

    Attributes
    ----------
    weights : np.ndarray, shape (K,)
        Non-negative, summing to 1.
    means, variances : np.ndarray, shape (K, D)
        Variances > 0.
    """

    weights: np.ndarray
    means: np.ndarray
    variances: np.ndarray

    def __post_init__(self) -> None:
        w = np.asarray(self.weights, dtype=np.float64)
        mu = np.asarray(self.means, dtype=np.float64)
        var = np.asarray(self.variances, dtype=np.float64)
        if w.ndim != 1 or mu.ndim != 2 or mu.shape[0] != w.shape[0] or var.shape != mu.shape or w.size == 0:
            raise ValueError(f"voice mixture tables have inconsistent shapes: weights {w.shape}, means {mu.shape}, "
                             f"variances {var.shape}")
        if not (np.isfinite(w).all() and np.isfinite(mu).all() and np.isfinite(var).all()):
            raise ValueError("voice mixture holds values that are not finite")
        if (w < 0).any() or not np.isclose(w.sum(), 1.0, atol=1e-6) or (var <= 0).any():
            raise ValueError("voice mixture weights must be >= 0 and sum to 1, and its variances > 0")
        object.__setattr__(self, "weights", w)
        object.__setattr__(self, "means", mu)
        object.__setattr__(self, "variances", var)

    @property
    def dim(self) -> int:
        """Values per frame."""
        return int(self.means.shape[1])

    @property
    def n_components(self) -> int:
        """Gaussians in the mixture."""
        return int(self.weights.shape[0])

    def frame_log_likelihoods(self, frames: np.ndarray) -> np.ndarray:
        """``log p(x_t)`` of every row of ``frames`` (T, D) under the mixture, (T,) float64:
        every Gaussian's score in one matrix product, then a log-sum-exp over them."""
        x = np.asarray(frames, dtype=np.float64)
        if x.ndim != 2 or x.shape[1] != self.dim:
            raise FeatureError(f"frames must have shape (T, {self.dim}) for this voice mixture, got {x.shape}")
        comp = _component_scores(x, self.weights, self.means, self.variances)
        top = comp.max(axis=1, keepdims=True)
        return (top + np.log(np.exp(comp - top).sum(axis=1, keepdims=True)))[:, 0]


def _component_scores(x: np.ndarray, weights, means, variances) -> np.ndarray:
    """Log weight plus log density of every row of ``x`` (T, D) under every Gaussian, (T, K):
    one matrix product for all of them (``x^2 @ (1/var) - 2 x @ (mu/var) + sum(mu^2/var)``).
    The mixture's likelihood and its fit's posteriors both start here. (The acoustic
    models' mixtures have the same expansion in :mod:`wordspot.acoustic.gmm`, a layer that
    audio may not import.)"""
    inv = 1.0 / variances
    const = np.log(weights) - 0.5 * (means.shape[1] * _LOG_2PI + np.log(variances).sum(axis=1)
                                     + (means ** 2 * inv).sum(axis=1))
    return const - 0.5 * ((x * x) @ inv.T) + x @ (means * inv).T


def speech_frames(log_energy: np.ndarray) -> np.ndarray:
    """Boolean mask of the frames at least :data:`SPEECH_ABOVE_FLOOR_DB` above the quiet
    floor (the 10th percentile of ``log_energy``, natural log of frame power)."""
    e = np.asarray(log_energy, dtype=np.float64)
    if e.size == 0:
        return np.zeros(0, dtype=bool)
    floor = np.percentile(e, _FLOOR_PERCENTILE)
    return e > floor + SPEECH_ABOVE_FLOOR_DB * math.log(10.0) / 10.0


def fit_voice_mixture(frames: np.ndarray, n_components: int = 32, *, iterations: int = 20,
                      seed: int = 0) -> VoiceMixture:
    """Fit a diagonal Gaussian mixture to speech frames by expectation-maximisation.

    Starts from ``n_components`` distinct frames drawn with ``seed`` as means, the data's
    variance in every Gaussian and equal weights; each pass re-estimates weights, means
    and variances from the posteriors (variances floored at 1e-3 of the data's). A
    Gaussian left with (almost) no frames is moved to a frame it explains worst.
    Deterministic for a seed.

    Parameters
    ----------
    frames : np.ndarray, shape (N, D)
        Unwarped, normalised features of speech frames (N >= ``n_components``).
    n_components : int >= 1
    iterations : int >= 1
    seed : int

    Raises
    ------
    FeatureError
        Too few frames, or values that are not finite.
    """
    x = np.asarray(frames, dtype=np.float64)
    if x.ndim != 2 or x.shape[0] < max(1, int(n_components)) or not np.isfinite(x).all():
        raise FeatureError(f"the voice mixture needs at least {n_components} finite frames (rows), "
                           f"got an array of shape {x.shape}")
    if not (isinstance(n_components, (int, np.integer)) and n_components >= 1):
        raise FeatureError(f"n_components must be a whole number >= 1, got {n_components!r}")
    rng = np.random.default_rng(seed)
    k, n = int(n_components), x.shape[0]
    floor = np.maximum(x.var(axis=0) * _VARIANCE_FLOOR, 1e-10)
    means = x[rng.choice(n, size=k, replace=False)].copy()
    variances = np.tile(np.maximum(x.var(axis=0), floor), (k, 1))
    weights = np.full(k, 1.0 / k)
    for _ in range(int(iterations)):
        vm = VoiceMixture(weights, means, variances)
        comp = _component_scores(x, weights, means, variances)
        comp -= comp.max(axis=1, keepdims=True)
        post = np.exp(comp)
        post /= post.sum(axis=1, keepdims=True)
        occ = post.sum(axis=0)
        empty = occ < 1e-3 * n / k
        occ = np.maximum(occ, 1e-12)
        means = (post.T @ x) / occ[:, None]
        variances = np.maximum((post.T @ (x * x)) / occ[:, None] - means ** 2, floor)
        weights = occ / occ.sum()
        if empty.any():  # restart starved Gaussians on the frames the mixture explains worst
            worst = np.argsort(vm.frame_log_likelihoods(x))[: int(empty.sum())]
            means[empty] = x[worst]
            variances[empty] = np.maximum(x.var(axis=0), floor)
            weights[empty] = 1.0 / n
            weights /= weights.sum()
    return VoiceMixture(weights, means, variances)


def warp_fits(features: list[np.ndarray], log_energy: np.ndarray, voice: VoiceMixture) -> np.ndarray | None:
    """The mean log-likelihood of the speech frames under ``voice`` for each feature
    matrix of ``features`` (one per warp factor), or None when the recording has fewer
    than :data:`MIN_SPEECH_FRAMES` speech frames."""
    mask = speech_frames(log_energy)
    if int(mask.sum()) < MIN_SPEECH_FRAMES:
        return None
    return np.array([float(voice.frame_log_likelihoods(f[mask]).mean()) for f in features])


def choose_warp(wave, settings: FeatureSettings, voice: VoiceMixture, grid=WARP_GRID) -> tuple[float, np.ndarray]:
    """The warp factor of ``grid`` under which the speech of ``wave`` fits ``voice`` best,
    and the features at that factor, (T, settings.dim) float32.

    The factor 1 (and the unwarped features) when the recording has too few speech frames;
    the first best factor of ``grid`` on a tie. The features equal
    ``compute_features(wave, settings, warp=factor)`` bit for bit.

    Raises
    ------
    FeatureError
        As :func:`wordspot.audio.features.compute_features`, or a voice mixture of
        another width than the features.
    """
    if voice.dim != settings.dim:
        raise FeatureError(f"the voice mixture has {voice.dim} values a frame, the features {settings.dim}")
    grid = tuple(grid)
    feats, log_energy = features_for_warps(wave, settings, grid)  # checks the grid
    grid = tuple(float(a) for a in grid)
    fits = warp_fits(feats, log_energy, voice)
    if fits is None:
        if 1.0 in grid:
            return 1.0, feats[grid.index(1.0)]
        from wordspot.audio.features import compute_features

        return 1.0, compute_features(wave, settings)
    best = int(np.argmax(fits))
    return grid[best], feats[best]
