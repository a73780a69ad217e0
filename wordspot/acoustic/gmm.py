"""Diagonal-covariance Gaussian mixtures: one per tied HMM state.

All mixtures of a model live in three arrays (P mixtures, M components at most, D
feature dimensions). A mixture with fewer than M components has zero weight on the
rest. Scoring uses the expansion

    log N(x; mu, var) = -1/2 sum_d [log(2 pi var_d) + (x_d - mu_d)^2 / var_d]
                      = [x*x, x, 1] . [-1/(2 var), mu/var, const]

so that all frames against all components is one matrix product (one BLAS call instead of
a loop over components).

Training support: :func:`component_statistics` turns state occupancies into the
zeroth, first and second order sums of every component (again as matrix products),
:func:`update_mixtures` turns the summed statistics into new parameters (maximum
likelihood, variance floor, starved components dropped), and :func:`split_heaviest`
grows mixtures by splitting their heaviest components.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "Mixtures",
    "MixtureStats",
    "scoring_matrix",
    "component_log_likelihoods",
    "log_likelihoods",
    "single_gaussian",
    "component_statistics",
    "update_mixtures",
    "split_heaviest",
    "SPLIT_OFFSET",
]

#: Means of the two halves of a split component move this many standard deviations
#: apart from the original (plus and minus; common practice).
SPLIT_OFFSET = 0.2

_LOG_2PI = float(np.log(2.0 * np.pi))


@dataclass
class Mixtures:
    """Weights, means and variances of P diagonal Gaussian mixtures.

    Attributes
    ----------
    weights : ndarray, shape (P, M)
        Component weights; each row sums to one; unused components have weight 0.
    means : ndarray, shape (P, M, D)
    variances : ndarray, shape (P, M, D)
        Strictly positive.
    """

    weights: np.ndarray
    means: np.ndarray
    variances: np.ndarray

    @property
    def n_mixtures(self) -> int:
        return int(self.weights.shape[0])

    @property
    def n_components(self) -> int:
        return int(self.weights.shape[1])

    @property
    def dim(self) -> int:
        return int(self.means.shape[2])


def scoring_matrix(mix: Mixtures) -> tuple[np.ndarray, np.ndarray]:
    """Weights of the quadratic expansion.

    Returns
    -------
    w : ndarray, shape (2 D, P * M)
        Rows ``0..D-1`` multiply ``x*x``, rows ``D..2D-1`` multiply ``x``.
    c : ndarray, shape (P * M,)
        Constant term plus log component weight (-inf for unused components).
    """
    p, m, d = mix.means.shape
    inv = 1.0 / mix.variances
    w = np.concatenate([-0.5 * inv, mix.means * inv], axis=2).reshape(p * m, 2 * d).T
    with np.errstate(divide="ignore"):
        logw = np.log(mix.weights)
    const = -0.5 * (d * _LOG_2PI + np.log(mix.variances).sum(axis=2) + (mix.means**2 * inv).sum(axis=2))
    return np.ascontiguousarray(w), (const + logw).reshape(p * m)


def component_log_likelihoods(frames: np.ndarray, mix: Mixtures, mixture_ids=None) -> np.ndarray:
    """Log weight plus log density of every frame under every component.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    mix : Mixtures
    mixture_ids : ndarray of int, optional
        Only these mixtures (default: all).

    Returns
    -------
    ndarray, shape (T, len(mixture_ids), M)
    """
    if mixture_ids is not None:
        mix = Mixtures(mix.weights[mixture_ids], mix.means[mixture_ids], mix.variances[mixture_ids])
    w, c = scoring_matrix(mix)
    x = np.asarray(frames, dtype=np.float64)
    out = np.concatenate([x * x, x], axis=1) @ w + c
    return out.reshape(x.shape[0], mix.n_mixtures, mix.n_components)


def log_likelihoods(frames: np.ndarray, mix: Mixtures, mixture_ids=None) -> np.ndarray:
    """Log density of every frame under every mixture, shape (T, P)."""
    from scipy.special import logsumexp  # imported here: recognition does not need scipy

    return logsumexp(component_log_likelihoods(frames, mix, mixture_ids), axis=2)


@dataclass
class MixtureStats:
    """Posterior-weighted sums over training frames, per mixture component.

    Attributes
    ----------
    occupancy : ndarray, shape (P, M)
        Sum of component posteriors (expected frame counts).
    first : ndarray, shape (P, M, D)
        Posterior-weighted sum of frames.
    second : ndarray, shape (P, M, D)
        Posterior-weighted sum of squared frames.
    """

    occupancy: np.ndarray
    first: np.ndarray
    second: np.ndarray

    @classmethod
    def zeros(cls, n_mixtures: int, n_components: int, dim: int) -> "MixtureStats":
        return cls(
            np.zeros((n_mixtures, n_components)),
            np.zeros((n_mixtures, n_components, dim)),
            np.zeros((n_mixtures, n_components, dim)),
        )

    def add(self, other: "MixtureStats") -> None:
        """Add ``other`` into these statistics (in place)."""
        self.occupancy += other.occupancy
        self.first += other.first
        self.second += other.second


def single_gaussian(n_mixtures: int, mean: np.ndarray, variance: np.ndarray) -> Mixtures:
    """``n_mixtures`` one-component mixtures that all equal N(mean, variance)."""
    mean = np.asarray(mean, dtype=np.float64)
    variance = np.asarray(variance, dtype=np.float64)
    d = mean.shape[0]
    return Mixtures(
        np.ones((n_mixtures, 1)),
        np.broadcast_to(mean, (n_mixtures, 1, d)).copy(),
        np.broadcast_to(variance, (n_mixtures, 1, d)).copy(),
    )


def component_statistics(frames: np.ndarray, mixture_gamma: np.ndarray, comp_ll: np.ndarray):
    """Zeroth, first and second order sums of every component of some mixtures.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    mixture_gamma : ndarray, shape (T, K)
        Probability that frame t was emitted by mixture k (the state occupancy summed
        over the states that share mixture k).
    comp_ll : ndarray, shape (T, K, M)
        :func:`component_log_likelihoods` of the same K mixtures (log weight included).

    Returns
    -------
    occupancy : ndarray, shape (K, M)
    first, second : ndarray, shape (K, M, D)
    """
    from scipy.special import logsumexp  # imported here: recognition does not need scipy

    x = np.asarray(frames, dtype=np.float64)
    t, k, m = comp_ll.shape
    mixture_ll = logsumexp(comp_ll, axis=2, keepdims=True)
    with np.errstate(invalid="ignore"):
        post = np.exp(comp_ll - mixture_ll)
    post = np.nan_to_num(post, nan=0.0, posinf=0.0)  # a mixture impossible for a frame
    post *= mixture_gamma[:, :, None]
    flat = post.reshape(t, k * m)
    occupancy = flat.sum(axis=0).reshape(k, m)
    first = (flat.T @ x).reshape(k, m, -1)
    second = (flat.T @ (x * x)).reshape(k, m, -1)
    return occupancy, first, second


def update_mixtures(mix: Mixtures, stats: MixtureStats, *, variance_floor: np.ndarray,
                    min_occupancy: float) -> tuple[Mixtures, np.ndarray]:
    """Maximum-likelihood mixture parameters from summed statistics.

    Components whose occupancy is below ``min_occupancy`` frames are dropped (weight 0,
    parameters copied from the heaviest kept component so nothing is NaN); a mixture
    whose whole occupancy is below ``min_occupancy`` keeps its old parameters.

    Parameters
    ----------
    mix : Mixtures
        Current parameters (same shape as ``stats``).
    stats : MixtureStats
    variance_floor : ndarray, shape (D,)
        No variance goes below this (for example 1% of the global variance).
    min_occupancy : float >= 0
        Fewest expected frames a component needs to be kept.

    Returns
    -------
    mixtures : Mixtures
    updated : ndarray of bool, shape (P,)
        Which mixtures were re-estimated (False: too little data, kept as they were).
    """
    occ = stats.occupancy
    total = occ.sum(axis=1)
    updated = total >= max(min_occupancy, 1e-10)
    keep = (occ >= min_occupancy) & (occ > 0)
    # Always keep a mixture's heaviest component when the mixture is updated.
    heaviest = np.argmax(occ, axis=1)
    keep[np.arange(occ.shape[0]), heaviest] |= updated
    keep &= updated[:, None]

    safe = np.where(keep, occ, 1.0)[:, :, None]
    means = stats.first / safe
    variances = np.maximum(stats.second / safe - means**2, variance_floor[None, None, :])
    kept_occ = np.where(keep, occ, 0.0)
    kept_total = kept_occ.sum(axis=1, keepdims=True)
    weights = kept_occ / np.where(kept_total > 0, kept_total, 1.0)

    # Dropped components get the heaviest kept component's parameters (and weight 0).
    rows = np.arange(occ.shape[0])
    fill_mean = means[rows, heaviest][:, None, :]
    fill_var = variances[rows, heaviest][:, None, :]
    means = np.where(keep[:, :, None], means, fill_mean)
    variances = np.where(keep[:, :, None], variances, fill_var)

    new = Mixtures(
        np.where(updated[:, None], weights, mix.weights),
        np.where(updated[:, None, None], means, mix.means),
        np.where(updated[:, None, None], variances, mix.variances),
    )
    return new, updated


def split_heaviest(mix: Mixtures, n_components: int, *, which=None, rng=None) -> Mixtures:
    """Grow mixtures to ``n_components`` by repeatedly splitting the heaviest component.

    The heaviest component is replaced by two of half its weight, with means moved by
    plus and minus :data:`SPLIT_OFFSET` standard deviations (common practice); the
    direction of the move in each dimension is +1 unless ``rng`` draws random signs.

    Parameters
    ----------
    mix : Mixtures
    n_components : int
        Components per mixture afterwards (at most; mixtures already this large stay).
    which : ndarray of bool, shape (P,), optional
        Mixtures to grow (default: all); the others keep their components.
    rng : numpy.random.Generator, optional
        Draws the sign of the offset in each dimension, once per split.

    Returns
    -------
    Mixtures
        With ``max(n_components, mix.n_components)`` component slots.
    """
    p, m, d = mix.means.shape
    size = max(m, n_components)
    weights = np.zeros((p, size))
    means = np.zeros((p, size, d))
    variances = np.ones((p, size, d))
    weights[:, :m] = mix.weights
    means[:, :m] = mix.means
    variances[:, :m] = mix.variances
    # Empty slots start as copies of component 0 so every value stays finite.
    means[:, m:] = mix.means[:, :1]
    variances[:, m:] = mix.variances[:, :1]
    grow = np.ones(p, dtype=bool) if which is None else np.asarray(which, dtype=bool)
    for k in np.flatnonzero(grow):
        while True:
            free = np.flatnonzero(weights[k] <= 0)
            if free.size == 0 or np.count_nonzero(weights[k] > 0) >= n_components:
                break
            j = int(np.argmax(weights[k]))
            slot = int(free[0])
            signs = np.ones(d) if rng is None else rng.choice([-1.0, 1.0], size=d)
            offset = SPLIT_OFFSET * np.sqrt(variances[k, j]) * signs
            weights[k, j] *= 0.5
            weights[k, slot] = weights[k, j]
            means[k, slot] = means[k, j] - offset
            means[k, j] = means[k, j] + offset
            variances[k, slot] = variances[k, j]
    return Mixtures(weights, means, variances)
