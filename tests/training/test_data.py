"""Tests for wordspot.training.data: frequency-warp augmentation of the training items."""

import numpy as np
import pytest

from tone_corpus import load_corpus
from wordspot.errors import TrainingError
from wordspot.audio.features import FeatureSettings, file_features
from wordspot.training.trainer import TrainingConfig
from wordspot.training.data import prepare_items


@pytest.fixture
def tiny(tmp_path, rng):
    return load_corpus(tmp_path, rng, n_utterances=5)


def test_plain_items_are_the_unwarped_features(tiny):
    utts, lex, units = tiny
    s = FeatureSettings()
    items, skipped = prepare_items(utts, lex, units, s)
    assert not skipped and len(items) == len(utts)
    for it, u in zip(items, utts):
        np.testing.assert_array_equal(it.frames, file_features(u.path, s))


def test_each_warp_factor_gives_one_copy_of_every_utterance(tiny):
    # vocal tract length perturbation: one item per (factor, utterance), same transcript and
    # chain, features computed with that warp (definition of the augmentation)
    utts, lex, units = tiny
    s = FeatureSettings()
    warps = (0.9, 1.0, 1.1)
    items, skipped = prepare_items(utts, lex, units, s, warps=warps)
    assert not skipped and len(items) == len(warps) * len(utts)
    for k, warp in enumerate(warps):
        for j, u in enumerate(utts):
            it = items[k * len(utts) + j]
            assert it.path == u.path and it.words == u.words
            np.testing.assert_array_equal(it.frames, file_features(u.path, s, warp=warp))
            assert it.graph is items[j].graph
    assert not np.allclose(items[0].frames, items[len(utts)].frames)


def test_training_config_checks_warp_factors():
    assert TrainingConfig().warp_factors == (1.0,)
    assert TrainingConfig(warp_factors=(0.9, 1, 1.1)).warp_factors == (0.9, 1.0, 1.1)
    for bad in [(), (0.0,), (1.0, 1.0), (3.0,), ("1",), (True,)]:
        with pytest.raises(TrainingError, match="warp_factors"):
            TrainingConfig(warp_factors=bad)
