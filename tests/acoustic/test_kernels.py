"""Forward, backward, Viterbi and Baum-Welch counts: compiled vs reference vs hmmlearn."""

import numpy as np
import pytest
from hmmlearn.hmm import GaussianHMM
from scipy.special import logsumexp

from wordspot.acoustic import kernels
from wordspot.acoustic.gmm import MixtureStats, component_statistics, log_likelihoods, single_gaussian, \
    update_mixtures, component_log_likelihoods
from wordspot.acoustic.graph import MAX_ARC_PARAMS, StateGraph, compose
from wordspot.acoustic.hmm import forward_backward, graph_arrays, viterbi_path
from wordspot.acoustic.transitions import parameter_counts, refresh_graph, update_transitions
from wordspot.acoustic.units import (
    EXIT,
    GAP_UNIT,
    PAUSE_UNIT,
    UnitSet,
    default_unit_set,
    n_transition_params,
    trans_param_id,
)


def random_graph(rng, n_states, n_arcs):
    """Arrays of a random graph with forward, skip and backward arcs and some -inf."""
    self_logp = np.log(rng.uniform(0.1, 0.9, n_states))
    self_logp[rng.uniform(size=n_states) < 0.2] = -np.inf
    src = rng.integers(0, n_states, n_arcs)
    dst = rng.integers(0, n_states, n_arcs)
    keep = src != dst
    src, dst = src[keep], dst[keep]
    order = np.lexsort((src, dst))
    src, dst = src[order].astype(np.int64), dst[order].astype(np.int64)
    arc_logp = np.log(rng.uniform(0.05, 0.5, src.size))
    init = np.full(n_states, -np.inf)
    k = min(2, n_states)
    init[rng.choice(n_states, k, replace=False)] = np.log([0.7, 0.3][:k])
    final = np.full(n_states, -np.inf)
    final[rng.choice(n_states, k, replace=False)] = np.log([0.4, 0.9][:k])
    return self_logp, src, dst, arc_logp, init, final


@pytest.mark.parametrize("n_states,n_arcs,n_frames", [(1, 0, 5), (4, 6, 1), (7, 20, 30), (25, 60, 80)])
def test_compiled_kernels_equal_reference(rng, n_states, n_arcs, n_frames):
    g = random_graph(rng, n_states, n_arcs)
    self_logp, src, dst, arc_logp, init, final = g
    x = rng.normal(size=(n_frames, n_states)) * 3
    total, alpha = kernels.forward(x, *g)
    ref_total, ref_alpha = kernels.reference_forward(x, *g)
    # Reference: dense-matrix recursion (Rabiner 1989 eqs. 19-21) in plain numpy.
    np.testing.assert_allclose(total, ref_total, rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(alpha, ref_alpha, rtol=1e-10, atol=1e-10)
    beta = kernels.backward(x, self_logp, src, dst, arc_logp, final)
    np.testing.assert_allclose(
        beta, kernels.reference_backward(x, self_logp, src, dst, arc_logp, final), rtol=1e-10, atol=1e-10
    )
    if np.isfinite(total):
        got = kernels.transition_counts(x, alpha, beta, total, *g)
        want = kernels.reference_transition_counts(x, alpha, beta, total, *g)
        for a, b in zip(got, want):
            np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-12)
    score, path = kernels.viterbi(x, *g)
    ref_score, ref_path = kernels.reference_viterbi(x, *g)
    np.testing.assert_allclose(score, ref_score, rtol=1e-12, atol=1e-12)
    np.testing.assert_array_equal(path, ref_path)


def test_kernels_on_training_chain_equal_reference(rng):
    # A real chain: pause (skip and return arcs), two words, optional gap, pause.
    units = default_unit_set(["AH", "B", "K"])
    ids = [units.index(n) for n in (PAUSE_UNIT, "AH", "B", "K", GAP_UNIT)]
    pause, ah, b, k, gap = ids
    graph = compose([[(pause,)], [(b, ah, k), (b, k)], [(gap,)], [(k, ah)], [(pause,)]], units)
    x = rng.normal(size=(40, graph.n_states)) * 2
    arrays = graph_arrays(graph)
    total, alpha = kernels.forward(x, *arrays)
    ref_total, ref_alpha = kernels.reference_forward(x, *arrays)
    np.testing.assert_allclose(total, ref_total, rtol=1e-10)
    post = forward_backward(graph, x)
    # Each frame's occupancies sum to one (a probability distribution over states).
    np.testing.assert_allclose(post.gamma.sum(axis=1), 1.0, rtol=1e-9)
    # Flow conservation: uses of a state = its occupancy summed over time (Rabiner eq. 38).
    leaving = post.self_count.copy()
    np.add.at(leaving, graph.arc_src, post.arc_count)
    leaving += post.final_count
    np.testing.assert_allclose(leaving, post.gamma.sum(axis=0), rtol=1e-8, atol=1e-10)


def test_no_path_gives_minus_inf_not_nan(rng):
    units = default_unit_set(["AH"])
    pause = units.index(PAUSE_UNIT)
    graph = compose([[(pause,)], [(units.index("AH"),)], [(pause,)]], units)
    x = rng.normal(size=(2, graph.n_states))  # shorter than min_frames
    assert graph.min_frames() > 2
    post = forward_backward(graph, x)
    assert post.loglik == -np.inf
    assert not np.isnan(post.gamma).any()
    score, states = viterbi_path(graph, x)
    assert score == -np.inf and (states == -1).all()


