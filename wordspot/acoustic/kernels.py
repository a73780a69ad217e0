"""Compiled recursions over a state graph, each beside a plain-numpy reference version.

The graph is passed as its arrays (see :class:`wordspot.acoustic.graph.StateGraph`): per-state
self-loop log probabilities, arcs between different states (``src``, ``dst``, log prob),
and start and end log probabilities. Every arc takes one frame, so each frame needs only
the previous one and the cost is O(T x (S + E)), not O(T x S^2).

Everything is in the log domain. ``-inf`` means "impossible" and is handled explicitly
(:func:`_log_add` never computes ``-inf - -inf``), so no NaN can appear as long as the
emission scores are not NaN themselves.

The Gaussian-mixture side of training has three more loops here (scoring frames against
components, normalising component posteriors, summing first and second moments). They
are plain loops rather than BLAS calls so that their cost does not depend on a thread
pool (tiny matrix products suffer badly from thread start-up on a busy machine) and their
results are bit-identical in every process.

The ``reference_*`` functions compute the same quantities the textbook way, with a dense
S x S transition matrix (Rabiner 1989, "A tutorial on hidden Markov models", eqs. 19-25,
30-35, 37-38 in log form). They are slow and exist so the tests can compare.
"""

from __future__ import annotations

import numpy as np
from numba import njit
from scipy.special import logsumexp

__all__ = [
    "forward",
    "backward",
    "transition_counts",
    "viterbi",
    "reference_forward",
    "reference_backward",
    "reference_transition_counts",
    "reference_viterbi",
    "score_components",
    "mixture_posteriors",
    "accumulate_moments",
    "mixture_log_likelihoods",
    "accumulate_from_scores",
    "mixture_occupancy",
    "reference_score_components",
    "reference_mixture_posteriors",
    "reference_accumulate_moments",
]

_NEG_INF = -np.inf


# --------------------------------------------------------------------------- compiled


@njit(cache=True, inline="always")
def _log_add(a, b):
    """log(exp(a) + exp(b)) that is exact for -inf on either side."""
    if a == _NEG_INF:
        return b
    if b == _NEG_INF:
        return a
    if a >= b:
        return a + np.log1p(np.exp(b - a))
    return b + np.log1p(np.exp(a - b))


@njit(cache=True)
def forward(loglik, self_logp, arc_src, arc_dst, arc_logp, init_logp, final_logp):
    """Forward log probabilities.

    Parameters
    ----------
    loglik : ndarray, shape (T, S)
        Emission log-likelihood of every frame in every state.
    self_logp : ndarray, shape (S,)
    arc_src, arc_dst : ndarray of int, shape (E,)
    arc_logp : ndarray, shape (E,)
    init_logp, final_logp : ndarray, shape (S,)

    Returns
    -------
    total : float
        Log-likelihood of the whole sequence (-inf if no path fits).
    alpha : ndarray, shape (T, S)
        ``alpha[t, j]``: log P(frames 0..t, state j at t).
    """
    n_frames, n_states = loglik.shape
    alpha = np.empty((n_frames, n_states))
    for j in range(n_states):
        alpha[0, j] = init_logp[j] + loglik[0, j]
    for t in range(1, n_frames):
        for j in range(n_states):
            alpha[t, j] = alpha[t - 1, j] + self_logp[j]
        for e in range(arc_src.shape[0]):
            d = arc_dst[e]
            alpha[t, d] = _log_add(alpha[t, d], alpha[t - 1, arc_src[e]] + arc_logp[e])
        for j in range(n_states):
            alpha[t, j] += loglik[t, j]
    total = _NEG_INF
    for j in range(n_states):
        total = _log_add(total, alpha[n_frames - 1, j] + final_logp[j])
    return total, alpha


