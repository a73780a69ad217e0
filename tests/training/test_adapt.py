"""Adaptation: MAP closed forms, the shared mean transform, and adapting a trained model."""

import dataclasses

import numpy as np
import pytest

from tone_corpus import WORDS, make_corpus
from wordspot.acoustic.units import GAP_UNIT, PAUSE_UNIT
from wordspot.corpus import read_manifest
from wordspot.errors import TrainingError
from wordspot.language.lexicon import Lexicon, read_lexicon
from wordspot.model import load_model, save_model
from wordspot.training.adapt import (
    AdaptationConfig,
    adapt,
    apply_mean_transform,
    estimate_mean_transform,
    map_means,
    map_variances,
    map_weights,
    vocabulary_for,
)
from wordspot.training.trainer import TrainingConfig, train

SMALL = TrainingConfig(mixtures=(1, 2), first_passes=3, passes_per_split=2, speed_factors=(1.0,), noise_copies=0)


def test_map_mean_and_weights_hand_worked():
    # Gauvain & Lee (1994), closed form of the MAP mean and weights, worked by hand:
    # prior mean 0, tau 10, five frames 1..5 all in component 0 -> (10*0 + 15) / (10 + 5) = 1.
    prior = np.zeros((1, 2, 1))
    occ = np.array([[5.0, 0.0]])
    first = np.array([[[15.0], [0.0]]])
    np.testing.assert_allclose(map_means(prior, occ, first, 10.0)[0, :, 0], [1.0, 0.0], rtol=0, atol=1e-12)
    # weights: prior (0.5, 0.5), counts (5, 0), tau 10 -> (5 + 5, 5 + 0) / 15 = (2/3, 1/3)
    w = map_weights(np.array([[0.5, 0.5]]), occ, 10.0)
    np.testing.assert_allclose(w, [[2 / 3, 1 / 3]], rtol=0, atol=1e-12)
    # variance: prior var 1, prior mean 0; second = 1+4+9+16+25 = 55;
    # (10 * (1 + 0) + 55) / 15 - 1**2 = 65/15 - 1 = 10/3 (worked by hand)
    v = map_variances(prior, np.ones((1, 2, 1)), map_means(prior, occ, first, 10.0), occ,
                      np.array([[[55.0], [0.0]]]), 10.0, floor=np.array([1e-3]))
    np.testing.assert_allclose(v[0, 0, 0], 10 / 3, rtol=1e-12)
    np.testing.assert_allclose(v[0, 1, 0], 1.0, rtol=1e-12)  # no data: the prior variance


def test_map_without_data_keeps_the_prior(rng):
    prior_mu = rng.normal(size=(3, 4, 5))
    prior_w = rng.dirichlet(np.ones(4), size=3)
    zero_occ, zero_first = np.zeros((3, 4)), np.zeros((3, 4, 5))
    np.testing.assert_array_equal(map_means(prior_mu, zero_occ, zero_first, 10.0), prior_mu)
    np.testing.assert_allclose(map_weights(prior_w, zero_occ, 10.0), prior_w, rtol=1e-15)


def test_map_tends_to_maximum_likelihood_as_data_grows(rng):
    # Gauvain & Lee (1994): with tau fixed, the MAP estimate tends to the ML estimate (the
    # sample mean) as the occupancy grows.
    prior = np.zeros((1, 1, 2))
    true = np.array([3.0, -1.0])
    gaps = []
    for n in (10, 100, 1000, 10000):
        x = true + rng.normal(size=(n, 2))
        ml = x.mean(axis=0)
        mapped = map_means(prior, np.array([[float(n)]]), x.sum(axis=0)[None, None, :], 10.0)[0, 0]
        gaps.append(np.abs(mapped - ml).max())
    assert all(a > b for a, b in zip(gaps, gaps[1:]))
    assert gaps[-1] < 0.01


def test_mean_transform_recovers_a_known_affine_map(rng):
    # Leggetter & Woodland (1995): statistics generated from means moved by a known affine
    # map give back that map (exactly without noise; closely with sampled frames).
    d, g = 4, 60
    means = rng.normal(size=(g, d)) * 3
    variances = rng.uniform(0.5, 2.0, size=(g, d))
    a = np.eye(d) + 0.2 * rng.normal(size=(d, d))
    b = rng.normal(size=d)
    target = means @ a.T + b
    occ = rng.uniform(20, 80, size=g)
    w = estimate_mean_transform(means, variances, occ, occ[:, None] * target)
    # (to 1e-5: the solver adds a ridge of 1e-8 of the trace to keep G invertible)
    np.testing.assert_allclose(w[:, 0], b, atol=1e-5)
    np.testing.assert_allclose(w[:, 1:], a, atol=1e-5)
    np.testing.assert_allclose(apply_mean_transform(means, w), target, atol=1e-4)
    # with frames drawn around the moved means
    first = np.stack([(target[k] + np.sqrt(variances[k]) * rng.normal(size=(int(occ[k]), d))).sum(axis=0)
                      for k in range(g)])
    w2 = estimate_mean_transform(means, variances, np.floor(occ), first)
    np.testing.assert_allclose(w2[:, 1:], a, atol=0.05)
    np.testing.assert_allclose(w2[:, 0], b, atol=0.1)
    # bias only: A stays the identity, b is the occupancy- and precision-weighted shift
    wb = estimate_mean_transform(means, variances, occ, occ[:, None] * (means + b), bias_only=True)
    np.testing.assert_allclose(wb[:, 0], b, atol=1e-10)
    np.testing.assert_array_equal(wb[:, 1:], np.eye(d))


