"""A state scorer fitted on the user's recordings alone, for a model trained from scratch."""

from dataclasses import replace

import numpy as np
import pytest

from tone_corpus import load_corpus
from wordspot.audio.augment import NoiseSettings
from wordspot.training.frame_labels import align_frames
from wordspot.training.own_scorer import SCRATCH_SCORER, fit_own_scorer
from wordspot.training.trainer import TrainingConfig, train

SMALL = dict(mixtures=(1, 2), first_passes=3, passes_per_split=1, speed_factors=(1.0, 1.1), noise_copies=1,
             background_share=0.5)
NET = replace(SCRATCH_SCORER, hidden=(16,), context=2, max_epochs=8, learning_rate=0.01)


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    """A two-Gaussian model trained from scratch on the tone corpus, and that corpus."""
    rng = np.random.default_rng(20261203)
    utts, lex, _ = load_corpus(tmp_path_factory.mktemp("tones"), rng, n_utterances=12)
    config = TrainingConfig(**SMALL)
    model, _ = train(utts, lex, config=config)
    return model, utts, config


def _fit(tiny, seed=0):
    model, utts, config = tiny
    return fit_own_scorer(model, utts, noise=config.noise, speeds=config.speed_factors,
                          background_share=config.background_share, seed=config.seed,
                          scorer=replace(NET, seed=seed))


def test_classes_match_the_mixtures_and_it_learns_the_alignment(tiny):
    model, utts, config = tiny
    net, info, note = _fit(tiny)
    assert net.n_classes == model.mixtures.n_mixtures
    assert net.frame_dim == model.features.dim and net.context == 2
    # recordings, one speed copy, one noisy copy each, background items (share 0.5 of 12, at least 20)
    assert info["items"] >= 3 * len(utts) + 20
    assert str(info["frames"]) in note
    # the alignment it was fitted on, without copies: the scorer's best class mostly agrees
    got = align_frames(model, utts)
    hits = np.concatenate([np.argmax(net.log_posteriors(x), axis=1) == y for x, y in zip(got.frames, got.labels)])
    assert hits.mean() > 0.6  # tones a phone apart: far above the 1 in 21 of guessing (common practice, no source)


def test_same_seed_same_scorer(tiny):
    a, _, _ = _fit(tiny, seed=1)
    b, _, _ = _fit(tiny, seed=1)
    c, _, _ = _fit(tiny, seed=2)
    assert a.same_as(b)
    assert not a.same_as(c)


def test_noise_settings_are_optional(tiny):
    model, utts, _ = tiny
    net, info, _ = fit_own_scorer(model, utts, noise=NoiseSettings(copies=0), scorer=NET)
    assert info["items"] == len(utts)
    assert net.n_classes == model.mixtures.n_mixtures