@njit(cache=True)
def backward(loglik, self_logp, arc_src, arc_dst, arc_logp, final_logp):
    """Backward log probabilities.

    Returns
    -------
    beta : ndarray, shape (T, S)
        ``beta[t, i]``: log P(frames t+1..T-1, end | state i at t).
    """
    n_frames, n_states = loglik.shape
    beta = np.empty((n_frames, n_states))
    ahead = np.empty(n_states)
    for i in range(n_states):
        beta[n_frames - 1, i] = final_logp[i]
    for t in range(n_frames - 2, -1, -1):
        for i in range(n_states):
            ahead[i] = loglik[t + 1, i] + beta[t + 1, i]
            beta[t, i] = self_logp[i] + ahead[i]
        for e in range(arc_src.shape[0]):
            s = arc_src[e]
            beta[t, s] = _log_add(beta[t, s], arc_logp[e] + ahead[arc_dst[e]])
    return beta


@njit(cache=True)
def transition_counts(loglik, alpha, beta, total, self_logp, arc_src, arc_dst, arc_logp,
                      init_logp, final_logp):
    """Expected number of uses of every self-loop, arc, start and end.

    Returns
    -------
    self_count : ndarray, shape (S,)
    arc_count : ndarray, shape (E,)
    init_count : ndarray, shape (S,)
    final_count : ndarray, shape (S,)
    """
    n_frames, n_states = loglik.shape
    n_arcs = arc_src.shape[0]
    self_count = np.zeros(n_states)
    arc_count = np.zeros(n_arcs)
    init_count = np.zeros(n_states)
    final_count = np.zeros(n_states)
    ahead = np.empty(n_states)
    for t in range(n_frames - 1):
        for i in range(n_states):
            ahead[i] = loglik[t + 1, i] + beta[t + 1, i] - total
            v = alpha[t, i] + self_logp[i] + ahead[i]
            if v > _NEG_INF:
                self_count[i] += np.exp(v)
        for e in range(n_arcs):
            v = alpha[t, arc_src[e]] + arc_logp[e] + ahead[arc_dst[e]]
            if v > _NEG_INF:
                arc_count[e] += np.exp(v)
    for i in range(n_states):
        v = init_logp[i] + loglik[0, i] + beta[0, i] - total
        if v > _NEG_INF:
            init_count[i] = np.exp(v)
        v = alpha[n_frames - 1, i] + final_logp[i] - total
        if v > _NEG_INF:
            final_count[i] = np.exp(v)
    return self_count, arc_count, init_count, final_count


@njit(cache=True)
def viterbi(loglik, self_logp, arc_src, arc_dst, arc_logp, init_logp, final_logp):
    """Best state sequence.

    Returns
    -------
    score : float
        Log probability of the best path (-inf if none fits).
    states : ndarray of int64, shape (T,)
        State at every frame (all -1 when no path fits).
    """
    n_frames, n_states = loglik.shape
    delta = np.empty((n_frames, n_states))
    back = np.empty((n_frames, n_states), dtype=np.int64)
    for j in range(n_states):
        delta[0, j] = init_logp[j] + loglik[0, j]
        back[0, j] = -1
    for t in range(1, n_frames):
        for j in range(n_states):
            delta[t, j] = delta[t - 1, j] + self_logp[j]
            back[t, j] = j
        for e in range(arc_src.shape[0]):
            d = arc_dst[e]
            v = delta[t - 1, arc_src[e]] + arc_logp[e]
            if v > delta[t, d]:
                delta[t, d] = v
                back[t, d] = arc_src[e]
        for j in range(n_states):
            delta[t, j] += loglik[t, j]
    states = np.full(n_frames, -1, dtype=np.int64)
    best = _NEG_INF
    last = -1
    for j in range(n_states):
        v = delta[n_frames - 1, j] + final_logp[j]
        if v > best:
            best = v
            last = j
    if last < 0:
        return best, states
    states[n_frames - 1] = last
    for t in range(n_frames - 1, 0, -1):
        states[t - 1] = back[t, states[t]]
    return best, states


