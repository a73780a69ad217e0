"""Tests for wordspot.training.backgrounds: background-only training items."""

import numpy as np
import pytest

from tone_corpus import load_corpus
from wordspot.acoustic.units import PAUSE_UNIT
from wordspot.audio.augment import rms_dbfs
from wordspot.audio.features import FeatureSettings
from wordspot.errors import TrainingError
import wordspot.training.backgrounds as backgrounds
from wordspot.training.adapt import AdaptationConfig, adapt
from wordspot.training.backgrounds import (
    BACKGROUND_KINDS,
    IMPACTS_HALF_MIX,
    MIN_BACKGROUNDS,
    STEADY_MIX,
    background_count,
    background_wave,
    check_mix,
    mix_draws,
    plan_backgrounds,
)
from wordspot.training.data import prepare_items
from wordspot.training.trainer import TrainingConfig, train, train_items

RATE = 16000
SMALL = dict(mixtures=(1, 2), first_passes=2, passes_per_split=1, speed_factors=(1.0,), noise_copies=0)


def test_count_is_the_share_with_a_minimum():
    assert background_count(1000, 0.1) == 100
    assert background_count(1000, 0.25) == 250
    assert background_count(50, 0.1) == MIN_BACKGROUNDS
    assert background_count(1000, 0.0) == 0 and background_count(0, 0.5) == 0
    for bad in (-0.1, 1.5, "many", True):
        with pytest.raises(TrainingError, match="background_share"):
            TrainingConfig(background_share=bad)
    with pytest.raises(TrainingError, match="from 0 to 1"):
        AdaptationConfig(background_share=2.0)


def test_plans_depend_only_on_the_seed_and_cover_the_ranges():
    speakers = ["a", "b", "c", "d"]
    plans = plan_backgrounds(600, speakers, seed=4)
    assert plans == plan_backgrounds(600, speakers, seed=4)
    assert plans != plan_backgrounds(600, speakers, seed=5)
    assert plan_backgrounds(30, speakers, seed=4) == plans[:30]  # a recipe does not depend on the count
    assert {p.kind for p in plans} == set(BACKGROUND_KINDS)
    assert all(-70.0 <= p.dbfs <= -30.0 and 1.0 <= p.seconds <= 3.0 for p in plans)
    assert all(p.mains in (50.0, 60.0) for p in plans)
    for p in plans:
        assert (len(p.talkers) >= 3 and set(p.talkers) <= set(speakers)) if p.kind == "babble" else not p.talkers
        assert (p.floor_dbfs == -np.inf) if p.kind == "dither" else (-85.0 <= p.floor_dbfs <= -75.0)


def test_waves_have_the_recipe_level_plus_the_floor(rng):
    # uncorrelated signals add in power: 10 log10(10^(L/10) + 10^(F/10)) (textbook arithmetic)
    pool = {s: [(k, rng.standard_normal(4000) * 0.1)] for k, s in enumerate("abcd")}
    for recipe in plan_backgrounds(40, "abcd", seed=1):
        x = background_wave(recipe, pool, RATE)
        assert x.dtype == np.float32 and x.shape == (int(round(recipe.seconds * RATE)),)
        if recipe.kind == "dither":
            assert np.max(np.abs(x)) <= 2.0**-15
            continue
        expected = 10 * np.log10(10 ** (recipe.dbfs / 10) + 10 ** (recipe.floor_dbfs / 10))
        assert rms_dbfs(x) == pytest.approx(expected, abs=0.5)
        np.testing.assert_array_equal(x, background_wave(recipe, pool, RATE))


@pytest.fixture
def tiny(tmp_path, rng):
    return load_corpus(tmp_path, rng, n_utterances=12)


