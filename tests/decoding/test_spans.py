"""The best path through one item over a stretch of frames (the alignment behind the
per-phone confidence measure), against hmmlearn's Viterbi decoding (reference library)."""

from __future__ import annotations

import numpy as np
import pytest

from decoding_helpers import TableHMM, frames_along, gap_mixtures, tiny_model, word_mixtures
from wordspot.decoding.decoder import DecoderSettings, build_recognizer
from wordspot.decoding.network import FIRST_WORD_ITEM
from wordspot.decoding.spans import piece_ends, piece_of, piece_path, piece_path_reference, piece_score

ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"]]}


@pytest.fixture
def rng():
    return np.random.default_rng(11)


def _sack(rng, frames_per_state=3, gap=2):
    model = tiny_model(rng, ENTRIES)
    rec = build_recognizer(model, settings=DecoderSettings())
    net = rec.network
    frames = frames_along(model, word_mixtures(model, ["S", "AA", "K"], frames_per_state)
                          + gap_mixtures(model, gap), rng)
    ll = np.asarray(rec.emissions(frames), dtype=np.float64)
    sack = net.words.index("sack") + 1
    item = int(net.word_pron[net.word_first[sack]]) + FIRST_WORD_ITEM
    return rec, ll, piece_of(net, [item]), item


def test_path_matches_hmmlearn_viterbi(rng):
    # hmmlearn's Viterbi (reference library) on the item's dense chain; it lets a path end
    # in any state, so the item's log end probabilities are added to the last frame's row.
    rec, ll, piece, _ = _sack(rng)
    n = piece.n_states
    table = ll[:, piece.mixture].copy()
    table[-1] += piece.end_logp
    trans = np.zeros((n, n))
    trans[np.arange(n), np.arange(n)] = np.exp(piece.self_logp)
    for s in range(n):
        for e in range(piece.arc_first[s], piece.arc_first[s + 1]):
            trans[s, piece.arc_dst[e]] += np.exp(piece.arc_logp[e])
    start = np.zeros(n)
    start[piece.start_state] = np.exp(piece.start_logp)
    ref = TableHMM(table, implementation="log")
    ref.startprob_, ref.transmat_ = start, trans
    with np.errstate(divide="ignore"):
        want_score, want_states = ref.decode(np.arange(ll.shape[0])[:, None], algorithm="viterbi")
    states, score = piece_path(ll, 0, ll.shape[0] - 1, piece)
    np.testing.assert_array_equal(states, want_states)
    assert score == pytest.approx(want_score, abs=1e-6)
    # the same best score as the span scores of the confidence measures, and the same
    # path as the plain reference
    assert score == pytest.approx(piece_score(ll, 0, ll.shape[0] - 1, piece), abs=1e-9)
    ref_states, ref_score = piece_path_reference(ll, 0, ll.shape[0] - 1, piece)
    np.testing.assert_array_equal(states, ref_states)
    assert ref_score == pytest.approx(score, abs=1e-9)


def test_path_follows_the_frames_known_by_construction(rng):
    # Frames drawn along S, AA, K (4 frames per state) and 3 gap frames: the alignment puts
    # 12 frames on each phone, in order, and the rest on the word's trailing pause.
    rec, ll, piece, item = _sack(rng, frames_per_state=4, gap=3)
    states, _ = piece_path(ll, 0, ll.shape[0] - 1, piece)
    phone = rec.network.phone[rec.network.item == item]
    np.testing.assert_array_equal(phone[states], [0] * 12 + [1] * 12 + [2] * 12 + [-1] * 3)


def test_no_path_gives_minus_infinity(rng):
    # Two frames cannot hold three phones of three states each.
    _, ll, piece, _ = _sack(rng)
    states, score = piece_path(ll, 0, 1, piece)
    assert score == -np.inf and np.all(states == -1)
    assert piece_path_reference(ll, 0, 1, piece)[1] == -np.inf


