"""Tests for wordspot.training.noise: noisy copies of training recordings."""

import numpy as np
import pytest

from tone_corpus import load_corpus
from wordspot.audio.augment import NoiseSettings
from wordspot.errors import AugmentError
from wordspot.audio.features import FeatureSettings
from wordspot.training.trainer import TrainingConfig
from wordspot.training.data import prepare_items
from wordspot.training.noise import CopyRecipe, babble_streams, plan_copies, recording_key

BABBLE = NoiseSettings(copies=3, kinds=("babble",), talkers=(2, 4))


def test_babble_talkers_are_other_speakers_when_there_are_enough():
    speakers = ["a", "a", "b", "c", "d", "e", "b"]
    for recipe in plan_copies(speakers, BABBLE, seed=1):
        assert 2 <= len(recipe.talkers) <= 4
        assert speakers[recipe.index] not in recipe.talkers
        assert len(set(recipe.talkers)) == len(recipe.talkers)


def test_babble_never_uses_the_recording_itself_even_with_one_speaker():
    # one person training on their own voice: the babble is their other recordings
    speakers = ["me"] * 4
    pool = {"me": [(k, np.full(50, float(k))) for k in range(4)]}
    plans = plan_copies(speakers, BABBLE, seed=2)
    assert len(plans) == 3 * 4
    for recipe in plans:
        streams = babble_streams(pool, recipe)
        assert streams
        for s in streams:
            assert float(recipe.index) not in set(s.tolist())


def test_plans_depend_only_on_the_seed():
    speakers = ["a", "b", "c"] * 3
    noise = NoiseSettings(copies=2)
    assert plan_copies(speakers, noise, seed=7) == plan_copies(speakers, noise, seed=7)
    assert plan_copies(speakers, noise, seed=7) != plan_copies(speakers, noise, seed=8)
    snrs = [p.snr_db for p in plan_copies(speakers, noise, seed=7)]
    assert all(0.0 <= v <= 25.0 for v in snrs)


def test_a_keyed_recording_gets_the_same_recipe_in_any_list():
    speakers = ["a", "b", "c", "a", "b", "c"]
    keys = [recording_key(f"r{k}.wav", ("oven", "on")) for k in range(6)]
    noise = NoiseSettings(copies=2)
    whole = plan_copies(speakers, noise, seed=3, keys=keys)
    order = [4, 1, 5, 0]  # a shorter list in another order, the same three speakers
    part = plan_copies([speakers[k] for k in order], noise, seed=3, keys=[keys[k] for k in order])
    def strip(r):
        return (r.kind, r.snr_db, r.talkers, r.noise_seed)
    for c in range(2):
        for j, k in enumerate(order):
            assert strip(part[c * len(order) + j]) == strip(whole[c * 6 + k])
            assert part[c * len(order) + j].index == j  # the index still points into its own list
    # without keys the recipe follows the place in the list
    plain = plan_copies([speakers[k] for k in order], noise, seed=3)
    assert [strip(r) for r in plain] != [strip(r) for r in part]
    assert recording_key("r0.wav", ("oven", "on")) != recording_key("r0.wav", ("oven", "off"))


def test_default_kinds_draw_babble_two_times_in_three():
    # each copy draws one listed kind with equal chance (NoiseSettings docstring); babble is listed twice.
    # 1,200 draws: the share of babble has sd sqrt(p(1-p)/n) = 0.014 (binomial), so 0.62-0.71 is +-3 sd.
    plans = plan_copies([f"s{k}" for k in range(400)], NoiseSettings(copies=3), seed=1)
    share = sum(p.kind == "babble" for p in plans) / len(plans)
    assert len(plans) == 1200 and 0.62 < share < 0.71
    only_steady = plan_copies(["a", "b"] * 5, NoiseSettings(copies=2, kinds=("steady",)), seed=1)
    assert {p.kind for p in only_steady} == {"steady"} and all(p.talkers == () for p in only_steady)


@pytest.fixture
def tiny(tmp_path, rng):
    return load_corpus(tmp_path, rng, n_utterances=6)


def test_noisy_copies_follow_the_clean_items_and_match_for_any_number_of_jobs(tiny):
    utts, lex, units = tiny
    s = FeatureSettings()
    clean, _ = prepare_items(utts, lex, units, s)
    noise = NoiseSettings(copies=2, snr_db=(5.0, 15.0))
    one, _ = prepare_items(utts, lex, units, s, noise=noise, seed=3)
    two, _ = prepare_items(utts, lex, units, s, noise=noise, seed=3, jobs=2)
    assert len(one) == len(two) == 3 * len(clean)
    for a, b in zip(one, two):
        np.testing.assert_array_equal(a.frames, b.frames)
    for k, it in enumerate(one[len(clean):]):
        base = clean[k % len(clean)]
        assert it.path == base.path and it.words == base.words and it.graph is not None
        assert it.frames.shape == base.frames.shape
        assert not np.allclose(it.frames, base.frames)
    np.testing.assert_array_equal(one[0].frames, clean[0].frames)


def test_training_config_checks_the_noise_settings():
    assert TrainingConfig(noise_copies=2).noise.copies == 2
    with pytest.raises(AugmentError, match="copies must be a whole number"):
        TrainingConfig(noise_copies=-1)
    with pytest.raises(AugmentError, match="low <= high"):
        TrainingConfig(noise_snr_db=(30.0, 0.0))


def test_each_recording_is_read_once_and_its_copies_are_those_of_the_plans(tiny, monkeypatch):
    # the work goes recording by recording; every copy is still its plan's, in plan order
    from wordspot.audio.reading import load_audio
    from wordspot.training import noise as noise_module

    utts, lex, units = tiny
    s = FeatureSettings()
    clean, _ = prepare_items(utts, lex, units, s)
    speakers = [f"v{k % 3}" for k in range(len(clean))]
    settings = NoiseSettings(copies=2, snr_db=(5.0, 15.0))
    pool = noise_module.babble_pool([it.path for it in clean], speakers, seed=4, sample_rate=s.sample_rate)
    expected = [noise_module._copy_features(load_audio(clean[r.index].path, sample_rate=s.sample_rate), r, pool, s)
                for r in plan_copies(speakers, settings, seed=4)]
    reads = []
    monkeypatch.setattr(noise_module, "load_audio", lambda path, **kw: reads.append(path) or load_audio(path, **kw))
    got = noise_module.noisy_items(clean, speakers, settings, s, seed=4)
    pool_reads = sum(len(v) for v in pool.values())
    assert len(reads) == pool_reads + len(clean)  # the pool's, then each recording once
    assert len(got) == len(expected) == 2 * len(clean)
    for it, e, r in zip(got, expected, plan_copies(speakers, settings, seed=4)):
        assert it.path == clean[r.index].path
        np.testing.assert_array_equal(it.frames, e)
