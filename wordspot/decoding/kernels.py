"""Token passing over a compiled network: the compiled loop and its readable reference.

Both functions take the same arguments (the arrays of a
:class:`~wordspot.decoding.network.Network` and a (T, P) matrix of emission log-likelihoods) and
return the same tuple; tests check that they agree.

One frame of token passing:

1. every surviving token moves along its state's self-loop and arcs (one frame each);
   tokens that entered an item through the grammar at the end of the previous frame
   are already waiting in their entry states; each state keeps only its best token;
2. the frame's emission log-likelihood is added;
3. pruning: a state survives if its score is within ``beam`` of the frame's best and,
   when more than ``state_limit`` states are alive, at least the ``state_limit``-th best
   score (ties keep more). The compiled loop drops waiting entries that fall below a
   lower bound of that cut before placing them (same result, less work for large
   vocabularies);
4. word ends: a token in a state that can leave its item ends that item; within
   ``word_end_beam`` of the frame's best, the best end of each word (or of the entry
   pause, "word" 0) becomes a *word link* (word, pronunciation, start frame, phone end
   frame, end frame, score, previous link);
5. grammar: for every next word ``w`` (0 = the exit pause) the best of
   ``link score + link_row(v)[w]`` over the word ends ``v`` of this frame enters ``w``'s
   entry states for the next frame (only if within ``beam`` of this frame's best).

A token carries its score, the link it came from, the frame its item began and the
frame its phones ended (when it has moved on into a word's trailing pause). Memory is
O(states + word links), never O(frames x states).

Returned tuple: ``(status, final_score, final_link, links_int, links_score, n_links)``
with ``links_int[k] = (word, pron, start, phone_end, end, previous)`` and
``status`` one of :data:`OK`, :data:`NO_TOKENS` (every token pruned or impossible),
:data:`NO_EXIT` (no token was in the exit pause able to leave at the last frame).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = [
    "decode",
    "decode_reference",
    "mixture_logsumexp",
    "mixture_logsumexp_by_component",
    "mixture_logsumexp_reference",
    "OK",
    "NO_TOKENS",
    "NO_EXIT",
    "LINK_FIELDS",
]

OK = 0
NO_TOKENS = 1
NO_EXIT = 2

LINK_FIELDS = ("word", "pron", "start", "phone_end", "end", "previous")

_ENTRY, _EXIT, _FIRST = 0, 1, 2
# Columns of a token's integers (kept together, one cache line per state): the link it
# came from, the frame its item began, the frame its phones ended (-1: not yet).
_LINK, _START, _PEND = 0, 1, 2
_NEG = -np.inf


# exp in single precision for the mixture sums: x = k ln2 + r with |r| <= ln2 / 2
# (Cody & Waite 1980 range reduction, ln2 split in a high part exact in float32 and a
# low part), exp(r) by its Taylor series to r^7 (remainder below 0.347^8 / 8! = 5.3e-9,
# under float32's unit roundoff 6e-8), times 2^k built from the exponent bits (IEEE 754
# single: bias 127, 23 fraction bits). Written as a plain loop over a flat array so the
# compiler vectorises it (8 lanes with AVX2); numba's own exp is one call per value.
_F32 = np.float32
_LOG2E = _F32(1.4426950408889634)
_LN2_HI = _F32(0.693359375)
_LN2_LO = _F32(-2.12194440e-4)
_EXP_LOW = _F32(-87.0)  # exp(-87) ~ 1.6e-38, the smallest normal float32 is 1.2e-38
_HALF, _ONE = _F32(0.5), _F32(1.0)
_T2, _T3, _T4, _T5, _T6, _T7 = (_F32(1.0 / f) for f in (2, 6, 24, 120, 720, 5040))
# fast-math flags that allow reordering and fused multiply-add, but keep inf and NaN
# semantics (a mixture with no live component is -inf, not undefined).
_FAST = {"contract", "reassoc", "arcp", "nsz", "afn"}
_BLOCK = 512  # mixtures per block: the block's work arrays stay in the L1/L2 cache


@numba.njit(cache=True, nogil=True, fastmath=_FAST)
def _exp_nonpositive(x, out, bits):
    """out[j] = exp(x[j]) for x[j] <= 0 in float32 (values below -87 give ~0)."""
    for j in range(x.shape[0]):
        v = max(x[j], _EXP_LOW)
        k = np.floor(v * _LOG2E + _HALF)
        r = (v - k * _LN2_HI) - k * _LN2_LO
        out[j] = _ONE + r * (_ONE + r * (_T2 + r * (_T3 + r * (_T4 + r * (_T5 + r * (_T6 + r * _T7))))))
        bits[j] = (np.int32(k) + 127) << 23
    scale = bits.view(np.float32)
    for j in range(x.shape[0]):
        out[j] *= scale[j]


@numba.njit(cache=True, nogil=True)
def mixture_logsumexp(comp):
    """Log-sum-exp over the last axis of (T, P, M) component scores, shape (T, P), float64.

    The maximum is taken and added back in the input's precision; the terms
    ``exp(score - max)`` are summed in single precision (:func:`_exp_nonpositive`), so
    the result is within about 1e-6 of the exact value (float32 roundoff of a sum of at
    most M terms in [0, 1], one of them exactly 1).
    """
    n_frames, n_mixtures, n_comp = comp.shape
    rows = n_frames * n_mixtures
    flat = comp.reshape(rows, n_comp)
    out = np.empty(rows)
    x = np.empty(_BLOCK * n_comp, dtype=np.float32)
    e = np.empty(_BLOCK * n_comp, dtype=np.float32)
    bits = np.empty(_BLOCK * n_comp, dtype=np.int32)
    top = np.empty(_BLOCK, dtype=flat.dtype)
    for b0 in range(0, rows, _BLOCK):
        nb = min(_BLOCK, rows - b0)
        for i in range(nb):
            t = flat[b0 + i, 0]
            for m in range(1, n_comp):
                if flat[b0 + i, m] > t:
                    t = flat[b0 + i, m]
            top[i] = t
            for m in range(n_comp):
                # -inf - t is -inf (clamped to ~0 below); a row whose top is -inf is
                # skipped after the sum
                x[i * n_comp + m] = flat[b0 + i, m] - t if t > -np.inf else _EXP_LOW
        _exp_nonpositive(x[: nb * n_comp], e, bits)
        for i in range(nb):
            if top[i] == -np.inf:
                out[b0 + i] = _NEG
                continue
            acc = 0.0
            for m in range(n_comp):
                acc += e[i * n_comp + m]
            out[b0 + i] = top[i] + np.log(acc)
    return out.reshape(n_frames, n_mixtures)


@numba.njit(cache=True, nogil=True)
def mixture_logsumexp_by_component(comp):
    """:func:`mixture_logsumexp` of ``comp.transpose(0, 2, 1)``: component scores laid out
    (T, M, P), component-major, result (T, P) float64.

    The same numbers to the last bit (each mixture's maximum, the same ``exp`` of the same
    differences, summed over the components in the same order), computed for all P
    mixtures of a frame side by side, so every step runs along contiguous memory and
    vectorises: the maximum and the sums too, not only the exponentials.
    """
    n_frames, n_comp, n_mixtures = comp.shape
    out = np.empty((n_frames, n_mixtures))
    x = np.empty(n_comp * n_mixtures, dtype=np.float32)
    e = np.empty(n_comp * n_mixtures, dtype=np.float32)
    bits = np.empty(n_comp * n_mixtures, dtype=np.int32)
    top = np.empty(n_mixtures, dtype=comp.dtype)
    acc = np.empty(n_mixtures)
    for t in range(n_frames):
        for p in range(n_mixtures):
            top[p] = comp[t, 0, p]
        for m in range(1, n_comp):
            for p in range(n_mixtures):
                v = comp[t, m, p]
                top[p] = v if v > top[p] else top[p]
        for m in range(n_comp):
            for p in range(n_mixtures):
                # -inf - t is -inf (clamped to ~0 below); a mixture whose top is -inf is
                # set after the sum
                x[m * n_mixtures + p] = comp[t, m, p] - top[p] if top[p] > -np.inf else _EXP_LOW
        _exp_nonpositive(x, e, bits)
        for p in range(n_mixtures):
            acc[p] = 0.0
        for m in range(n_comp):
            for p in range(n_mixtures):
                acc[p] += e[m * n_mixtures + p]
        for p in range(n_mixtures):
            out[t, p] = top[p] + np.log(acc[p]) if top[p] > -np.inf else _NEG
    return out


def mixture_logsumexp_reference(comp):
    """Plain version of :func:`mixture_logsumexp` (scipy)."""
    from scipy.special import logsumexp

    return logsumexp(comp, axis=2)


@numba.njit(cache=True, nogil=True)
def _grow(links_int, links_score, n):
    if n < links_int.shape[0]:
        return links_int, links_score
    bigger_i = np.empty((2 * links_int.shape[0], 6), dtype=np.int64)
    bigger_s = np.empty(2 * links_int.shape[0], dtype=np.float64)
    bigger_i[:n] = links_int[:n]
    bigger_s[:n] = links_score[:n]
    return bigger_i, bigger_s


@numba.njit(cache=True, nogil=True)
def _link_logp(v, w, unigram, backoff, pair_first, pair_next, pair_logp, single_word, allow_empty):
    """Score of the grammar link v -> w (listed pair, else back-off), restrictions applied."""
    if v == 0 and w == 0 and not allow_empty:
        return _NEG
    if v > 0 and w > 0 and single_word:
        return _NEG
    # binary search of w among v's listed next words (sorted), without making a view
    lo, hi = pair_first[v], pair_first[v + 1]
    while lo < hi:
        mid = (lo + hi) // 2
        if pair_next[mid] < w:
            lo = mid + 1
        else:
            hi = mid
    if lo < pair_first[v + 1] and pair_next[lo] == w:
        return pair_logp[lo]
    return backoff[v] + unigram[w]


@numba.njit(cache=True, nogil=True)
def _best_link(w, ended, n_ended, end_score, end_link, unigram, backoff, pair_first, pair_next,
               pair_logp, single_word, allow_empty):
    """Best entry score of next word ``w`` over this frame's word ends, and its link."""
    best = _NEG
    link = -1
    for j in range(n_ended):
        v = ended[j]
        cand = end_score[v] + _link_logp(v, w, unigram, backoff, pair_first, pair_next, pair_logp,
                                         single_word, allow_empty)
        if cand > best:
            best = cand
            link = end_link[v]
    return best, link