def test_items_are_pause_only_and_the_same_for_any_number_of_jobs(tiny):
    utts, lex, units = tiny
    s = FeatureSettings()
    clean, _ = prepare_items(utts, lex, units, s)
    one, _ = prepare_items(utts, lex, units, s, background_share=0.5, seed=3)
    two, _ = prepare_items(utts, lex, units, s, background_share=0.5, seed=3, jobs=2)
    assert len(one) == len(two) == len(clean) + MIN_BACKGROUNDS
    for a, b in zip(one, two):
        np.testing.assert_array_equal(a.frames, b.frames)
        assert a.path == b.path and a.background == b.background
    for a, b in zip(one, clean):  # the recordings' items come first, untouched
        np.testing.assert_array_equal(a.frames, b.frames)
    pause = units.index(PAUSE_UNIT)
    for it in one[len(clean):]:
        assert it.background and it.words == ()
        assert set(it.graph.unit.tolist()) == {pause}  # one pause unit from end to end
        # 1-3 s at the model's frame rate (100 frames a second)
        assert 95 <= it.frames.shape[0] <= 305 and it.frames.shape[1] == clean[0].frames.shape[1]


def test_training_counts_them_and_share_zero_is_the_plain_result(tiny):
    utts, lex, units = tiny
    plain_items, _ = prepare_items(utts, lex, units, FeatureSettings())
    _, plain_mix, _, _ = train_items(plain_items, units, frame_rate=100.0,
                                     config=TrainingConfig(**SMALL, background_share=0.0))
    zero, zero_summary = train(utts, lex, config=TrainingConfig(**SMALL, background_share=0.0))
    # no background items: the model of the items prepared without them, to the bit
    np.testing.assert_array_equal(zero.mixtures.means, plain_mix.means)
    assert zero_summary.backgrounds == 0 and zero.info["background_items"] == 0
    model, summary = train(utts, lex, config=TrainingConfig(**SMALL, background_share=0.25))
    assert summary.used == zero_summary.used == len(utts)  # recordings only
    assert summary.backgrounds == MIN_BACKGROUNDS == model.info["background_items"]
    assert "background sounds added (no command): 20" in summary.lines()
    assert summary.n_frames > zero_summary.n_frames + MIN_BACKGROUNDS * 95
    assert not np.array_equal(model.mixtures.means, zero.mixtures.means)


def test_adaptation_statistics_see_them_in_the_pause(tiny):
    utts, lex, units = tiny
    start, _ = train(utts, lex, config=TrainingConfig(**SMALL, background_share=0.0))
    cfg = dict(passes=1, mean_transform=False, prior_weight=10.0)
    plain, s0 = adapt(utts, lex, start, config=AdaptationConfig(**cfg, background_share=0.0))
    more, s1 = adapt(utts, lex, start, config=AdaptationConfig(**cfg, background_share=0.1, seed=2))
    assert s0.backgrounds == 0 and s1.backgrounds == MIN_BACKGROUNDS and s1.used == s0.used == len(utts)
    assert more.info["background_items"] == MIN_BACKGROUNDS
    # one statistics pass over the same starting model: the pause unit gains exactly the
    # background items' frames (every frame of a pause-only chain is a pause frame), the rest nothing
    added = s1.n_frames - s0.n_frames
    assert s1.frames_per_unit[PAUSE_UNIT] - s0.frames_per_unit[PAUSE_UNIT] == pytest.approx(added, rel=1e-9)
    for name in s0.frames_per_unit:
        if name != PAUSE_UNIT:
            assert s1.frames_per_unit[name] == pytest.approx(s0.frames_per_unit[name], rel=1e-9, abs=1e-9)
    pause_mixtures = start.units.state_mixture[start.units.index(PAUSE_UNIT)]
    pause_mixtures = pause_mixtures[pause_mixtures >= 0]
    assert not np.array_equal(more.mixtures.means[pause_mixtures], plain.mixtures.means[pause_mixtures])