@njit(cache=True)
def score_components(frames, w, const):
    """``[x*x, x] @ w + const`` for every frame (see :func:`wordspot.acoustic.gmm.scoring_matrix`).

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    w : ndarray, shape (2 D, C)
    const : ndarray, shape (C,)

    Returns
    -------
    ndarray, shape (T, C)
    """
    n_frames, dim = frames.shape
    n_cols = const.shape[0]
    out = np.empty((n_frames, n_cols))
    for t in range(n_frames):
        for j in range(n_cols):
            out[t, j] = const[j]
        for d in range(dim):
            v = frames[t, d]
            v2 = v * v
            for j in range(n_cols):
                out[t, j] += v2 * w[d, j] + v * w[dim + d, j]
    return out


@njit(cache=True)
def mixture_posteriors(comp):
    """Mixture log-likelihoods and component posteriors.

    Parameters
    ----------
    comp : ndarray, shape (T, K, M)
        Log weight plus log density of each component (-inf for unused ones).

    Returns
    -------
    loglik : ndarray, shape (T, K)
        ``log sum_m exp(comp[t, k, m])``.
    post : ndarray, shape (T, K, M)
        ``exp(comp - loglik)`` (0 where the mixture is impossible).
    """
    n_frames, n_mix, n_comp = comp.shape
    loglik = np.empty((n_frames, n_mix))
    post = np.zeros((n_frames, n_mix, n_comp))
    for t in range(n_frames):
        for k in range(n_mix):
            top = _NEG_INF
            for m in range(n_comp):
                if comp[t, k, m] > top:
                    top = comp[t, k, m]
            if top == _NEG_INF:
                loglik[t, k] = _NEG_INF
                continue
            total = 0.0
            for m in range(n_comp):
                e = np.exp(comp[t, k, m] - top)
                post[t, k, m] = e
                total += e
            for m in range(n_comp):
                post[t, k, m] /= total
            loglik[t, k] = top + np.log(total)
    return loglik, post


@njit(cache=True)
def accumulate_moments(frames, post, mixture_gamma):
    """Posterior-weighted zeroth, first and second moments of every component.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    post : ndarray, shape (T, K, M)
        Component posteriors within each mixture.
    mixture_gamma : ndarray, shape (T, K)
        Probability that mixture k emitted frame t.

    Returns
    -------
    occupancy : ndarray, shape (K, M)
    first, second : ndarray, shape (K, M, D)
    """
    n_frames, dim = frames.shape
    _, n_mix, n_comp = post.shape
    occ = np.zeros((n_mix, n_comp))
    first = np.zeros((n_mix, n_comp, dim))
    second = np.zeros((n_mix, n_comp, dim))
    sq = np.empty(dim)
    for t in range(n_frames):
        for d in range(dim):
            sq[d] = frames[t, d] * frames[t, d]
        for k in range(n_mix):
            g = mixture_gamma[t, k]
            if g == 0.0:
                continue
            for m in range(n_comp):
                r = g * post[t, k, m]
                if r == 0.0:
                    continue
                occ[k, m] += r
                for d in range(dim):
                    first[k, m, d] += r * frames[t, d]
                    second[k, m, d] += r * sq[d]
    return occ, first, second


@njit(cache=True)
def mixture_log_likelihoods(comp):
    """Mixture log-likelihoods and the two numbers each is made of, without the posteriors.

    The first half of :func:`mixture_posteriors`: ``loglik = top + log(total)`` with
    ``top`` the largest component score and ``total = sum_m exp(comp - top)``.
    :func:`accumulate_from_scores` forms a component's posterior from ``top`` and
    ``total`` only where its mixture is used, with the same operations, so the statistics
    are bit for bit those of :func:`mixture_posteriors` and :func:`accumulate_moments`.

    Parameters
    ----------
    comp : ndarray, shape (T, K, M)

    Returns
    -------
    loglik, top, total : ndarray, shape (T, K)
        ``top`` is -inf and ``total`` 0 where the mixture is impossible.
    """
    n_frames, n_mix, n_comp = comp.shape
    loglik = np.empty((n_frames, n_mix))
    top_out = np.empty((n_frames, n_mix))
    total_out = np.zeros((n_frames, n_mix))
    for t in range(n_frames):
        for k in range(n_mix):
            top = _NEG_INF
            for m in range(n_comp):
                if comp[t, k, m] > top:
                    top = comp[t, k, m]
            top_out[t, k] = top
            if top == _NEG_INF:
                loglik[t, k] = _NEG_INF
                continue
            total = 0.0
            for m in range(n_comp):
                total += np.exp(comp[t, k, m] - top)
            total_out[t, k] = total
            loglik[t, k] = top + np.log(total)
    return loglik, top_out, total_out