@numba.njit(cache=True, nogil=True)
def _prune_threshold(score, act, n_act, scratch, best, beam, state_limit):
    """Lowest score that survives: ``best - beam``, raised to the ``state_limit``-th best of
    the ``n_act`` active states' scores when there are more of them."""
    thr = best - beam
    if n_act > state_limit:
        for i in range(n_act):
            scratch[i] = score[act[i]]
        kth = np.partition(scratch[:n_act], n_act - state_limit)[n_act - state_limit]
        if kth > thr:
            thr = kth
    return thr


# Steps of one frame, each a compiled function that numba inlines into `decode`
# (``inline="always"``: one loop body for the compiler, as if written in one piece). The
# same results as the loop written in one piece, at the same speed (within 1% on the demo
# test files; see tests/benchmarks/bench_kernel_change.py).
_STEP = dict(cache=True, nogil=True, inline="always")


@numba.njit(**_STEP)
def _step_move(t, cur, cur_meta, cur_act, n_cur, nxt, nxt_meta, nxt_act, n_nxt,
               self_logp, arc_first, arc_dst, arc_logp, tail):
    """Step 1: every token of frame t-1 along its self-loop and arcs; returns ``n_nxt``.

    The two moves are written out alike on purpose: one shared helper that took the
    phone-end frame as an argument (read before knowing whether the move wins) made the
    kernel 2.4 times slower.
    """
    for i in range(n_cur):
        s = cur_act[i]
        sc = cur[s]
        if self_logp[s] > _NEG:
            cand = sc + self_logp[s]
            if cand > nxt[s]:
                if nxt[s] == _NEG:
                    nxt_act[n_nxt] = s
                    n_nxt += 1
                nxt[s] = cand
                nxt_meta[s, _LINK] = cur_meta[s, _LINK]
                nxt_meta[s, _START] = cur_meta[s, _START]
                nxt_meta[s, _PEND] = cur_meta[s, _PEND]
        for e in range(arc_first[s], arc_first[s + 1]):
            d = arc_dst[e]
            cand = sc + arc_logp[e]
            if cand > nxt[d]:
                if nxt[d] == _NEG:
                    nxt_act[n_nxt] = d
                    n_nxt += 1
                nxt[d] = cand
                nxt_meta[d, _LINK] = cur_meta[s, _LINK]
                nxt_meta[d, _START] = cur_meta[s, _START]
                if tail[d] and not tail[s]:
                    nxt_meta[d, _PEND] = t - 1
                else:
                    nxt_meta[d, _PEND] = cur_meta[s, _PEND]
    return n_nxt