def test_config_is_checked():
    with pytest.raises(TrainingError, match="prior_weight"):
        AdaptationConfig(prior_weight=-1)
    with pytest.raises(TrainingError, match="passes"):
        AdaptationConfig(passes=0)


def test_vocabulary_borrows_only_missing_words():
    user = Lexicon({"bake": [("B", "EY", "K")]}, source="user")
    start = Lexicon({"bake": [("B", "AA", "K")], "key": [("K", "IY")], "seat": [("S", "IY", "T")]}, source="start")
    lex, borrowed = vocabulary_for({"bake", "key"}, user, start)
    assert borrowed == ["key"]
    assert lex.pronunciations("bake") == (("B", "EY", "K"),)  # the user's own wins
    assert lex.words == ("bake", "key")


@pytest.fixture(scope="module")
def tone_models(tmp_path_factory):
    """A model trained on one tone corpus, and a second corpus whose tones are 6% higher."""
    rng = np.random.default_rng(20261202)
    folder = tmp_path_factory.mktemp("adapt")
    manifest, lex_path = make_corpus(folder / "a", rng, n_utterances=30)
    lex = read_lexicon(lex_path)
    # with a voice mixture (off by default) so that adapting can be seen to carry it along
    model, _ = train(read_manifest(manifest), lex, config=dataclasses.replace(SMALL, voice_components=4))
    import tone_corpus

    with tone_corpus.tones_scaled(1.06):
        other, _ = make_corpus(folder / "b", rng, n_utterances=12)
    return model, lex, read_manifest(other)


def test_adaptation_raises_likelihood_and_keeps_the_rest(tone_models, tmp_path):
    model, lex, other = tone_models
    cfg = AdaptationConfig(prior_weight=5.0, passes=2, mean_transform=False)
    only_key = [u for u in other if set(u.words) <= {"key"}] or other[:1]
    adapted, summary = adapt(only_key, lex, model, config=cfg)
    lls = [v for _, v in summary.passes]
    assert lls[-1] >= lls[0] - 1e-9  # adapting to the data cannot make it less likely (EM, from memory)
    # mixtures of units the data never touches stay exactly as they were
    touched = {p for w in {w for u in only_key for w in u.words} for pron in lex.pronunciations(w) for p in pron}
    u = model.units
    for k, name in enumerate(u.names):
        if name in touched or name in (PAUSE_UNIT, GAP_UNIT):
            continue
        pdfs = u.state_mixture[k, : u.n_states[k]]
        np.testing.assert_array_equal(adapted.mixtures.means[pdfs], model.mixtures.means[pdfs])
        np.testing.assert_array_equal(adapted.mixtures.weights[pdfs], model.mixtures.weights[pdfs])
    np.testing.assert_allclose(adapted.mixtures.weights.sum(axis=1), 1.0, rtol=1e-12)
    assert adapted.info["method"] == "adapted"
    # the adapted model is a model like any other: saved and loaded back the same
    path = save_model(adapted, tmp_path / "adapted.model")
    back = load_model(path)
    np.testing.assert_array_equal(back.mixtures.means, adapted.mixtures.means)
    # the start's voice mixture (of its training speech) comes along unchanged
    assert model.voice is not None and adapted.voice is model.voice
    np.testing.assert_array_equal(back.voice.means, model.voice.means)


def test_with_no_adaptation_data_the_start_comes_back(tone_models):
    model, lex, other = tone_models
    # tau -> infinity is "no data": a huge prior weight leaves every mean where it was
    adapted, _ = adapt(other, lex, model, config=AdaptationConfig(prior_weight=1e12, passes=1, mean_transform=False))
    np.testing.assert_allclose(adapted.mixtures.means, model.mixtures.means, rtol=0, atol=1e-6)


def test_mean_transform_helps_on_shifted_tones(tone_models):
    model, lex, other = tone_models
    plain, s1 = adapt(other, lex, model, config=AdaptationConfig(prior_weight=1e6, passes=1, mean_transform=False))
    moved, s2 = adapt(other, lex, model, config=AdaptationConfig(prior_weight=1e6, passes=1, mean_transform=True,
                                                                  min_transform_frames=50.0))
    # with MAP switched off in effect (tau huge), the transform alone must fit the new data better
    assert s2.passes[-1][1] > s1.passes[-1][1]


def test_units_the_start_lacks_are_refused(tone_models):
    model, lex, other = tone_models
    bad = Lexicon({w: [p] for w, p in WORDS.items()} | {"zap": [("Z", "AA")]}, source="user")
    utts = other[:2]
    utts = [dataclasses.replace(utts[0], words=("zap",))] + utts[1:]
    with pytest.raises(TrainingError, match="Z"):
        adapt(utts, bad, model)
