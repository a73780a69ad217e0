"""The best path through one item over a stretch of frames (the alignment behind the
per-phone confidence measure), against hmmlearn's Viterbi decoding (reference library)."""

from __future__ import annotations

import numpy as np
import pytest

from decoding_helpers import TableHMM, frames_along, gap_mixtures, tiny_model, word_mixtures
from wordspot.decoding.decoder import DecoderSettings, build_recognizer
from wordspot.decoding.network import FIRST_WORD_ITEM
from wordspot.decoding.spans import piece_of, piece_path, piece_path_reference, piece_score

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