@numba.njit(**_STEP)
def _step_emit(ll, t, mixture, nxt, nxt_act, n_nxt, pend_state, pend_score, n_pend):
    """Step 2: frame t's emission scores onto moved tokens and waiting entries; returns the best."""
    best = _NEG
    for i in range(n_nxt):
        s = nxt_act[i]
        nxt[s] += ll[t, mixture[s]]
        if nxt[s] > best:
            best = nxt[s]
    for i in range(n_pend):
        pend_score[i] += ll[t, mixture[pend_state[i]]]
        if pend_score[i] > best:
            best = pend_score[i]
    return best


@numba.njit(**_STEP)
def _step_prune(t, nxt, nxt_meta, nxt_act, n_nxt, pend_state, pend_score, pend_link, n_pend,
                scratch, best, beam, state_limit):
    """Step 3: place the waiting entries that can survive, then prune; returns ``(n_nxt, thr)``.

    Entries below the beam, or below the state_limit-th best of the moved tokens alone (a
    lower bound of the final cut), could not survive: they are dropped before they are
    ever placed.
    """
    thr = _prune_threshold(nxt, nxt_act, n_nxt, scratch, best, beam, state_limit)
    for i in range(n_pend):
        s = pend_state[i]
        cand = pend_score[i]
        if cand >= thr and cand > nxt[s]:
            if nxt[s] == _NEG:
                nxt_act[n_nxt] = s
                n_nxt += 1
            nxt[s] = cand
            nxt_meta[s, _LINK] = pend_link[i]
            nxt_meta[s, _START] = t
            nxt_meta[s, _PEND] = -1
    thr = _prune_threshold(nxt, nxt_act, n_nxt, scratch, best, beam, state_limit)
    kept = 0
    for i in range(n_nxt):
        s = nxt_act[i]
        if nxt[s] >= thr:
            nxt_act[kept] = s
            kept += 1
        else:
            nxt[s] = _NEG
    return kept, thr


