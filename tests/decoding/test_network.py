"""Network compilation: shared mixture_ids, transition rows, grammar links, errors."""

from __future__ import annotations

import numpy as np
import pytest

from decoding_helpers import tiny_model
from wordspot.errors import DecodingError, LexiconError
from wordspot.language.grammar import GrammarSettings, estimate_prior, uniform_prior
from wordspot.language.lexicon import Lexicon
from wordspot.decoding.network import ENTRY_ITEM, EXIT_ITEM, FIRST_WORD_ITEM, compile_network
from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT

ENTRIES = {"bat": [["B", "AA", "T"]], "sack": [["S", "AA", "K"], ["S", "AA"]], "tab": [["T", "AA", "B"]]}
TRANSCRIPTS = [["bat", "sack"], ["sack"], ["tab", "bat", "sack"]]


def _net(model, **grammar):
    return compile_network(model.units, model.mixtures.n_mixtures, model.lexicon,
                           estimate_prior(model.bigrams), GrammarSettings(**grammar))


def test_states_share_unit_mixtures(rng):
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    net = _net(model)
    u = model.units
    model_mixture = net.used_mixtures[net.mixture]
    # Every state of a word refers to its phone's state mixture (no per-word copies):
    # "AA" appears in four pronunciations, all pointing at the same three mixtures.
    aa = set(u.state_mixture[u.index("AA")])
    for p, pron in enumerate(net.prons):
        states = np.flatnonzero(net.item == FIRST_WORD_ITEM + p)
        phones = states[~net.tail[states]]
        expected = [int(u.state_mixture[u.index(x), i]) for x in pron for i in range(3)]
        assert list(model_mixture[phones]) == expected
        # The trailing optional pause uses the shared gap (= middle pause) mixture.
        tail = states[net.tail[states]]
        assert list(model_mixture[tail]) == [int(u.state_mixture[u.index(GAP_UNIT), 0])]
    assert sum(1 for s in model_mixture if s in aa) == 4 * 3
    assert len(net.used_mixtures) == len(set(model_mixture)) <= model.mixtures.n_mixtures


def test_outgoing_probabilities_sum_to_one(rng):
    # Probability axioms: self-loop + arcs + leaving the item = 1 for every state, and
    # the entry probabilities of every pause item sum to one.
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    net = _net(model)
    for s in range(net.n_states):
        out = np.exp(net.self_logp[s]) + np.exp(net.end_logp[s])
        out += np.exp(net.arc_logp[net.arc_first[s]:net.arc_first[s + 1]]).sum()
        assert out == pytest.approx(1.0, abs=1e-12)
    for it in (ENTRY_ITEM, EXIT_ITEM):
        lp = net.start_logp[net.start_first[it]:net.start_first[it + 1]]
        assert np.exp(lp).sum() == pytest.approx(1.0, abs=1e-12)


def test_link_scores_are_weighted_prior_plus_penalty(rng):
    model = tiny_model(rng, ENTRIES, transcripts=TRANSCRIPTS)
    prior = estimate_prior(model.bigrams)
    net = _net(model, weight=2.0, insertion_penalty=-1.5)
    dense = prior.log_matrix()
    for v in range(net.n_words + 1):
        want = 2.0 * dense[v] + np.r_[0.0, np.full(net.n_words, -1.5)]
        np.testing.assert_allclose(net.link_row(v), want, rtol=1e-12)


def test_single_word_and_empty_restrictions(rng):
    model = tiny_model(rng, ENTRIES)
    net = compile_network(model.units, model.mixtures.n_mixtures, model.lexicon, uniform_prior(model.lexicon.words),
                          GrammarSettings(single_word=True), allow_empty=False)
    assert net.link_row(0)[0] == -np.inf and np.all(np.isfinite(net.link_row(0)[1:]))
    for v in range(1, net.n_words + 1):
        row = net.link_row(v)
        assert np.isfinite(row[0]) and np.all(row[1:] == -np.inf)


def test_min_frames(rng):
    model = tiny_model(rng, ENTRIES)
    net = _net(model)
    # Pause: first state, skip to last (2 frames); shortest word "sack" = S AA (6 frames).
    assert net.min_frames == 2 + 6 + 2


def test_unknown_unit_is_named(rng):
    model = tiny_model(rng, ENTRIES)
    lex = Lexicon({"bat": [["B", "AA", "T"]], "zed": [["Z", "EH", "D"]]})
    with pytest.raises(LexiconError, match=r"word 'zed': unit 'Z' is not a phone this model has"):
        compile_network(model.units, model.mixtures.n_mixtures, lex, uniform_prior(lex.words))
    lex = Lexicon({"hush": [[PAUSE_UNIT]]})
    with pytest.raises(LexiconError, match=f"unit '{PAUSE_UNIT}'"):
        compile_network(model.units, model.mixtures.n_mixtures, lex, uniform_prior(lex.words))


def test_prior_must_match_vocabulary(rng):
    model = tiny_model(rng, ENTRIES)
    with pytest.raises(DecodingError, match="other words"):
        compile_network(model.units, model.mixtures.n_mixtures, model.lexicon, uniform_prior(("bat",)))
