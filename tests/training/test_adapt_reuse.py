"""The training on every recording reusing the first training's pass statistics, and the
strength chosen with fewer noisy copies."""

from dataclasses import replace

import numpy as np
import pytest

import tone_corpus
from tone_corpus import make_corpus
from wordspot.acoustic.gmm import MixtureStats
from wordspot.corpus import read_manifest
from wordspot.errors import TrainingError
from wordspot.language.lexicon import Lexicon, read_lexicon
from wordspot.training.adapt import AdaptationConfig, PassTotals, adapt, adapting, reusable, split_by_speaker
from wordspot.training.pronunciations import LearningConfig
from wordspot.training.trainer import TrainingConfig, train

SMALL = TrainingConfig(mixtures=(1, 2), first_passes=3, passes_per_split=2, speed_factors=(1.0,), noise_copies=0)
QUICK = dict(scorer=None, background_share=0.0, mean_transform=False, min_held_out_frames=200,
             speakers_to_hold_out=100, follow_speeds=(), follow_noise_copies=0)


@pytest.fixture(scope="module")
def shifted(tmp_path_factory):
    """A model of one tone corpus and recordings of tones 12% higher (three speakers)."""
    rng = np.random.default_rng(20261203)
    folder = tmp_path_factory.mktemp("reuse")
    manifest, lex_path = make_corpus(folder / "a", rng, n_utterances=30)
    lex = read_lexicon(lex_path)
    model, _ = train(read_manifest(manifest), lex, config=SMALL)
    with tone_corpus.tones_scaled(1.12):
        many, _ = make_corpus(folder / "b", rng, n_utterances=60)
    return model, lex, read_manifest(many)


def _arrays(model):
    return [model.mixtures.weights, model.mixtures.means, model.mixtures.variances]


def test_pass_totals_add_up():
    rng = np.random.default_rng(0)

    def totals(ll, frames):
        return PassTotals(MixtureStats(rng.random((3, 2)), rng.random((3, 2, 4)), rng.random((3, 2, 4))),
                          ll, frames, rng.random(5), True)

    a, b = totals(-100.0, 10), totals(-300.0, 30)
    both = a.plus(b)
    np.testing.assert_array_equal(both.stats.first, a.stats.first + b.stats.first)
    np.testing.assert_array_equal(both.unit_frames, a.unit_frames + b.unit_frames)
    assert both.frames == 40 and both.fit == -10.0  # -400 over 40 frames
    none = PassTotals(a.stats, 0.0, 5, a.unit_frames, False)
    assert none.fit == float("-inf") and none.plus(a).fit == a.loglik / 15


def test_with_one_pass_under_the_starting_model_reusing_gives_the_model_of_adapting_everything(shifted):
    # One MAP pass whose statistics are all taken under the starting model: the first
    # training's sums plus the new recordings' are the sums over every recording, in another
    # order, so the model is the one adapted on every recording afresh up to rounding.
    start, lex, many = shifted
    cfg = AdaptationConfig(**QUICK, strength=0, reuse_first_passes=True)
    fit = adapting(start, lex, config=cfg)
    first, _ = fit(many[:40], held_out=many[40:50])
    reused, summary = fit(many[:50])
    fresh, fresh_summary = adapt(many[:50], lex, start, config=AdaptationConfig(**QUICK, strength=0))
    for a, b in zip(_arrays(reused), _arrays(fresh)):
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9)
    assert reused.info["utterances"] == fresh.info["utterances"] == 50
    assert reused.info["frames"] == fresh.info["frames"]
    assert summary.passes[0][1] == pytest.approx(fresh_summary.passes[0][1], rel=1e-12)
    assert not np.allclose(first.mixtures.means, fresh.mixtures.means)  # the ten new recordings count


def test_reusing_passes_over_the_new_recordings_only_and_lands_near_adapting_everything(shifted, monkeypatch):
    from wordspot.training import adapt as adapt_module

    start, lex, many = shifted
    seen = []
    real = adapt_module.adapt_items

    def counting(items, *args, copies=None, **kwargs):
        seen.append((len([it for it in items if not it.background]), len(copies or [])))
        return real(items, *args, copies=copies, **kwargs)

    monkeypatch.setattr(adapt_module, "adapt_items", counting)
    cfg = AdaptationConfig(**{**QUICK, "mean_transform": True, "follow_speeds": (0.9,)}, strength=2)
    fit = adapting(start, lex, config=replace(cfg, reuse_first_passes=True))
    first, _ = fit(many[:40], held_out=many[40:50])
    reused, summary = fit(many[:50])
    assert seen == [(40, 40), (10, 10)]  # the second training: the ten new recordings and their speed copies
    seen.clear()
    fresh, fresh_summary = adapt(many[:50], lex, start, config=cfg)
    assert seen == [(50, 50)]
    assert len(summary.passes) == len(fresh_summary.passes) == 4  # shift, MAP, two following passes
    # the first pass (under the starting model) is the same sums; the later ones count the
    # forty under the first training's models, so the model is near the fresh one, nearer
    # than the first training's
    assert summary.passes[0][1] == pytest.approx(fresh_summary.passes[0][1], rel=1e-12)
    assert summary.passes[1][1] != fresh_summary.passes[1][1]
    off = np.abs(reused.mixtures.means - fresh.mixtures.means).max()
    assert 0 < off < np.abs(first.mixtures.means - fresh.mixtures.means).max()
    assert reused.info["strength"]["follow_passes"] == 2 and reused.info["utterances"] == 50