@numba.njit(**_STEP)
def _step_word_ends(cur, cur_act, n_cur, end_logp, item, pron_word, end_thr, end_score, end_state, ended):
    """Step 4: the best end of each word (0: the entry pause) within the word-end beam;
    returns how many words ended (listed in ``ended``)."""
    n_ended = 0
    for i in range(n_cur):
        s = cur_act[i]
        if end_logp[s] == _NEG:
            continue
        it = item[s]
        if it == _EXIT:
            continue
        sc = cur[s] + end_logp[s]
        if sc < end_thr:
            continue
        w = 0 if it == _ENTRY else pron_word[it - _FIRST]
        if end_score[w] == _NEG:
            ended[n_ended] = w
            n_ended += 1
        if sc > end_score[w]:
            end_score[w] = sc
            end_state[w] = s
    return n_ended


@numba.njit(**_STEP)
def _step_final(cur, cur_meta, cur_act, n_cur, item, end_logp):
    """After the last frame: the best token able to leave the exit pause, and its link."""
    final = _NEG
    final_link = -1
    for i in range(n_cur):
        s = cur_act[i]
        if item[s] == _EXIT and end_logp[s] > _NEG:
            sc = cur[s] + end_logp[s]
            if sc > final:
                final = sc
                final_link = cur_meta[s, _LINK]
    return final, final_link