def test_kinds_are_the_ones_asked_for_and_impacts_have_their_level(rng, monkeypatch):
    # our own rule: the kinds given are the only ones drawn; without them the module's
    # BACKGROUND_KINDS as it is when called
    only = plan_backgrounds(50, "ab", seed=2, kinds=("impacts", "hum"))
    assert {p.kind for p in only} == {"impacts", "hum"}
    monkeypatch.setattr(backgrounds, "BACKGROUND_KINDS", ("impacts",))
    assert {p.kind for p in plan_backgrounds(20, "ab", seed=2)} == {"impacts"}
    for recipe in only[:10]:
        x = background_wave(recipe, {}, RATE)
        # uncorrelated signals add in power (textbook arithmetic)
        expected = 10 * np.log10(10 ** (recipe.dbfs / 10) + 10 ** (recipe.floor_dbfs / 10))
        assert rms_dbfs(x) == pytest.approx(expected, abs=0.5)


def _plans_as_before(count, speakers, seed, kinds):
    """The recipes as plan_backgrounds drew them before mixes existed (its loop, copied)."""
    from wordspot.training.backgrounds import BackgroundRecipe

    names = sorted({str(s) for s in speakers})
    plans = []
    for k in range(count):
        rng = np.random.default_rng([seed, 7349, k])
        kind = kinds[int(rng.integers(len(kinds)))]
        length = float(rng.uniform(1.0, 3.0))
        level = float(rng.uniform(-70.0, -30.0))
        mains = 50.0 if rng.random() < 0.5 else 60.0
        floor = float(rng.uniform(-85.0, -75.0)) if kind != "dither" else float("-inf")
        talkers = ()
        if kind == "babble" and names:
            n = int(rng.integers(3, 7))
            talkers = tuple(str(s) for s in rng.choice(names, size=n, replace=len(names) < n))
        plans.append(BackgroundRecipe(k, kind, length, level, mains, floor, talkers, int(rng.integers(2**31))))
    return plans


def test_the_steady_mix_draws_the_recipes_of_before():
    # our own rule: one part each of the five steady kinds is the recipe list of before,
    # and a mix with parts is the list of its kinds repeated (the form earlier dev runs used)
    before = _plans_as_before(300, "abc", 6, ("white", "pink", "hum", "dither", "fan"))
    assert plan_backgrounds(300, "abc", seed=6, kinds=STEADY_MIX) == before
    assert plan_backgrounds(300, "abc", seed=6) == before
    assert mix_draws(STEADY_MIX) == BACKGROUND_KINDS
    bag = BACKGROUND_KINDS + ("impacts",) * 5
    assert plan_backgrounds(300, "abc", seed=6, kinds=IMPACTS_HALF_MIX) == _plans_as_before(300, "abc", 6, bag)


def test_a_mix_is_deterministic_for_a_seed_and_keeps_its_proportions():
    plans = plan_backgrounds(2000, "ab", seed=9, kinds=IMPACTS_HALF_MIX)
    assert plans == plan_backgrounds(2000, "ab", seed=9, kinds=IMPACTS_HALF_MIX)
    assert plans != plan_backgrounds(2000, "ab", seed=10, kinds=IMPACTS_HALF_MIX)
    kinds = [p.kind for p in plans]
    # 5 parts in 10: binomial(2000, 0.5) has a standard deviation of 22 items (textbook arithmetic);
    # 4.5 of them either side
    assert 900 <= kinds.count("impacts") <= 1100
    for steady in BACKGROUND_KINDS:  # one part in 10 each: sd 13 items
        assert 140 <= kinds.count(steady) <= 260
    third = plan_backgrounds(1500, "ab", seed=9, kinds=tuple((k, 2) for k in BACKGROUND_KINDS) + (("impacts", 5),))
    assert 440 <= [p.kind for p in third].count("impacts") <= 560  # 1 in 3: mean 500, sd 18


def test_bad_mixes_are_refused_with_the_field_named():
    assert check_mix(["fan", ("impacts", 3)]) == (("fan", 1), ("impacts", 3))
    for bad in ((), (("fan", 0),), (("fan", 1.5),), (("fan", True),), (("clatter", 1),), ("fan", "fan"), 5,
                (("fan", 1, 2),)):
        with pytest.raises(TrainingError, match="background_kinds"):
            TrainingConfig(background_kinds=bad)
        with pytest.raises(TrainingError, match="background_kinds"):
            AdaptationConfig(background_kinds=bad)