def _random_piece(rng, n=12, n_mixtures=5):
    """A piece with every kind of arc the compiled score sorts: to the next state (some
    doubled), skips forward, arcs back, none at all; several entries, some states without
    an end."""
    from wordspot.decoding.spans import Piece

    arcs = []
    for s in range(n):
        for d in sorted(set(rng.choice(n, size=int(rng.integers(0, 3)))) | ({s + 1} if s + 1 < n else set())):
            if d != s:
                arcs.append((s, int(d), float(np.log(rng.uniform(0.05, 0.9)))))
        if s + 1 < n and rng.random() < 0.2:  # a second arc to the next state
            arcs.append((s, s + 1, float(np.log(rng.uniform(0.05, 0.9)))))
    first = np.searchsorted([a[0] for a in arcs], np.arange(n + 1)).astype(np.int64)
    ends = np.where(rng.random(n) < 0.4, np.log(rng.uniform(0.1, 0.9, n)), -np.inf)
    ends[-1] = np.log(0.5)
    starts = np.array([0, 0, 3, n // 2], dtype=np.int64)
    return Piece(mixture=rng.integers(0, n_mixtures, n).astype(np.int64), self_logp=np.log(rng.uniform(0.1, 0.9, n)),
                 arc_first=first, arc_dst=np.array([a[1] for a in arcs], dtype=np.int64),
                 arc_logp=np.array([a[2] for a in arcs]), end_logp=ends, start_state=starts,
                 start_logp=np.log(rng.uniform(0.1, 1.0, starts.size)))


@pytest.mark.parametrize("seed", range(6))
def test_compiled_ends_are_the_dense_recursions_numbers(seed):
    # The compiled score (each state pulling its best predecessor) against the plain
    # dense recursion: the same maxima of the same sums, so equal to the last bit, with
    # impossible emissions (-inf) in places and with and without re-entry.
    from wordspot.decoding.spans import piece_ends_reference

    rng = np.random.default_rng(seed)
    piece = _random_piece(rng)
    ll = rng.normal(-5.0, 3.0, size=(30, 5))
    ll[rng.random(ll.shape) < 0.05] = -np.inf
    for first, last in ((0, 29), (4, 4), (3, 17)):
        for reenter in (-np.inf, 0.0, -2.5):
            want = piece_ends_reference(ll, first, last, piece, reenter)
            if reenter == -np.inf:
                np.testing.assert_array_equal(piece_ends(ll, first, last, piece), want)
            got = piece_score(ll, first, last, piece, reenter)
            assert got == float(np.max(want))


def test_phone_margin_is_the_per_phone_computation(rng):
    # Recognizer.phone_margin scores all of a word's phones in two compiled calls
    # (span_scores); the plain computation phone by phone, each phone's own score the best
    # of its unit's states in the whole filler scored without re-entry, gives the same
    # numbers to the last bit.
    from wordspot.decoding.decoder import _background_items

    model = tiny_model(rng, ENTRIES)
    rec = build_recognizer(model, settings=DecoderSettings())
    frames = frames_along(model, word_mixtures(model, ["B", "AA", "T"], 3) + gap_mixtures(model, 2)
                          + word_mixtures(model, ["S", "AA", "K"], 4), rng)
    ll = np.asarray(rec.emissions(frames), dtype=np.float64)
    filler = rec.pieces()[0]
    net = rec.network
    items = _background_items(net)
    state_names = np.array([net.prons[int(i) - FIRST_WORD_ITEM][0] for i in net.item[np.isin(net.item, items)]])
    assert state_names.size == filler.n_states
    checked = 0
    for word in ("bat", "sack"):
        pron = int(net.word_pron[net.word_first[net.words.index(word) + 1]])
        for first, last in ((0, 10), (11, 23), (2, 20)):
            _, _, phones, score = rec.word_path(ll, pron, first, last)
            margins = []
            for k, name in enumerate(net.prons[pron]):
                at = np.flatnonzero(phones == k)
                if np.isfinite(score) and at.size:
                    a, b = first + int(at[0]), first + int(at[-1])
                    own = piece_ends(ll, a, b, filler)[state_names == name].max()
                    margins.append((own - piece_score(ll, a, b, filler, 0.0)) / (b - a + 1))
            got = rec.phone_margin(ll, pron, first, last)
            if margins:
                assert got == float(np.mean(margins))
                checked += 1
            else:
                assert np.isnan(got)
    assert checked >= 3


def test_span_scores_are_piece_scores(rng):
    from wordspot.decoding.spans import span_scores

    piece = _random_piece(rng)
    ll = rng.normal(-5.0, 3.0, size=(30, 5))
    firsts, lasts = np.array([0, 4, 3, 10]), np.array([29, 4, 17, 12])
    for reenter in (-np.inf, 0.0, -2.5):
        want = [piece_score(ll, a, b, piece, reenter) for a, b in zip(firsts, lasts)]
        assert span_scores(ll, firsts, lasts, piece, reenter).tolist() == want