@numba.njit(cache=True, nogil=True)
def decode(ll, mixture, self_logp, arc_first, arc_dst, arc_logp, end_logp, tail, item,
           start_first, start_state, start_logp, pron_word, word_first, word_pron,
           unigram, backoff, pair_first, pair_next, pair_logp, single_word, allow_empty,
           beam, word_end_beam, state_limit):
    """Compiled token passing over active states only (see the module docstring)."""
    n_frames = ll.shape[0]
    n_states = mixture.shape[0]
    n_words = unigram.shape[0]  # V + 1 including the boundary

    cur = np.full(n_states, _NEG)
    cur_meta = np.zeros((n_states, 3), dtype=np.int64)  # _LINK, _START, _PEND per state
    cur_act = np.empty(n_states, dtype=np.int64)
    n_cur = 0
    nxt = np.full(n_states, _NEG)
    nxt_meta = np.zeros((n_states, 3), dtype=np.int64)
    nxt_act = np.empty(n_states, dtype=np.int64)
    n_nxt = 0

    links_int = np.empty((64, 6), dtype=np.int64)
    links_score = np.empty(64, dtype=np.float64)
    n_links = 0

    end_score = np.full(n_words, _NEG)
    end_state = np.zeros(n_words, dtype=np.int64)
    ended = np.empty(n_words, dtype=np.int64)
    end_link = np.zeros(n_words, dtype=np.int64)
    enter = np.full(n_words, _NEG)
    enter_from = np.zeros(n_words, dtype=np.int64)
    row_logp = np.empty(n_words)
    row_stamp = np.full(n_words, -1, dtype=np.int64)  # row_logp[w] holds v's pair iff == stamp
    stamp = -1
    scratch = np.empty(n_states)

    # Entries waiting for the next frame (state, score before emission, link, start).
    n_starts = start_state.shape[0]
    pend_state = np.empty(n_starts, dtype=np.int64)
    pend_score = np.empty(n_starts)
    pend_link = np.empty(n_starts, dtype=np.int64)
    n_pend = 0
    # Frame 0: the entry pause begins.
    for k in range(start_first[_ENTRY], start_first[_ENTRY + 1]):
        pend_state[n_pend] = start_state[k]
        pend_score[n_pend] = start_logp[k]
        pend_link[n_pend] = -1
        n_pend += 1

    for t in range(n_frames):
        if t > 0:
            n_nxt = _step_move(t, cur, cur_meta, cur_act, n_cur, nxt, nxt_meta, nxt_act, n_nxt,
                               self_logp, arc_first, arc_dst, arc_logp, tail)
        best = _step_emit(ll, t, mixture, nxt, nxt_act, n_nxt, pend_state, pend_score, n_pend)
        if best == _NEG:
            return NO_TOKENS, _NEG, -1, links_int[:n_links], links_score[:n_links], n_links
        n_nxt, thr = _step_prune(t, nxt, nxt_meta, nxt_act, n_nxt, pend_state, pend_score, pend_link, n_pend,
                                 scratch, best, beam, state_limit)
        n_pend = 0
        # swap: frame t becomes current; clear what frame t-1 left behind.
        for i in range(n_cur):
            cur[cur_act[i]] = _NEG
        cur, nxt = nxt, cur
        cur_meta, nxt_meta = nxt_meta, cur_meta
        cur_act, nxt_act = nxt_act, cur_act
        n_cur = n_nxt
        n_nxt = 0
        if t == n_frames - 1:
            break
        n_ended = _step_word_ends(cur, cur_act, n_cur, end_logp, item, pron_word, best - word_end_beam,
                                  end_score, end_state, ended)
        if n_ended == 0:
            continue
        # 4b and 5 stay written out here: as inlined steps of their own (links, grammar,
        # entries) they made the kernel 2% slower on the demo test files.
        # 4b. one word link per word end.
        for j in range(n_ended):
            w = ended[j]
            s = end_state[w]
            links_int, links_score = _grow(links_int, links_score, n_links)
            links_int[n_links, 0] = w
            links_int[n_links, 1] = item[s] - _FIRST
            links_int[n_links, 2] = cur_meta[s, _START]
            links_int[n_links, 3] = cur_meta[s, _PEND] if cur_meta[s, _PEND] >= 0 else t
            links_int[n_links, 4] = t
            links_int[n_links, 5] = cur_meta[s, _LINK]
            links_score[n_links] = end_score[w]
            end_link[w] = n_links
            n_links += 1
        # 5. grammar links into the entries of frame t+1. Unlisted pairs share one
        # back-off term, so the best source for them is the same for every next word:
        # O(V + listed pairs) per frame instead of O(ended x V).
        top = _NEG
        top_v = -1
        for j in range(n_ended):
            v = ended[j]
            if v > 0 and single_word:
                continue
            if end_score[v] + backoff[v] > top:
                top = end_score[v] + backoff[v]
                top_v = v
        for w in range(1, n_words):
            enter[w] = top + unigram[w]
            enter_from[w] = end_link[top_v] if top_v >= 0 else -1
        for j in range(n_ended):
            v = ended[j]
            if v > 0 and single_word:
                continue
            for k in range(pair_first[v], pair_first[v + 1]):
                w = pair_next[k]
                cand = end_score[v] + pair_logp[k]
                if w > 0 and cand > enter[w]:
                    enter[w] = cand
                    enter_from[w] = end_link[v]
        if top_v >= 0:
            # Listed pairs of the best back-off source: its back-off term does not apply, so
            # these next words take the best over every word end afresh (what _best_link
            # computes, the same sums in the same order, with v's listed pairs looked up in
            # a stamped row instead of searched once per pair).
            lo, hi = pair_first[top_v], pair_first[top_v + 1]
            for k in range(lo, hi):
                w = pair_next[k]
                if w > 0:
                    enter[w] = _NEG
                    enter_from[w] = -1
            for j in range(n_ended):
                v = ended[j]
                if v > 0 and single_word:
                    continue  # every link v -> w > 0 is -inf: never better
                stamp += 1
                for q in range(pair_first[v], pair_first[v + 1]):
                    row_logp[pair_next[q]] = pair_logp[q]
                    row_stamp[pair_next[q]] = stamp
                for k in range(lo, hi):
                    w = pair_next[k]
                    if w == 0:
                        continue
                    if row_stamp[w] == stamp:
                        cand = end_score[v] + row_logp[w]
                    else:
                        cand = end_score[v] + (backoff[v] + unigram[w])
                    if cand > enter[w]:
                        enter[w] = cand
                        enter_from[w] = end_link[v]
        enter[0], enter_from[0] = _best_link(0, ended, n_ended, end_score, end_link, unigram, backoff,
                                             pair_first, pair_next, pair_logp, single_word, allow_empty)
        for j in range(n_ended):
            end_score[ended[j]] = _NEG
        for w in range(n_words):
            if enter[w] == _NEG or enter[w] < thr:
                continue
            if w == 0:
                lo, hi = _EXIT, _EXIT + 1
            else:
                lo, hi = word_pron[word_first[w]] + _FIRST, word_pron[word_first[w + 1] - 1] + _FIRST + 1
            for it in range(lo, hi):
                for k in range(start_first[it], start_first[it + 1]):
                    pend_state[n_pend] = start_state[k]
                    pend_score[n_pend] = enter[w] + start_logp[k]
                    pend_link[n_pend] = enter_from[w]
                    n_pend += 1

    final, final_link = _step_final(cur, cur_meta, cur_act, n_cur, item, end_logp)
    status = OK if final > _NEG else NO_EXIT
    return status, final, final_link, links_int[:n_links], links_score[:n_links], n_links