@njit(cache=True)
def mixture_occupancy(gamma, local, n_mix, prune):
    """Posterior of every mixture at every frame: the states' posteriors summed per mixture.

    Parameters
    ----------
    gamma : ndarray, shape (T, S)
        State posteriors.
    local : ndarray of int, shape (S,)
        The mixture (column) of every state.
    n_mix : int
    prune : float >= 0
        Sums below this are set to 0 (the moment sums then skip them).

    Returns
    -------
    ndarray, shape (T, n_mix)
        Each sum adds the states in state order (as ``np.add.at``).
    """
    n_frames, n_states = gamma.shape
    out = np.zeros((n_frames, n_mix))
    for t in range(n_frames):
        for s in range(n_states):
            out[t, local[s]] += gamma[t, s]
        if prune > 0.0:
            for k in range(n_mix):
                if out[t, k] < prune:
                    out[t, k] = 0.0
    return out


@njit(cache=True)
def accumulate_from_scores(frames, comp, top, total, mixture_gamma):
    """:func:`accumulate_moments` with the component posteriors formed on the way.

    ``post[t, k, m] = exp(comp[t, k, m] - top[t, k]) / total[t, k]`` (as
    :func:`mixture_posteriors` computes it) only where ``mixture_gamma[t, k]`` is not 0,
    so frames far from a mixture cost no exponential. Same results, bit for bit, as
    ``accumulate_moments(frames, mixture_posteriors(comp)[1], mixture_gamma)``.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    comp : ndarray, shape (T, K, M)
    top, total : ndarray, shape (T, K)
        From :func:`mixture_log_likelihoods`.
    mixture_gamma : ndarray, shape (T, K)

    Returns
    -------
    occupancy : ndarray, shape (K, M)
    first, second : ndarray, shape (K, M, D)
    """
    n_frames, dim = frames.shape
    _, n_mix, n_comp = comp.shape
    occ = np.zeros((n_mix, n_comp))
    first = np.zeros((n_mix, n_comp, dim))
    second = np.zeros((n_mix, n_comp, dim))
    sq = np.empty(dim)
    for t in range(n_frames):
        for d in range(dim):
            sq[d] = frames[t, d] * frames[t, d]
        for k in range(n_mix):
            g = mixture_gamma[t, k]
            if g == 0.0 or top[t, k] == _NEG_INF:
                continue
            for m in range(n_comp):
                r = g * (np.exp(comp[t, k, m] - top[t, k]) / total[t, k])
                if r == 0.0:
                    continue
                occ[k, m] += r
                for d in range(dim):
                    first[k, m, d] += r * frames[t, d]
                    second[k, m, d] += r * sq[d]
    return occ, first, second


# --------------------------------------------------------------------------- reference


def reference_score_components(frames, w, const):
    """Plain-numpy :func:`score_components` (one matrix product)."""
    x = np.asarray(frames, dtype=np.float64)
    return np.concatenate([x * x, x], axis=1) @ w + const


def reference_mixture_posteriors(comp):
    """Plain-numpy :func:`mixture_posteriors`."""
    with np.errstate(invalid="ignore", divide="ignore"):
        loglik = logsumexp(comp, axis=2)
        post = np.nan_to_num(np.exp(comp - loglik[:, :, None]), nan=0.0)
    return loglik, post