def test_the_default_configs_train_on_the_items_of_before(tiny):
    utts, lex, units = tiny
    # before the mix existed the items came from the module's kinds (no mix handed in)
    old, _ = prepare_items(utts, lex, units, FeatureSettings(), background_share=0.5, seed=2)
    _, old_mix, _, _ = train_items(old, units, frame_rate=100.0,
                                   config=TrainingConfig(**SMALL, background_share=0.5, seed=2))
    model, _ = train(utts, lex, config=TrainingConfig(**SMALL, background_share=0.5, seed=2, scorer=None))
    np.testing.assert_array_equal(model.mixtures.means, old_mix.means)
    np.testing.assert_array_equal(model.mixtures.variances, old_mix.variances)
    assert model.info["background_kinds"] == [list(p) for p in TrainingConfig().background_kinds]
    impacts, _ = prepare_items(utts, lex, units, FeatureSettings(), background_share=0.5, seed=2,
                               background_kinds=(("impacts", 1),))
    assert all(str(it.path).endswith("-impacts") for it in impacts if it.background)
    assert [it.path for it in impacts if not it.background] == [it.path for it in old if not it.background]


def test_the_adaptation_draws_its_items_from_its_mix(tiny, monkeypatch):
    import wordspot.training.adapt as adapt_module

    utts, lex, units = tiny
    start, _ = train(utts, lex, config=TrainingConfig(**SMALL, background_share=0.0, scorer=None))
    made = []

    def recording(*args, **kwargs):  # the real items, their paths noted
        items = backgrounds.background_items(*args, **kwargs)
        made.append([str(it.path) for it in items])
        return items

    monkeypatch.setattr(adapt_module, "background_items", recording)
    cfg = dict(passes=1, mean_transform=False, prior_weight=10.0, seed=1, scorer=None, follow_passes=0,
               background_share=0.25)
    # the defaults: the steady kinds at share 0.1, the items of before
    assert AdaptationConfig().background_kinds == TrainingConfig().background_kinds == STEADY_MIX
    assert AdaptationConfig().background_share == TrainingConfig().background_share == 0.1
    steady, _ = adapt(utts, lex, start, config=AdaptationConfig(**cfg))
    old = plan_backgrounds(MIN_BACKGROUNDS, [u.speaker for u in utts], seed=1)  # the module's kinds
    assert made[-1] == [f"background-{p.number:03d}-{p.kind}" for p in old]
    assert steady.info["background_kinds"] == [list(p) for p in STEADY_MIX]
    # impacts as half of the draws: these recipes, impacts among them
    knocks, _ = adapt(utts, lex, start, config=AdaptationConfig(**cfg, background_kinds=IMPACTS_HALF_MIX))
    assert mix_draws(IMPACTS_HALF_MIX).count("impacts") * 2 == len(mix_draws(IMPACTS_HALF_MIX))
    expected = plan_backgrounds(MIN_BACKGROUNDS, [u.speaker for u in utts], seed=1, kinds=IMPACTS_HALF_MIX)
    assert made[-1] == [f"background-{p.number:03d}-{p.kind}" for p in expected]
    kinds = [p.kind for p in expected]
    assert "impacts" in kinds and set(kinds) - {"impacts"} <= set(BACKGROUND_KINDS) and len(set(kinds)) > 1
    assert knocks.info["background_kinds"] == [list(p) for p in IMPACTS_HALF_MIX]
    again, _ = adapt(utts, lex, start, config=AdaptationConfig(**cfg, background_kinds=IMPACTS_HALF_MIX))
    np.testing.assert_array_equal(again.mixtures.means, knocks.mixtures.means)
    pause = start.units.state_mixture[start.units.index(PAUSE_UNIT)]
    pause = pause[pause >= 0]
    assert not np.allclose(steady.mixtures.means[pause], knocks.mixtures.means[pause])