def test_reusing_is_seeded_and_deterministic(shifted):
    start, lex, many = shifted
    cfg = AdaptationConfig(**{**QUICK, "follow_noise_copies": 1, "background_share": 0.2}, strength=1,
                           reuse_first_passes=True)
    got = []
    for _ in range(2):
        fit = adapting(start, lex, config=cfg)
        fit(many[:40], held_out=many[40:50])
        got.append(fit(many[:50])[0])
    for a, b in zip(_arrays(got[0]), _arrays(got[1])):
        np.testing.assert_array_equal(a, b)
    # the background items are the first training's (in its statistics), not made again
    assert got[0].info["background_items"] == 20


def test_without_the_option_the_training_on_everything_adapts_afresh(shifted):
    start, lex, many = shifted
    cfg = AdaptationConfig(**QUICK, strength=1)
    fit = adapting(start, lex, config=cfg)
    fit(many[:40], held_out=many[40:50])
    again, _ = fit(many[:50])
    fresh, _ = adapt(many[:50], lex, start, config=cfg)
    for a, b in zip(_arrays(again), _arrays(fresh)):
        np.testing.assert_array_equal(a, b)


def test_reuse_is_refused_where_the_passes_do_not_fit(shifted):
    start, lex, many = shifted
    record = {}
    cfg = AdaptationConfig(**QUICK, strength=1)
    adapt(many[:40], lex, start, config=cfg, held_out=many[40:50], record=record)
    assert record["strength"] == 1 and len(record["passes"]) == 2 and len(record["paths"]) == 40
    assert reusable(record, many[:50], lex, cfg)
    assert not reusable(record, many[:50], lex, AdaptationConfig(**QUICK, strength=2))  # another strength
    assert not reusable(record, many[:50], lex, AdaptationConfig(**QUICK))  # strength not fixed
    assert not reusable(record, many[:50], lex, cfg, held_out=many[50:])  # a choosing run
    assert not reusable(record, many[:40], lex, cfg)  # nothing new
    assert not reusable(record, many[5:50], lex, cfg)  # some of its recordings are gone
    other = Lexicon({w: lex.pronunciations(w) for w in lex.words[:-1]})
    assert not reusable(record, many[:50], other, cfg)  # another lexicon
    learning = AdaptationConfig(**QUICK, strength=1, pronunciations=LearningConfig(enabled=True))
    assert not reusable(record, many[:50], lex, learning)
    # refused, the training adapts afresh
    a, _ = adapt(many[5:50], lex, start, config=cfg, base=record)
    b, _ = adapt(many[5:50], lex, start, config=cfg)
    for x, y in zip(_arrays(a), _arrays(b)):
        np.testing.assert_array_equal(x, y)


def test_the_strength_can_be_chosen_with_fewer_noisy_copies(shifted, monkeypatch):
    from wordspot.training import adapt as adapt_module

    start, lex, many = shifted
    seen = []
    real = adapt_module._choose_on_split

    def watching(items, used, copies, *args, **kwargs):
        seen.append([(it.path, it.frames.copy()) for it in copies])
        return real(items, used, copies, *args, **kwargs)

    monkeypatch.setattr(adapt_module, "_choose_on_split", watching)
    base = {**QUICK, "speakers_to_hold_out": 3, "follow_noise_copies": 2}
    two, _ = adapt(many[:50], lex, start, config=AdaptationConfig(**base, choose_noise_copies=None),
                   held_out=many[50:])
    one, _ = adapt(many[:50], lex, start, config=AdaptationConfig(**base), held_out=many[50:])  # the default: 1
    all_copies, first_copies = seen
    assert len(all_copies) == 2 * 50 and len(first_copies) == 50
    # the first noisy copy of each recording, the same as when both are used (copy-major)
    for (p, a), (q, b) in zip(first_copies, all_copies[:50]):
        assert p == q
        np.testing.assert_array_equal(a, b)
    if one.info["strength"]["follow_passes"] == two.info["strength"]["follow_passes"]:
        # the same strength: the model is adapted with every copy all the same
        for a, b in zip(_arrays(one), _arrays(two)):
            np.testing.assert_array_equal(a, b)
    with pytest.raises(TrainingError, match="choose_noise_copies"):
        AdaptationConfig(choose_noise_copies=-1)
    held = split_by_speaker(many[:50], 0.25, 0)
    assert one.info["strength"]["held_out_recordings"] == len(held)
    # a choosing model kept for the calibration is adapted with every copy, as before
    seen.clear()
    adapt(many[:50], lex, start, config=AdaptationConfig(**base, calibrate_choosing_model=True), held_out=many[50:])
    assert len(seen[0]) == 2 * 50


def test_the_model_does_not_depend_on_how_the_manifest_is_named(tmp_path, monkeypatch):
    # The noisy copies are seeded by each recording's file, folder name and words, not by
    # where the folder is: the manifest named relatively from its parent folder and by its
    # absolute path give the same model bit for bit (before, the whole path was hashed and
    # the two differed).
    rng = np.random.default_rng(20261204)
    manifest, lex_path = make_corpus(tmp_path / "takes", rng, n_utterances=24)
    lex = read_lexicon(lex_path)
    absolute = read_manifest(manifest)
    start, _ = train(absolute, lex, config=SMALL)
    cfg = AdaptationConfig(**{**QUICK, "follow_noise_copies": 1}, strength=1, follow_noise_snr=(5.0, 15.0))
    monkeypatch.chdir(tmp_path)
    relative = read_manifest("takes/train.csv")
    assert str(relative[0].path) != str(absolute[0].path)  # the same file named two ways
    a, _ = adapt(absolute, lex, start, config=cfg)
    b, _ = adapt(relative, lex, start, config=cfg)
    for x, y in zip(_arrays(a), _arrays(b)):
        np.testing.assert_array_equal(x, y)
