"""Diagonal-covariance Gaussian mixtures: one per tied HMM state ("pdf").

All mixtures of a model live in three arrays (P mixtures, M components at most, D
feature dimensions). A mixture with fewer than M components has zero weight on the
rest. Scoring uses the expansion

    log N(x; mu, var) = -1/2 sum_d [log(2 pi var_d) + (x_d - mu_d)^2 / var_d]
                      = [x*x, x, 1] . [-1/(2 var), mu/var, const]

so that all frames against all components is one matrix product (DESIGN.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import logsumexp

__all__ = ["Mixtures", "scoring_matrix", "component_log_likelihoods", "log_likelihoods"]

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
    def n_pdfs(self) -> int:
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


def component_log_likelihoods(frames: np.ndarray, mix: Mixtures, pdfs=None) -> np.ndarray:
    """Log weight plus log density of every frame under every component.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    mix : Mixtures
    pdfs : ndarray of int, optional
        Only these mixtures (default: all).

    Returns
    -------
    ndarray, shape (T, len(pdfs), M)
    """
    if pdfs is not None:
        mix = Mixtures(mix.weights[pdfs], mix.means[pdfs], mix.variances[pdfs])
    w, c = scoring_matrix(mix)
    x = np.asarray(frames, dtype=np.float64)
    out = np.concatenate([x * x, x], axis=1) @ w + c
    return out.reshape(x.shape[0], mix.n_pdfs, mix.n_components)


def log_likelihoods(frames: np.ndarray, mix: Mixtures, pdfs=None) -> np.ndarray:
    """Log density of every frame under every mixture, shape (T, P)."""
    return logsumexp(component_log_likelihoods(frames, mix, pdfs), axis=2)