def decode_reference(ll, mixture, self_logp, arc_first, arc_dst, arc_logp, end_logp, tail, item,
                     start_first, start_state, start_logp, pron_word, word_first, word_pron,
                     unigram, backoff, pair_first, pair_next, pair_logp, single_word, allow_empty,
                     beam, word_end_beam, state_limit):
    """Readable token passing over *every* state each frame (plain numpy and Python).

    Same arguments, same pruning rules and same result as :func:`decode`; meant for tests
    on small networks.
    """
    n_frames, n_states = ll.shape[0], mixture.shape[0]
    n_words = unigram.shape[0]
    # Predecessors of every state: (source, log prob) for self-loops and arcs.
    preds = [[] for _ in range(n_states)]
    for s in range(n_states):
        if np.isfinite(self_logp[s]):
            preds[s].append((s, self_logp[s]))
        for e in range(arc_first[s], arc_first[s + 1]):
            preds[arc_dst[e]].append((s, arc_logp[e]))
    items = [(int(start_first[i]), int(start_first[i + 1])) for i in range(len(start_first) - 1)]

    # token = (score, link, start frame, phone-end frame) per state; None = no token.
    entries = [None] * n_states
    for k in range(*items[_ENTRY]):
        entries[start_state[k]] = (start_logp[k], -1, 0, -1)
    tokens = [None] * n_states
    links: list[tuple[int, int, int, int, int, int]] = []
    scores: list[float] = []

    for t in range(n_frames):
        new = list(entries)
        if t > 0:
            for d in range(n_states):
                for s, lp in preds[d]:
                    if tokens[s] is None:
                        continue
                    sc, ln, st, pe = tokens[s]
                    if tail[d] and not tail[s]:
                        pe = t - 1
                    if new[d] is None or sc + lp > new[d][0]:
                        new[d] = (sc + lp, ln, st, pe)
        new = [None if tok is None else (tok[0] + ll[t, mixture[s]],) + tok[1:] for s, tok in enumerate(new)]
        alive = np.array([tok[0] for tok in new if tok is not None])
        if alive.size == 0 or not np.isfinite(alive.max()):
            return NO_TOKENS, _NEG, -1, _as_links(links), np.array(scores), len(links)
        best = alive.max()
        thr = best - beam
        if alive.size > state_limit:
            thr = max(thr, np.sort(alive)[::-1][state_limit - 1])
        tokens = [tok if tok is not None and tok[0] > _NEG and tok[0] >= thr else None for tok in new]
        if t == n_frames - 1:
            break
        # word ends
        best_end: dict[int, tuple[float, int]] = {}
        for s, tok in enumerate(tokens):
            if tok is None or not np.isfinite(end_logp[s]) or item[s] == _EXIT:
                continue
            sc = tok[0] + end_logp[s]
            if sc < best - word_end_beam:
                continue
            w = 0 if item[s] == _ENTRY else int(pron_word[item[s] - _FIRST])
            if w not in best_end or sc > best_end[w][0]:
                best_end[w] = (sc, s)
        entries = [None] * n_states
        enter = np.full(n_words, _NEG)
        enter_from = np.zeros(n_words, dtype=np.int64)
        for v in best_end:
            sc, s = best_end[v]
            _, ln, st, pe = tokens[s]
            links.append((v, int(item[s]) - _FIRST, st, pe if pe >= 0 else t, t, ln))
            scores.append(sc)
            row = backoff[v] + unigram
            row[pair_next[pair_first[v]:pair_first[v + 1]]] = pair_logp[pair_first[v]:pair_first[v + 1]]
            if v == 0 and not allow_empty:
                row[0] = _NEG
            if v > 0 and single_word:
                row[1:] = _NEG
            better = sc + row > enter
            enter[better] = sc + row[better]
            enter_from[better] = len(links) - 1
        for w in range(n_words):
            if enter[w] == _NEG or enter[w] < thr:
                continue
            its = [_EXIT] if w == 0 else [int(p) + _FIRST for p in word_pron[word_first[w]:word_first[w + 1]]]
            for it in its:
                for k in range(*items[it]):
                    s = start_state[k]
                    cand = enter[w] + start_logp[k]
                    if entries[s] is None or cand > entries[s][0]:
                        entries[s] = (cand, int(enter_from[w]), t + 1, -1)

    finals = [(tok[0] + end_logp[s], tok[1]) for s, tok in enumerate(tokens)
              if tok is not None and item[s] == _EXIT and np.isfinite(end_logp[s])]
    if not finals:
        return NO_EXIT, _NEG, -1, _as_links(links), np.array(scores), len(links)
    final, link = max(finals, key=lambda f: f[0])
    return OK, final, link, _as_links(links), np.array(scores), len(links)


def _as_links(links) -> np.ndarray:
    return np.array(links, dtype=np.int64).reshape(-1, 6)
