"""Unit transition parameters <-> state-graph arcs, and their re-estimation.

Every self-loop, arc, start and end of a :class:`~wordspot.acoustic.graph.StateGraph` is the
product of at most :data:`~wordspot.acoustic.graph.MAX_ARC_PARAMS` unit transition parameters
(flat numbering of :mod:`wordspot.acoustic.units`). So

* the graph's log probabilities can be recomputed from new parameters without composing
  the graph again (:func:`refresh_graph`), and
* the expected count of an arc is an expected count of every parameter it uses
  (:func:`parameter_counts`); normalising those counts per row gives the maximum
  likelihood transitions (:func:`update_transitions`; Rabiner 1989, eq. 40b).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from wordspot.acoustic.graph import StateGraph
from wordspot.acoustic.hmm import Posteriors
from wordspot.acoustic.units import MAX_STATES, UnitSet

__all__ = ["refresh_graph", "parameter_counts", "update_transitions", "TRANSITION_FLOOR"]

#: No allowed transition probability goes below this after re-estimation (common
#: practice: a path the topology allows should never become impossible).
TRANSITION_FLOOR = 1e-3


def _sum_logs(log_flat: np.ndarray, params: np.ndarray) -> np.ndarray:
    params = np.asarray(params)
    vals = np.where(params >= 0, log_flat[np.maximum(params, 0)], 0.0)
    return vals.sum(axis=-1)


def refresh_graph(graph: StateGraph, units: UnitSet) -> StateGraph:
    """The same graph with log probabilities recomputed from ``units``' parameters."""
    with np.errstate(divide="ignore"):
        log_flat = np.log(units.flat_params())
    self_logp = np.where(graph.self_param >= 0, log_flat[np.maximum(graph.self_param, 0)], -np.inf)
    init = np.where(np.isfinite(graph.init_logp), _sum_logs(log_flat, graph.init_params), -np.inf)
    final = np.where(np.isfinite(graph.final_logp), _sum_logs(log_flat, graph.final_params), -np.inf)
    return replace(
        graph,
        self_logp=self_logp,
        arc_logp=_sum_logs(log_flat, graph.arc_params),
        init_logp=init,
        final_logp=final,
    )


def parameter_counts(graph: StateGraph, post: Posteriors, n_params: int) -> np.ndarray:
    """Expected uses of every unit transition parameter in one sequence.

    Returns
    -------
    ndarray, shape (n_params,)
    """
    counts = np.zeros(n_params)
    np.add.at(counts, graph.self_param, post.self_count)
    for ids, c in (
        (graph.arc_params, post.arc_count),
        (graph.init_params, post.init_count),
        (graph.final_params, post.final_count),
    ):
        for k in range(ids.shape[1]):
            col = ids[:, k]
            ok = col >= 0
            np.add.at(counts, col[ok], c[ok])
    return counts


def _normalise(rows: np.ndarray, counts: np.ndarray, floor: float) -> np.ndarray:
    """New rows from counts; allowed (non-zero) entries kept at or above ``floor``."""
    allowed = rows > 0
    c = np.where(allowed, counts, 0.0)
    total = c.sum(axis=-1, keepdims=True)
    seen = total[..., 0] > 0
    p = c / np.where(total > 0, total, 1.0)
    p = np.where(allowed, np.maximum(p, floor), 0.0)
    norm = p.sum(axis=-1, keepdims=True)
    p = p / np.where(norm > 0, norm, 1.0)
    return np.where(seen[..., None], p, rows)


def update_transitions(units: UnitSet, counts: np.ndarray, *, floor: float = TRANSITION_FLOOR) -> UnitSet:
    """Maximum-likelihood transition and entry probabilities from expected counts.

    Transitions the topology forbids (probability 0) stay 0; allowed ones never go below
    ``floor``; rows that saw no data keep their old values.

    Parameters
    ----------
    units : UnitSet
    counts : ndarray, shape (n_transition_params,)
        Summed :func:`parameter_counts`.
    floor : float >= 0

    Returns
    -------
    UnitSet
    """
    n = units.n_units
    per_unit = MAX_STATES * (MAX_STATES + 1)
    trans_counts = counts[: n * per_unit].reshape(units.trans.shape)
    entry_counts = counts[n * per_unit:].reshape(units.entry.shape)
    trans = _normalise(units.trans, trans_counts, floor)
    entry = _normalise(units.entry, entry_counts, floor)
    return UnitSet(units.names, units.n_states.copy(), units.state_mixture.copy(), trans, entry)