def test_refresh_graph_equals_compose():
    units = default_unit_set(["AH", "B"])
    pause, ah, b, gap = (units.index(n) for n in (PAUSE_UNIT, "AH", "B", GAP_UNIT))
    slots = [[(pause,)], [(b, ah)], [(gap,)], [(ah,)], [(pause,)]]
    g0 = compose(slots, units)
    changed = units.with_flat_params(units.flat_params())
    changed.trans[ah, 0] = [0.3, 0.7, 0.0, 0.0]
    changed.trans[pause, 2] = [0.2, 0.0, 0.5, 0.3]
    changed.entry[gap] = [0.8, 0.0, 0.0, 0.2]
    want = compose(slots, changed)
    got = refresh_graph(g0, changed)
    for name in ("self_logp", "arc_logp", "init_logp", "final_logp"):
        np.testing.assert_allclose(getattr(got, name), getattr(want, name), rtol=1e-12)


# ---------------------------------------------------------------- hmmlearn comparison


def _left_to_right_problem(rng):
    """One 3-state left-to-right Gaussian HMM, a sequence, and hmmlearn's twin."""
    n, d, t = 3, 2, 60
    means = np.array([[-2.0, 0.0], [1.0, 2.0], [3.0, -1.0]])
    variances = np.array([[1.0, 0.5], [0.7, 1.2], [0.4, 0.9]])
    x = np.concatenate([rng.normal(means[k], np.sqrt(variances[k]), size=(t // 3, d)) for k in range(n)])
    a = np.array([[0.7, 0.3, 0.0], [0.0, 0.8, 0.2], [0.0, 0.0, 1.0]])
    # Our side: one unit of three states; the last state loops forever (never exits).
    units = UnitSet(
        names=("x",),
        n_states=np.array([3]),
        state_mixture=np.array([[0, 1, 2]]),
        trans=np.array([[[0.7, 0.3, 0.0, 0.0], [0.0, 0.8, 0.2, 0.0], [0.0, 0.0, 1.0, 0.0]]]),
        entry=np.array([[1.0, 0.0, 0.0, 0.0]]),
    )
    pad = [-1] * (MAX_ARC_PARAMS - 1)
    graph = StateGraph(
        mixture=np.arange(3, dtype=np.int32),
        unit=np.zeros(3, dtype=np.int32),
        position=np.arange(3, dtype=np.int32),
        slot=np.zeros(3, dtype=np.int32),
        alternative=np.zeros(3, dtype=np.int32),
        self_logp=np.log(np.diag(a)),
        self_param=np.array([trans_param_id(0, i, i) for i in range(3)], dtype=np.int32),
        arc_src=np.array([0, 1], dtype=np.int32),
        arc_dst=np.array([1, 2], dtype=np.int32),
        arc_logp=np.log([0.3, 0.2]),
        arc_params=np.array([[trans_param_id(0, 0, 1)] + pad, [trans_param_id(0, 1, 2)] + pad], dtype=np.int32),
        init_logp=np.array([0.0, -np.inf, -np.inf]),
        init_params=np.full((3, MAX_ARC_PARAMS), -1, dtype=np.int32),
        # hmmlearn lets a path end in any state: final log prob 0 everywhere.
        final_logp=np.zeros(3),
        final_params=np.full((3, MAX_ARC_PARAMS), -1, dtype=np.int32),
    )
    mix = single_gaussian(3, np.zeros(d), np.ones(d))
    mix.means[:, 0] = means + 0.3
    mix.variances[:, 0] = variances * 1.5
    ref = GaussianHMM(n_components=3, covariance_type="diag", min_covar=1e-12, covars_prior=0.0,
                      means_prior=0.0, means_weight=0.0, init_params="", params="stmc", n_iter=1,
                      tol=-np.inf, implementation="log")
    ref.startprob_ = np.array([1.0, 0.0, 0.0])
    ref.transmat_ = a
    ref.means_ = mix.means[:, 0].copy()
    ref.covars_ = mix.variances[:, 0].copy()
    return x, units, graph, mix, ref


def test_forward_and_viterbi_match_hmmlearn(rng):
    x, units, graph, mix, ref = _left_to_right_problem(rng)
    state_ll = log_likelihoods(x, mix)[:, graph.mixture]
    post = forward_backward(graph, state_ll)
    # Reference library: hmmlearn GaussianHMM.score (forward algorithm).
    np.testing.assert_allclose(post.loglik, ref.score(x), rtol=1e-10)
    # Reference library: hmmlearn's state posteriors.
    _, ref_post = ref.score_samples(x)
    np.testing.assert_allclose(post.gamma, ref_post, rtol=1e-7, atol=1e-10)
    score, states = viterbi_path(graph, state_ll)
    ref_score, ref_states = ref.decode(x, algorithm="viterbi")
    np.testing.assert_allclose(score, ref_score, rtol=1e-10)
    np.testing.assert_array_equal(states, ref_states)


def test_one_baum_welch_pass_matches_hmmlearn(rng):
    x, units, graph, mix, ref = _left_to_right_problem(rng)
    comp = component_log_likelihoods(x, mix)
    state_ll = logsumexp(comp, axis=2)[:, graph.mixture]
    post = forward_backward(graph, state_ll)
    stats = MixtureStats(*component_statistics(x, post.gamma, comp))
    new_mix, updated = update_mixtures(mix, stats, variance_floor=np.full(2, 1e-12), min_occupancy=0.0)
    assert updated.all()
    counts = parameter_counts(graph, post, n_transition_params(units.n_units))
    new_units = update_transitions(units, counts, floor=0.0)
    ref.fit(x)  # one EM iteration (n_iter=1)
    # Reference library: hmmlearn GaussianHMM after one Baum-Welch iteration.
    np.testing.assert_allclose(new_mix.means[:, 0], ref.means_, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(new_mix.variances[:, 0], ref._covars_, rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(new_units.trans[0, :, :3], ref.transmat_, rtol=1e-8, atol=1e-12)
    assert new_units.trans[0, :, EXIT].tolist() == [0.0, 0.0, 0.0]