def reference_accumulate_moments(frames, post, mixture_gamma):
    """Plain-numpy :func:`accumulate_moments` (matrix products)."""
    x = np.asarray(frames, dtype=np.float64)
    t, k, m = post.shape
    r = (post * mixture_gamma[:, :, None]).reshape(t, k * m)
    return r.sum(axis=0).reshape(k, m), (r.T @ x).reshape(k, m, -1), (r.T @ (x * x)).reshape(k, m, -1)


def _dense(n_states, self_logp, arc_src, arc_dst, arc_logp):
    """Dense log transition matrix; parallel arcs are added in probability."""
    a = np.full((n_states, n_states), _NEG_INF)
    a[np.arange(n_states), np.arange(n_states)] = self_logp
    np.logaddexp.at(a, (np.asarray(arc_src), np.asarray(arc_dst)), np.asarray(arc_logp))
    return a


def reference_forward(loglik, self_logp, arc_src, arc_dst, arc_logp, init_logp, final_logp):
    """Plain-numpy :func:`forward` (dense matrix, O(T x S^2))."""
    n_frames, n_states = loglik.shape
    a = _dense(n_states, self_logp, arc_src, arc_dst, arc_logp)
    alpha = np.empty((n_frames, n_states))
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha[0] = init_logp + loglik[0]
        for t in range(1, n_frames):
            alpha[t] = logsumexp(alpha[t - 1][:, None] + a, axis=0) + loglik[t]
        total = logsumexp(alpha[-1] + final_logp)
    return float(total), alpha


def reference_backward(loglik, self_logp, arc_src, arc_dst, arc_logp, final_logp):
    """Plain-numpy :func:`backward`."""
    n_frames, n_states = loglik.shape
    a = _dense(n_states, self_logp, arc_src, arc_dst, arc_logp)
    beta = np.empty((n_frames, n_states))
    beta[-1] = final_logp
    with np.errstate(divide="ignore", invalid="ignore"):
        for t in range(n_frames - 2, -1, -1):
            beta[t] = logsumexp(a + (loglik[t + 1] + beta[t + 1])[None, :], axis=1)
    return beta


def reference_transition_counts(loglik, alpha, beta, total, self_logp, arc_src, arc_dst,
                                arc_logp, init_logp, final_logp):
    """Plain-numpy :func:`transition_counts` (per-arc sums of xi_t, Rabiner eq. 37)."""
    ahead = loglik[1:] + beta[1:] - total  # (T-1, S)
    with np.errstate(invalid="ignore"):
        self_count = np.exp(alpha[:-1] + self_logp[None, :] + ahead).sum(axis=0)
        arc_count = np.exp(alpha[:-1, arc_src] + arc_logp[None, :] + ahead[:, arc_dst]).sum(axis=0)
        init_count = np.exp(init_logp + loglik[0] + beta[0] - total)
        final_count = np.exp(alpha[-1] + final_logp - total)
    return self_count, arc_count, init_count, final_count


def reference_viterbi(loglik, self_logp, arc_src, arc_dst, arc_logp, init_logp, final_logp):
    """Plain-numpy :func:`viterbi` (dense matrix, Rabiner eqs. 30-35)."""
    n_frames, n_states = loglik.shape
    a = _dense(n_states, self_logp, arc_src, arc_dst, arc_logp)
    delta = np.empty((n_frames, n_states))
    back = np.zeros((n_frames, n_states), dtype=np.int64)
    delta[0] = init_logp + loglik[0]
    for t in range(1, n_frames):
        cand = delta[t - 1][:, None] + a
        back[t] = np.argmax(cand, axis=0)
        delta[t] = cand[back[t], np.arange(n_states)] + loglik[t]
    end = delta[-1] + final_logp
    states = np.full(n_frames, -1, dtype=np.int64)
    if not np.isfinite(end.max()):
        return float(end.max()), states
    states[-1] = int(np.argmax(end))
    for t in range(n_frames - 1, 0, -1):
        states[t - 1] = back[t, states[t]]
    return float(end.max()), states
