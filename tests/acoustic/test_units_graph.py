"""Unit topology and state-graph composition.

Checks: every transition row is a probability distribution (a fact of the trade: an HMM's
transition matrix is row-stochastic); composing a plain chain reproduces the product of
the units' transition probabilities; the forward probability of a composed chain equals
hmmlearn's (reference library) on the same model; parameter ids point back to the right
probabilities.
"""

import itertools

import numpy as np
import pytest
from scipy.special import logsumexp

from decoding_helpers import TableHMM
from wordspot.acoustic.graph import compose
from wordspot.acoustic.units import (
    EXIT,
    GAP_UNIT,
    PAUSE_UNIT,
    default_unit_set,
    entry_param_id,
    n_transition_params,
    trans_param_id,
)
from wordspot.errors import ModelFileError


@pytest.fixture
def units():
    return default_unit_set(["K", "AH", "T", "S"])


def _dense(graph):
    """Dense (S, S) transition matrix of a graph, plus start and end vectors."""
    s = graph.n_states
    a = np.zeros((s, s))
    a[np.arange(s), np.arange(s)] = np.exp(graph.self_logp)
    np.add.at(a, (graph.arc_src, graph.arc_dst), np.exp(graph.arc_logp))
    return a, np.exp(graph.init_logp), np.exp(graph.final_logp)


def test_default_rows_sum_to_one(units):
    # Row-stochastic transitions (fact of the trade).
    units.validate()
    for u in range(units.n_units):
        n = units.n_states[u]
        np.testing.assert_allclose(units.trans[u, :n].sum(axis=1), 1.0, atol=1e-12)
        np.testing.assert_allclose(units.entry[u].sum(), 1.0, atol=1e-12)
    gap = units.index(GAP_UNIT)
    pause = units.index(PAUSE_UNIT)
    assert units.n_states[gap] == 1
    assert units.state_mixture[gap, 0] == units.state_mixture[pause, 1]


def test_validate_refuses_bad_rows(units):
    units.trans[0, 0, 0] = 0.9  # row now sums to 1.3
    with pytest.raises(ModelFileError, match="do not sum to one"):
        units.validate()


def test_pause_unit_has_our_own_name(units):
    # Our own plain name for the silence-and-background unit; the last two units are the
    # pause and the short pause, after the phones.
    assert PAUSE_UNIT == "quiet" and units.names[-2:] == ("quiet", GAP_UNIT)
    assert "pau" not in units.names
    # A phone list that already names the pause unit does not get it twice.
    assert default_unit_set(["AH", PAUSE_UNIT, "T"]).names == ("AH", "T", PAUSE_UNIT, GAP_UNIT)


def test_validate_refuses_a_name_used_twice(units):
    from dataclasses import replace

    twice = replace(units, names=units.names[:1] + units.names[:1] + units.names[2:])
    with pytest.raises(ModelFileError, match=rf"unit name\(s\) '{units.names[0]}' occur more than once"):
        twice.validate(source="m.model")


def test_chain_is_row_stochastic_with_end(units):
    # For a graph with no alternatives, every state's outgoing mass (self + arcs + end)
    # is one: composition multiplies exits by entries that themselves sum to one.
    p, g = units.index(PAUSE_UNIT), units.index(GAP_UNIT)
    k, ah, t = units.index("K"), units.index("AH"), units.index("T")
    graph = compose([[(p,)], [(k, ah, t)], [(g,)], [(t,)], [(p,)]], units)
    a, start, end = _dense(graph)
    np.testing.assert_allclose(a.sum(axis=1) + end, 1.0, atol=1e-12)
    np.testing.assert_allclose(start.sum(), 1.0, atol=1e-12)


def test_parameter_ids_reproduce_probabilities(units):
    # Each arc's log probability is the sum of the logs of the parameters it names.
    p, g = units.index(PAUSE_UNIT), units.index(GAP_UNIT)
    graph = compose([[(p,)], [(0, 1), (2,)], [(g,)], [(3,)], [(p,)]], units)
    flat = units.flat_params()
    assert flat.shape == (n_transition_params(units.n_units),)

    def logp_of(ids):
        ids = ids[ids >= 0]
        return np.log(flat[ids]).sum()

    for e in range(graph.n_arcs):
        assert graph.arc_logp[e] == pytest.approx(logp_of(graph.arc_params[e]), abs=1e-12)
    for s in range(graph.n_states):
        assert graph.self_logp[s] == pytest.approx(np.log(flat[graph.self_param[s]]), abs=1e-12)
        if np.isfinite(graph.final_logp[s]):
            assert graph.final_logp[s] == pytest.approx(logp_of(graph.final_params[s]), abs=1e-12)
    assert flat[trans_param_id(p, 2, 0)] == pytest.approx(0.1)  # the pause's return arc
    assert flat[entry_param_id(units.n_units, g, EXIT)] == pytest.approx(0.5)  # gap skip


def test_min_frames_counts_skips(units):
    p, g = units.index(PAUSE_UNIT), units.index(GAP_UNIT)
    graph = compose([[(p,)], [(0, 1)], [(g,)], [(2,)], [(p,)]], units)
    # pause can skip its middle state (2 frames), phones need 3 each, gap can be skipped.
    assert graph.min_frames() == 2 + 6 + 3 + 2


def test_all_skippable_is_refused(units):
    g = units.index(GAP_UNIT)
    with pytest.raises(ValueError, match="skipped"):
        compose([[(g,)]], units)


def test_forward_matches_hmmlearn(units, rng):
    # Forward log probability of a composed chain, summed over all paths, against
    # hmmlearn's forward pass (reference library) on the same dense model. hmmlearn lets
    # a path end in any state; we compare the all-ends sum by setting our ends to one.
    p, g = units.index(PAUSE_UNIT), units.index(GAP_UNIT)
    graph = compose([[(p,)], [(0, 1)], [(g,)], [(2,)], [(p,)]], units)
    a, start, _ = _dense(graph)
    t_len, s = 30, graph.n_states
    table = rng.normal(scale=2.0, size=(t_len, s))

    # Plain forward recursion over the graph's own arrays (independent of hmmlearn).
    alpha = graph.init_logp + table[0]
    for t in range(1, t_len):
        cand = np.full(s, -np.inf)
        cand = np.logaddexp(cand, alpha + graph.self_logp)
        for e in range(graph.n_arcs):
            d = graph.arc_dst[e]
            cand[d] = np.logaddexp(cand[d], alpha[graph.arc_src[e]] + graph.arc_logp[e])
        alpha = cand + table[t]
    ours = logsumexp(alpha)

    # hmmlearn's forward pass on the same dense matrix (its rows miss the end mass of
    # the last pause state; TableHMM skips hmmlearn's row-sum check for that reason).
    model = TableHMM(table, implementation="log")
    model.startprob_ = start
    with np.errstate(divide="ignore"):
        model.transmat_ = a
    x = np.arange(t_len)[:, None]
    ref = model.score(x)
    assert ours == pytest.approx(ref, abs=1e-8)
