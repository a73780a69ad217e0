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


def test_speed_copies_read_each_file_once_and_equal_one_reading_per_speed(tiny, monkeypatch):
    from wordspot.audio.features import compute_features
    from wordspot.audio.reading import load_audio
    from wordspot.training import data as data_module

    utts, lex, units = tiny
    s = FeatureSettings()
    expected = [[compute_features(data_module.speed_copy(load_audio(u.path, sample_rate=s.sample_rate),
                                                         s.sample_rate, f), s) for u in utts] for f in (0.9, 1.1)]
    reads = []
    monkeypatch.setattr(data_module, "load_audio", lambda path, **kw: reads.append(path) or load_audio(path, **kw))
    got = data_module.extract_speed_features([u.path for u in utts], s, (0.9, 1.1))
    assert sorted(reads) == sorted(u.path for u in utts)  # once each
    for per_speed, want in zip(got, expected):
        for (feats, error), e in zip(per_speed, want):
            assert error is None
            np.testing.assert_array_equal(feats, e)
    # in prepare_items: plain items, then every recording at 0.9, then at 1.1, as before
    items, _ = prepare_items(utts, lex, units, s, speeds=(1.0, 0.9, 1.1), jobs=2)
    assert len(items) == 3 * len(utts)
    for k, it in enumerate(items[len(utts):]):
        np.testing.assert_array_equal(it.frames, expected[k // len(utts)][k % len(utts)])
    # a file that cannot be read gives its message at every speed
    bad = data_module.extract_speed_features(["/nonexistent/take.wav"], s, (0.9, 1.1))
    assert [b[0][0] for b in bad] == [None, None] and all("take.wav" in b[0][1] for b in bad)
