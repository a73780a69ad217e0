"""Diagonal Gaussian mixtures: scoring, statistics, update, splitting."""

import numpy as np
import pytest
from scipy.special import logsumexp
from scipy.stats import multivariate_normal

from wordspot.acoustic import kernels
from wordspot.acoustic.gmm import (
    SPLIT_OFFSET,
    Mixtures,
    MixtureStats,
    component_log_likelihoods,
    component_statistics,
    log_likelihoods,
    scoring_matrix,
    single_gaussian,
    split_heaviest,
    update_mixtures,
)


def random_mixtures(rng, p=4, m=3, d=5):
    w = rng.uniform(0.1, 1.0, (p, m))
    w[0, -1] = 0.0  # an unused component
    w /= w.sum(axis=1, keepdims=True)
    return Mixtures(w, rng.normal(0, 3, (p, m, d)), rng.uniform(0.2, 4.0, (p, m, d)))


def test_component_scores_match_scipy(rng):
    mix = random_mixtures(rng)
    x = rng.normal(0, 3, (20, 5))
    got = component_log_likelihoods(x, mix)
    for p in range(mix.n_mixtures):
        for m in range(mix.n_components):
            # Reference: scipy.stats.multivariate_normal with a diagonal covariance.
            dens = multivariate_normal(mix.means[p, m], np.diag(mix.variances[p, m])).logpdf(x)
            with np.errstate(divide="ignore"):
                want = dens + np.log(mix.weights[p, m])
            np.testing.assert_allclose(got[:, p, m], want, rtol=1e-10, atol=1e-9)
    total = log_likelihoods(x, mix)
    np.testing.assert_allclose(total, logsumexp(got, axis=2), rtol=1e-12)
    subset = component_log_likelihoods(x, mix, mixture_ids=np.array([2, 0]))
    np.testing.assert_allclose(subset, got[:, [2, 0]], rtol=1e-12)


def test_compiled_mixture_kernels_equal_reference(rng):
    mix = random_mixtures(rng, p=6, m=4, d=7)
    x = rng.normal(0, 2, (30, 7))
    w, c = scoring_matrix(mix)
    comp = kernels.score_components(x, w, c)
    np.testing.assert_allclose(comp, kernels.reference_score_components(x, w, c), rtol=1e-11, atol=1e-9)
    comp = comp.reshape(30, 6, 4)
    ll, post = kernels.mixture_posteriors(comp)
    ref_ll, ref_post = kernels.reference_mixture_posteriors(comp)
    np.testing.assert_allclose(ll, ref_ll, rtol=1e-12)
    np.testing.assert_allclose(post, ref_post, rtol=1e-11, atol=1e-15)
    gamma = rng.uniform(0, 1, (30, 6))
    gamma[:, 1] = 0.0
    got = kernels.accumulate_moments(x, post, gamma)
    want = kernels.reference_accumulate_moments(x, post, gamma)
    for a, b in zip(got, want):
        np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-12)
    # The readable statistics function agrees with the compiled one.
    for a, b in zip(component_statistics(x, gamma, comp), got):
        np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-12)


def test_update_is_weighted_maximum_likelihood(rng):
    # One mixture, two components, posteriors fixed by hand: the update must give the
    # posterior-weighted mean and variance (maximum-likelihood M-step; Bishop 2006,
    # "Pattern Recognition and Machine Learning", eqs. 9.24-9.26, from memory).
    x = rng.normal(0, 2, (50, 3))
    resp = rng.uniform(0, 1, 50)
    post = np.stack([resp, 1 - resp], axis=1)[:, None, :]  # (T, 1, 2)
    gamma = np.ones((50, 1))
    occ, first, second = kernels.accumulate_moments(x, post, gamma)
    stats = MixtureStats(occ, first, second)
    old = Mixtures(np.array([[0.5, 0.5]]), np.zeros((1, 2, 3)), np.ones((1, 2, 3)))
    new, updated = update_mixtures(old, stats, variance_floor=np.full(3, 1e-6), min_occupancy=1.0)
    assert updated.tolist() == [True]
    for m, r in enumerate([resp, 1 - resp]):
        mean = np.average(x, axis=0, weights=r)
        var = np.average((x - mean) ** 2, axis=0, weights=r)
        np.testing.assert_allclose(new.means[0, m], mean, rtol=1e-10)
        np.testing.assert_allclose(new.variances[0, m], var, rtol=1e-9)
    np.testing.assert_allclose(new.weights[0], [resp.mean(), 1 - resp.mean()], rtol=1e-12)


