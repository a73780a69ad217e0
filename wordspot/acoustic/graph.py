"""State graphs: units chained into one flat hidden Markov model.

A :class:`StateGraph` is the structure that both training (one graph per utterance:
pause, the transcript's words with optional gaps, pause) and recognition (one graph per
word pronunciation) walk. Every state emits; every arc between two different states
takes one frame, so the recursions need only the previous frame and cost
O(T x (S + E)) for S states and E arcs (E is about S for chains).

Each self-loop, arc, start and end probability remembers which unit transition
parameters it is the product of (at most :data:`MAX_ARC_PARAMS`, padded with -1), so
that re-estimation can hand the expected count of an arc back to every parameter it
uses (see :mod:`wordspot.acoustic.units` for the flat parameter numbering).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.acoustic.units import EXIT, UnitSet, entry_param_id, trans_param_id

__all__ = ["StateGraph", "compose", "MAX_ARC_PARAMS"]

MAX_ARC_PARAMS = 4

_NEG_INF = -np.inf


@dataclass
class StateGraph:
    """A flat HMM whose states all emit.

    Attributes
    ----------
    mixture : ndarray of int32, shape (S,)
        Mixture index of each state.
    unit : ndarray of int32, shape (S,)
        Unit id of each state; ``position`` gives the state's index within that unit.
    slot : ndarray of int32, shape (S,)
        Which slot (see :func:`compose`) each state belongs to; ``alternative`` says
        which alternative of that slot.
    self_logp, self_param : ndarray, shape (S,)
        Log self-loop probability (-inf where there is none) and its parameter id.
    arc_src, arc_dst, arc_logp : ndarray, shape (E,)
        Arcs between different states, sorted by destination.
    arc_params : ndarray of int32, shape (E, MAX_ARC_PARAMS)
    init_logp, final_logp : ndarray, shape (S,)
        Log probability of starting in / ending after each state (-inf if impossible).
    init_params, final_params : ndarray of int32, shape (S, MAX_ARC_PARAMS)
    """

    mixture: np.ndarray
    unit: np.ndarray
    position: np.ndarray
    slot: np.ndarray
    alternative: np.ndarray
    self_logp: np.ndarray
    self_param: np.ndarray
    arc_src: np.ndarray
    arc_dst: np.ndarray
    arc_logp: np.ndarray
    arc_params: np.ndarray
    init_logp: np.ndarray
    init_params: np.ndarray
    final_logp: np.ndarray
    final_params: np.ndarray

    @property
    def n_states(self) -> int:
        return int(self.mixture.shape[0])

    @property
    def n_arcs(self) -> int:
        return int(self.arc_src.shape[0])

    def min_frames(self) -> int:
        """Fewest frames any path from a start to an end state needs."""
        s = self.n_states
        dist = np.full(s, np.iinfo(np.int64).max // 2, dtype=np.int64)
        dist[np.isfinite(self.init_logp)] = 1
        # Arcs may point backwards (the pause returns), so relax until nothing changes.
        for _ in range(s + 1):
            cand = dist[self.arc_src] + 1
            new = dist.copy()
            np.minimum.at(new, self.arc_dst, cand)
            if np.array_equal(new, dist):
                break
            dist = new
        ends = np.isfinite(self.final_logp)
        return int(dist[ends].min()) if ends.any() else 0


def _log(p: float) -> float:
    return float(np.log(p)) if p > 0 else _NEG_INF


def _pad(params: tuple[int, ...]) -> list[int]:
    if len(params) > MAX_ARC_PARAMS:
        raise ValueError("too many skippable units in a row for one arc")
    return list(params) + [-1] * (MAX_ARC_PARAMS - len(params))


def compose(slots, units: UnitSet) -> StateGraph:
    """Chain units into one state graph.

    Parameters
    ----------
    slots : sequence of sequence of sequence of int
        ``slots[k]`` lists the alternatives for position ``k`` (for example the
        pronunciations of one word); each alternative is a sequence of unit ids. Every
        path passes through exactly one alternative of every slot, in order.
    units : UnitSet
        Topology and transition probabilities.

    Returns
    -------
    StateGraph
    """
    n_units = units.n_units
    mixture, unit, position, slot_of, alt_of = [], [], [], [], []
    self_logp, self_param = [], []
    arcs: list[tuple[int, int, float, list[int]]] = []
    init: dict[int, tuple[float, tuple[int, ...]]] = {}
    # A "pending" exit: (source state or -1 for the graph's start, log prob, params).
    pending: list[tuple[int, float, tuple[int, ...]]] = [(-1, 0.0, ())]

    for k, alternatives in enumerate(slots):
        if len(alternatives) == 0:
            raise ValueError(f"slot {k} has no alternatives")
        after_slot = []
        for a, seq in enumerate(alternatives):
            here = list(pending)
            for u in seq:
                n = int(units.n_states[u])
                first = len(mixture)
                for i in range(n):
                    mixture.append(int(units.state_mixture[u, i]))
                    unit.append(u)
                    position.append(i)
                    slot_of.append(k)
                    alt_of.append(a)
                    self_logp.append(_log(units.trans[u, i, i]))
                    self_param.append(trans_param_id(u, i, i))
                for i in range(n):
                    for j in range(n):
                        if i != j and units.trans[u, i, j] > 0:
                            arcs.append(
                                (first + i, first + j, _log(units.trans[u, i, j]),
                                 _pad((trans_param_id(u, i, j),)))
                            )
                for j in range(n):
                    p_in = units.entry[u, j]
                    if p_in <= 0:
                        continue
                    pid = entry_param_id(n_units, u, j)
                    for src, lp, params in here:
                        total = lp + _log(p_in)
                        if src < 0:
                            init[first + j] = (total, params + (pid,))
                        else:
                            arcs.append((src, first + j, total, _pad(params + (pid,))))
                leaving = [
                    (first + i, _log(units.trans[u, i, EXIT]), (trans_param_id(u, i, EXIT),))
                    for i in range(n)
                    if units.trans[u, i, EXIT] > 0
                ]
                p_skip = units.entry[u, EXIT]
                if p_skip > 0:
                    pid = entry_param_id(n_units, u, EXIT)
                    leaving += [(src, lp + _log(p_skip), params + (pid,)) for src, lp, params in here]
                here = leaving
            after_slot.extend(here)
        pending = after_slot

    s = len(mixture)
    final_logp = np.full(s, _NEG_INF)
    final_params = np.full((s, MAX_ARC_PARAMS), -1, dtype=np.int32)
    for src, lp, params in pending:
        if src < 0:
            raise ValueError("every unit of the graph can be skipped: it would match no frames")
        final_logp[src] = np.logaddexp(final_logp[src], lp)
        final_params[src] = _pad(params)
    init_logp = np.full(s, _NEG_INF)
    init_params = np.full((s, MAX_ARC_PARAMS), -1, dtype=np.int32)
    for dst, (lp, params) in init.items():
        init_logp[dst] = lp
        init_params[dst] = _pad(params)

    if arcs:
        order = sorted(range(len(arcs)), key=lambda e: (arcs[e][1], arcs[e][0]))
        arc_src = np.array([arcs[e][0] for e in order], dtype=np.int32)
        arc_dst = np.array([arcs[e][1] for e in order], dtype=np.int32)
        arc_logp = np.array([arcs[e][2] for e in order], dtype=np.float64)
        arc_params = np.array([arcs[e][3] for e in order], dtype=np.int32)
    else:
        arc_src = np.zeros(0, dtype=np.int32)
        arc_dst = np.zeros(0, dtype=np.int32)
        arc_logp = np.zeros(0, dtype=np.float64)
        arc_params = np.zeros((0, MAX_ARC_PARAMS), dtype=np.int32)

    return StateGraph(
        mixture=np.array(mixture, dtype=np.int32),
        unit=np.array(unit, dtype=np.int32),
        position=np.array(position, dtype=np.int32),
        slot=np.array(slot_of, dtype=np.int32),
        alternative=np.array(alt_of, dtype=np.int32),
        self_logp=np.array(self_logp, dtype=np.float64),
        self_param=np.array(self_param, dtype=np.int32),
        arc_src=arc_src,
        arc_dst=arc_dst,
        arc_logp=arc_logp,
        arc_params=arc_params,
        init_logp=init_logp,
        init_params=init_params,
        final_logp=final_logp,
        final_params=final_params,
    )
