"""Best scores of parts of the network over one stretch of frames (for confidence measures).

After the search has placed a command on frames ``a..b``, two questions tell how sure it
is: how well would *any* phones explain those frames (the free phone loop, with the pause
unit), and how well would the *next best* command? Both are Viterbi scores of a piece of
the compiled network over exactly those frames: a :class:`Piece` holds the states of some
items with local numbering; :func:`piece_score` runs the recursion, letting a path that
leaves one item enter any item of the piece again (``reenter_logp`` added) or, with
``reenter_logp = -inf``, pass through exactly one item.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numba
import numpy as np

__all__ = ["Piece", "piece_of", "piece_score", "piece_ends", "span_scores", "piece_score_reference",
           "piece_ends_reference", "piece_path", "piece_path_reference"]

_NEG = -np.inf


@dataclass(frozen=True)
class Piece:
    """States of some items of a network, numbered locally (all int64 / float64 arrays)."""

    mixture: np.ndarray
    self_logp: np.ndarray
    arc_first: np.ndarray
    arc_dst: np.ndarray
    arc_logp: np.ndarray
    end_logp: np.ndarray
    start_state: np.ndarray
    start_logp: np.ndarray
    prev_logp: np.ndarray = field(default=None, repr=False)
    in_first: np.ndarray = field(default=None, repr=False)
    in_src: np.ndarray = field(default=None, repr=False)
    in_logp: np.ndarray = field(default=None, repr=False)

    def __post_init__(self) -> None:
        if self.in_first is None:  # the arcs by destination, for the compiled score (_score)
            tables = _incoming(self.arc_first, self.arc_dst, self.arc_logp, self.mixture.shape[0])
            for name, value in zip(("prev_logp", "in_first", "in_src", "in_logp"), tables):
                object.__setattr__(self, name, value)

    @property
    def n_states(self) -> int:
        return int(self.mixture.shape[0])


def _incoming(arc_first: np.ndarray, arc_dst: np.ndarray, arc_logp: np.ndarray, n: int):
    """The arcs by destination: ``prev_logp`` (n,), the log probability of the arc from the
    state before (-inf where none; the best of several), and the other arcs as a table
    (``in_first`` (n + 1,), ``in_src``, ``in_logp``; within a destination in the order the
    arcs are listed by source)."""
    src = np.repeat(np.arange(n, dtype=np.int64), np.diff(arc_first))
    dst = np.asarray(arc_dst, dtype=np.int64)
    logp = np.asarray(arc_logp, dtype=np.float64)
    chain = src == dst - 1
    prev_logp = np.full(n, -np.inf)
    np.maximum.at(prev_logp, dst[chain], logp[chain])
    src, dst, logp = src[~chain], dst[~chain], logp[~chain]
    order = np.argsort(dst, kind="stable")
    first = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(dst, minlength=n)[:n], out=first[1:])
    return prev_logp, first, np.ascontiguousarray(src[order]), np.ascontiguousarray(logp[order])


def piece_of(net, items) -> Piece:
    """The states of ``items`` of compiled network ``net`` (arcs stay inside an item)."""
    items = np.asarray(sorted(set(int(i) for i in items)), dtype=np.int64)
    keep = np.flatnonzero(np.isin(net.item, items))  # in item order
    local = np.full(net.n_states, -1, dtype=np.int64)
    local[keep] = np.arange(keep.size)
    arc_first, dst, lp = [0], [], []
    for s in keep:
        a, b = net.arc_first[s], net.arc_first[s + 1]
        dst.extend(local[net.arc_dst[a:b]].tolist())
        lp.extend(net.arc_logp[a:b].tolist())
        arc_first.append(len(dst))
    starts = [(k, net.start_state[k]) for i in items for k in range(net.start_first[i], net.start_first[i + 1])]
    return Piece(
        mixture=np.ascontiguousarray(net.mixture[keep]),
        self_logp=np.ascontiguousarray(net.self_logp[keep]),
        arc_first=np.array(arc_first, dtype=np.int64),
        arc_dst=np.array(dst, dtype=np.int64),
        arc_logp=np.array(lp, dtype=np.float64),
        end_logp=np.ascontiguousarray(net.end_logp[keep]),
        start_state=np.array([local[s] for _, s in starts], dtype=np.int64),
        start_logp=np.array([net.start_logp[k] for k, _ in starts], dtype=np.float64),
    )


@numba.njit(cache=True, nogil=True)
def _entered(ll, first, mixture, start_state, start_logp):
    """Scores at the first frame: the best entry into each state plus its emission."""
    cur = np.full(mixture.shape[0], _NEG)
    for k in range(start_state.shape[0]):
        s = start_state[k]
        v = start_logp[k] + ll[first, mixture[s]]
        if v > cur[s]:
            cur[s] = v
    return cur


@numba.njit(cache=True, nogil=True)
def _score(ll, first, last, mixture, self_logp, prev_logp, in_first, in_src, in_logp, end_logp,
           start_state, start_logp, reenter_logp, state_group, group):
    """The recursion of :func:`piece_score_reference`, each state pulling its best
    predecessor: its self-loop and the arc from the state before in one vectorised pass
    (``Piece.prev_logp``), then any other arcs by destination (``Piece.in_*``). No
    scattered writes, and a state no path reaches stays -inf without a test. Every state
    takes the maximum of the same sums as the dense recursion, so the scores are the same
    numbers. ``group`` >= 0 keeps only the states with that ``state_group`` (the others
    start at -inf; without re-entry they stay there)."""
    n = mixture.shape[0]
    cur = _entered(ll, first, mixture, start_state, start_logp)
    if group >= 0:
        for s in range(n):
            if state_group[s] != group:
                cur[s] = _NEG
    nxt = np.empty(n)
    for t in range(first + 1, last + 1):
        ended = _NEG
        if reenter_logp > _NEG:
            for s in range(n):
                v = cur[s] + end_logp[s]
                if v > ended:
                    ended = v
        if n > 0:
            nxt[0] = cur[0] + self_logp[0]
        for s in range(1, n):  # the self-loop and the arc from the state before (vectorised)
            stay = cur[s] + self_logp[s]
            come = cur[s - 1] + prev_logp[s]
            nxt[s] = come if come > stay else stay
        for s in range(n):  # the other arcs (the filler's pauses, skips)
            for e in range(in_first[s], in_first[s + 1]):
                v = cur[in_src[e]] + in_logp[e]
                if v > nxt[s]:
                    nxt[s] = v
        if ended > _NEG:
            for k in range(start_state.shape[0]):
                s = start_state[k]
                v = ended + reenter_logp + start_logp[k]
                if v > nxt[s]:
                    nxt[s] = v
        row = ll[t]
        for s in range(n):
            nxt[s] += row[mixture[s]]
        cur, nxt = nxt, cur
    out = np.empty(n)
    for s in range(n):
        out[s] = cur[s] + end_logp[s]
    return out


_NO_GROUPS = np.zeros(0, dtype=np.int64)


def _ends(ll, first, last, piece, reenter_logp):
    return _score(np.ascontiguousarray(ll, dtype=np.float64), int(first), int(last), piece.mixture,
                  piece.self_logp, piece.prev_logp, piece.in_first, piece.in_src, piece.in_logp, piece.end_logp,
                  piece.start_state, piece.start_logp, float(reenter_logp), _NO_GROUPS, -1)


@numba.njit(cache=True, nogil=True)
def _spans(ll, firsts, lasts, mixture, self_logp, prev_logp, in_first, in_src, in_logp, end_logp,
           start_state, start_logp, reenter_logp, state_group, groups):
    out = np.empty(firsts.shape[0])
    for k in range(firsts.shape[0]):
        ends = _score(ll, firsts[k], lasts[k], mixture, self_logp, prev_logp, in_first, in_src, in_logp, end_logp,
                      start_state, start_logp, reenter_logp, state_group, groups[k])
        best = _NEG
        for s in range(ends.shape[0]):
            if ends[s] > best:
                best = ends[s]
        out[k] = best
    return out


def span_scores(ll: np.ndarray, firsts, lasts, piece: Piece, reenter_logp: float = _NEG, *,
                state_group=None, groups=None) -> np.ndarray:
    """:func:`piece_score` over several stretches ``firsts[k]..lasts[k]`` in one call.

    With ``state_group`` (one whole number per state of ``piece``) and ``groups`` (one per
    stretch), stretch ``k`` counts only the states of group ``groups[k]``: with no
    re-entry, the best path through one item of that group (the states of the other
    groups start at -inf), the numbers :func:`piece_ends` gives those states.
    """
    firsts = np.asarray(firsts, dtype=np.int64)
    lasts = np.asarray(lasts, dtype=np.int64)
    if state_group is None:
        state_group, groups = _NO_GROUPS, np.full(firsts.shape[0], -1, dtype=np.int64)
    return _spans(np.ascontiguousarray(ll, dtype=np.float64), firsts, lasts, piece.mixture, piece.self_logp,
                  piece.prev_logp, piece.in_first, piece.in_src, piece.in_logp, piece.end_logp, piece.start_state,
                  piece.start_logp, float(reenter_logp), np.asarray(state_group, dtype=np.int64),
                  np.asarray(groups, dtype=np.int64))


def piece_ends(ll: np.ndarray, first: int, last: int, piece: Piece) -> np.ndarray:
    """Per state of ``piece``: the best score of a path through one item that covers frames
    ``first..last`` and leaves the item from that state (-inf where none can).

    With no re-entry the items do not meet, so the best over one item's states is that
    item's own score: one pass scores every item of the piece at once.
    """
    return _ends(ll, first, last, piece, _NEG)


def piece_score(ll: np.ndarray, first: int, last: int, piece: Piece, reenter_logp: float = _NEG) -> float:
    """Best log score of a path through ``piece`` covering frames ``first..last`` exactly.

    Parameters
    ----------
    ll : ndarray, shape (T, P)
        Emission log-likelihoods in the network's mixture columns.
    first, last : int
        Inclusive frame range.
    piece : Piece
    reenter_logp : float
        Added each time a path leaves an item and enters one again; -inf: one item only.
    """
    return float(np.max(_ends(ll, first, last, piece, reenter_logp)))


def _dense(piece: Piece) -> tuple[np.ndarray, np.ndarray]:
    """(log transition matrix (S, S), log entry vector (S,)) of a piece, -inf where none."""
    n = piece.n_states
    trans = np.full((n, n), _NEG)
    trans[np.arange(n), np.arange(n)] = piece.self_logp
    for s in range(n):
        for e in range(piece.arc_first[s], piece.arc_first[s + 1]):
            trans[s, piece.arc_dst[e]] = max(trans[s, piece.arc_dst[e]], piece.arc_logp[e])
    enter = np.full(n, _NEG)
    for s, lp in zip(piece.start_state, piece.start_logp):
        enter[s] = max(enter[s], lp)
    return trans, enter


def piece_ends_reference(ll, first, last, piece: Piece, reenter_logp: float = _NEG) -> np.ndarray:
    """Plain-numpy version of the per-state scores behind :func:`piece_ends` and
    :func:`piece_score`: the recursion over a dense matrix."""
    trans, enter = _dense(piece)
    delta = enter + ll[first, piece.mixture]
    for t in range(first + 1, last + 1):
        moved = np.max(delta[:, None] + trans, axis=0)
        ended = np.max(delta + piece.end_logp)
        moved = np.maximum(moved, ended + reenter_logp + enter)
        delta = moved + ll[t, piece.mixture]
    return delta + piece.end_logp


def piece_score_reference(ll, first, last, piece: Piece, reenter_logp: float = _NEG) -> float:
    """Plain-numpy version of :func:`piece_score`: the same recursion over a dense matrix."""
    return float(np.max(piece_ends_reference(ll, first, last, piece, reenter_logp)))


@numba.njit(cache=True, nogil=True)
def _align(ll, first, last, mixture, self_logp, arc_first, arc_dst, arc_logp, end_logp, start_state, start_logp):
    n = mixture.shape[0]
    frames = last - first + 1
    back = np.full((frames, n), -1, dtype=np.int64)
    cur = _entered(ll, first, mixture, start_state, start_logp)
    nxt = np.full(n, _NEG)
    for t in range(1, frames):
        for s in range(n):
            nxt[s] = _NEG
        for s in range(n):
            sc = cur[s]
            if sc == _NEG:
                continue
            if sc + self_logp[s] > nxt[s]:
                nxt[s] = sc + self_logp[s]
                back[t, s] = s
            for e in range(arc_first[s], arc_first[s + 1]):
                d = arc_dst[e]
                if sc + arc_logp[e] > nxt[d]:
                    nxt[d] = sc + arc_logp[e]
                    back[t, d] = s
        for s in range(n):
            if nxt[s] > _NEG:
                nxt[s] += ll[first + t, mixture[s]]
        cur, nxt = nxt, cur
    path = np.full(frames, -1, dtype=np.int64)
    best, arg = _NEG, -1
    for s in range(n):
        if cur[s] + end_logp[s] > best:
            best, arg = cur[s] + end_logp[s], s
    if arg < 0:
        return path, best
    path[frames - 1] = arg
    for t in range(frames - 1, 0, -1):
        arg = back[t, arg]
        path[t - 1] = arg
    return path, best


def piece_path(ll: np.ndarray, first: int, last: int, piece: Piece) -> tuple[np.ndarray, float]:
    """The best path through one item of ``piece`` over frames ``first..last`` exactly.

    Returns ``(states, score)``: the piece's local state at each frame (shape
    ``(last - first + 1,)``) and the path's log score, as :func:`piece_score` gives it
    with no re-entry; all states -1 and score -inf where no path fits.
    """
    path, score = _align(np.ascontiguousarray(ll, dtype=np.float64), int(first), int(last), piece.mixture,
                         piece.self_logp, piece.arc_first, piece.arc_dst, piece.arc_logp, piece.end_logp,
                         piece.start_state, piece.start_logp)
    return path, float(score)


def piece_path_reference(ll, first, last, piece: Piece) -> tuple[np.ndarray, float]:
    """Plain-numpy version of :func:`piece_path`: dense matrix, back-pointers kept per frame."""
    trans, enter = _dense(piece)
    n = piece.n_states
    delta = enter + ll[first, piece.mixture]
    back = []
    for t in range(first + 1, last + 1):
        cand = delta[:, None] + trans
        arg = np.argmax(cand, axis=0)
        back.append(arg)
        delta = cand[arg, np.arange(n)] + ll[t, piece.mixture]
    final = delta + piece.end_logp
    s = int(np.argmax(final))
    if not np.isfinite(final[s]):
        return np.full(last - first + 1, -1, dtype=np.int64), float(_NEG)
    path = [s]
    for arg in reversed(back):
        s = int(arg[s])
        path.append(s)
    return np.array(path[::-1], dtype=np.int64), float(final.max())
