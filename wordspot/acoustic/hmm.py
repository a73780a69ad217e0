"""Forward-backward and Viterbi over a :class:`~wordspot.acoustic.graph.StateGraph`.

Readable wrappers around the compiled recursions in :mod:`wordspot.acoustic.kernels`: they take
the graph object and a (T, S) matrix of emission log-likelihoods and return posteriors,
expected transition counts, or the best state path.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.acoustic import kernels
from wordspot.acoustic.graph import StateGraph

__all__ = ["Posteriors", "forward_backward", "viterbi_path", "graph_arrays"]


@dataclass
class Posteriors:
    """What one forward-backward run over one sequence gives.

    Attributes
    ----------
    loglik : float
        Log-likelihood of the sequence (-inf if no path fits; then every count is zero).
    gamma : ndarray, shape (T, S)
        Probability of being in each state at each frame; rows sum to one.
    self_count, init_count, final_count : ndarray, shape (S,)
        Expected uses of each self-loop, start and end.
    arc_count : ndarray, shape (E,)
        Expected uses of each arc.
    """

    loglik: float
    gamma: np.ndarray
    self_count: np.ndarray
    arc_count: np.ndarray
    init_count: np.ndarray
    final_count: np.ndarray


def graph_arrays(graph: StateGraph):
    """The graph's arrays in the dtypes the kernels expect (contiguous int64/float64)."""
    return (
        np.ascontiguousarray(graph.self_logp, dtype=np.float64),
        np.ascontiguousarray(graph.arc_src, dtype=np.int64),
        np.ascontiguousarray(graph.arc_dst, dtype=np.int64),
        np.ascontiguousarray(graph.arc_logp, dtype=np.float64),
        np.ascontiguousarray(graph.init_logp, dtype=np.float64),
        np.ascontiguousarray(graph.final_logp, dtype=np.float64),
    )


def _check(graph: StateGraph, state_loglik: np.ndarray) -> np.ndarray:
    x = np.ascontiguousarray(state_loglik, dtype=np.float64)
    if x.ndim != 2 or x.shape[1] != graph.n_states or x.shape[0] < 1:
        raise ValueError(
            f"state_loglik must have shape (T >= 1, {graph.n_states}), got {x.shape}"
        )
    return x


def forward_backward(graph: StateGraph, state_loglik: np.ndarray) -> Posteriors:
    """State posteriors and expected transition counts of one sequence.

    Parameters
    ----------
    graph : StateGraph
    state_loglik : ndarray, shape (T, S)
        Emission log-likelihood of every frame in every graph state.

    Returns
    -------
    Posteriors
    """
    x = _check(graph, state_loglik)
    self_logp, src, dst, arc_logp, init_logp, final_logp = graph_arrays(graph)
    total, alpha = kernels.forward(x, self_logp, src, dst, arc_logp, init_logp, final_logp)
    n_frames, n_states = x.shape
    if not np.isfinite(total):
        zeros = np.zeros(n_states)
        return Posteriors(float(total), np.zeros((n_frames, n_states)), zeros, np.zeros(src.shape[0]),
                          zeros.copy(), zeros.copy())
    beta = kernels.backward(x, self_logp, src, dst, arc_logp, final_logp)
    gamma = np.exp(alpha + beta - total)
    counts = kernels.transition_counts(x, alpha, beta, total, self_logp, src, dst, arc_logp,
                                       init_logp, final_logp)
    return Posteriors(float(total), gamma, *counts)


def viterbi_path(graph: StateGraph, state_loglik: np.ndarray) -> tuple[float, np.ndarray]:
    """Best state sequence through the graph.

    Returns
    -------
    score : float
        Log probability of the best path (-inf if none fits).
    states : ndarray of int64, shape (T,)
        Graph state at every frame (all -1 when no path fits).
    """
    x = _check(graph, state_loglik)
    self_logp, src, dst, arc_logp, init_logp, final_logp = graph_arrays(graph)
    score, states = kernels.viterbi(x, self_logp, src, dst, arc_logp, init_logp, final_logp)
    return float(score), states