def test_update_floors_drops_starved_and_keeps_unseen(rng):
    d = 4
    stats = MixtureStats.zeros(3, 2, d)
    # Mixture 0: component 0 has data with tiny spread; component 1 is starved.
    x = rng.normal(1.0, 1e-4, (40, d))
    stats.occupancy[0] = [40.0, 0.5]
    stats.first[0, 0] = x.sum(axis=0)
    stats.second[0, 0] = (x * x).sum(axis=0)
    stats.first[0, 1] = 0.5 * x[0]
    stats.second[0, 1] = 0.5 * x[0] ** 2
    # Mixture 1: no data at all. Mixture 2: only a little data, below min_occupancy.
    stats.occupancy[2] = [1.0, 0.0]
    stats.first[2, 0] = 3.0
    stats.second[2, 0] = 9.0
    old = single_gaussian(3, np.zeros(d), np.full(d, 2.0))
    old = split_heaviest(old, 2)
    floor = np.full(d, 0.05)
    new, updated = update_mixtures(old, stats, variance_floor=floor, min_occupancy=3.0)
    assert updated.tolist() == [True, False, False]
    assert np.all(new.variances[0] >= floor)  # floored, not 1e-8
    np.testing.assert_allclose(new.variances[0, 0], floor)
    assert new.weights[0].tolist() == [1.0, 0.0]  # starved component dropped
    for p in (1, 2):  # unseen mixtures keep their parameters
        np.testing.assert_array_equal(new.means[p], old.means[p])
        np.testing.assert_array_equal(new.weights[p], old.weights[p])
    assert np.all(np.isfinite(new.means)) and np.all(np.isfinite(new.variances))
    np.testing.assert_allclose(new.weights.sum(axis=1), 1.0, rtol=1e-12)


def test_split_heaviest(rng):
    mix = single_gaussian(2, np.array([1.0, -1.0]), np.array([4.0, 0.25]))
    two = split_heaviest(mix, 2)
    assert two.n_components == 2
    np.testing.assert_allclose(two.weights, 0.5)
    # Means move by +-0.2 standard deviations (SPLIT_OFFSET; common practice).
    assert SPLIT_OFFSET == 0.2
    np.testing.assert_allclose(two.means[0, 0], [1.0 + 0.4, -1.0 + 0.1])
    np.testing.assert_allclose(two.means[0, 1], [1.0 - 0.4, -1.0 - 0.1])
    np.testing.assert_array_equal(two.variances[0, 0], two.variances[0, 1])
    # Growing to 3 splits only the heaviest: weights become 0.25, 0.25, 0.5 in some order.
    uneven = Mixtures(np.array([[0.7, 0.3]]), two.means[:1].copy(), two.variances[:1].copy())
    three = split_heaviest(uneven, 3)
    np.testing.assert_allclose(sorted(three.weights[0]), [0.3, 0.35, 0.35])
    # Mixtures not selected keep their single component.
    sel = split_heaviest(mix, 4, which=np.array([True, False]), rng=rng)
    assert np.count_nonzero(sel.weights[0]) == 4 and np.count_nonzero(sel.weights[1]) == 1
    np.testing.assert_allclose(sel.weights.sum(axis=1), 1.0)
    assert np.all(np.isfinite(sel.means)) and np.all(sel.variances > 0)


def test_posteriors_formed_where_used_give_the_same_statistics_bit_for_bit(rng):
    # The statistics pass forms component posteriors only where a mixture is used
    # (mixture_log_likelihoods + accumulate_from_scores); the sums must be exactly those of
    # mixture_posteriors + accumulate_moments, including an impossible mixture (all -inf),
    # a switched-off component (weight 0) and pruned frames.
    mix = random_mixtures(rng, p=6, m=4, d=7)
    x = rng.normal(0, 2, (40, 7))
    w, c = scoring_matrix(mix)
    comp = kernels.score_components(x, w, c).reshape(40, 6, 4)
    comp[5:9, 2, :] = -np.inf
    ll, post = kernels.mixture_posteriors(comp)
    got_ll, top, total = kernels.mixture_log_likelihoods(comp)
    np.testing.assert_array_equal(got_ll, ll)
    assert np.all(np.isneginf(top[5:9, 2])) and np.all(total[5:9, 2] == 0)
    gamma = rng.uniform(0, 1, (40, 6)) ** 4
    gamma[gamma < 1e-2] = 0.0
    gamma[:, 1] = 0.0
    for a, b in zip(kernels.accumulate_from_scores(x, comp, top, total, gamma),
                    kernels.accumulate_moments(x, post, gamma)):
        np.testing.assert_array_equal(a, b)
    # and not trivially: the sums are not zero
    assert kernels.accumulate_from_scores(x, comp, top, total, gamma)[0].sum() > 1


def test_mixture_occupancy_sums_states_as_add_at(rng):
    gamma = rng.uniform(0, 1, (25, 9))
    local = np.array([0, 1, 1, 2, 0, 3, 2, 2, 1], dtype=np.int64)
    want = np.zeros((25, 4))
    np.add.at(want.T, local, gamma.T)
    np.testing.assert_array_equal(kernels.mixture_occupancy(gamma, local, 4, 0.0), want)
    pruned = want.copy()
    pruned[pruned < 0.9] = 0.0
    got = kernels.mixture_occupancy(gamma, local, 4, 0.9)
    np.testing.assert_array_equal(got, pruned)
    assert (got == 0).any() and (got > 0).any()
