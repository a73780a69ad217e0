"""recordings/build_starters.py's scorer data: varied copies aligned, cached and told apart."""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

from tone_corpus import make_corpus
from wordspot.corpus import read_manifest
from wordspot.language.lexicon import read_lexicon
from wordspot.training.trainer import TrainingConfig, train

SCRIPT = Path(__file__).resolve().parents[2] / "recordings" / "build_starters.py"


def _script():
    name = "build_starters_under_test"
    if name not in sys.modules:
        spec = importlib.util.spec_from_file_location(name, SCRIPT)
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module  # dataclasses look their module up while the file runs
        spec.loader.exec_module(module)
    return sys.modules[name]


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    folder = tmp_path_factory.mktemp("tones")
    manifest, lexicon = make_corpus(folder, np.random.default_rng(20261203), n_utterances=8)
    model, _ = train(read_manifest(manifest), read_lexicon(lexicon),
                     config=TrainingConfig(mixtures=(1,), first_passes=2, passes_per_split=1, speed_factors=(1.0,),
                                           noise_copies=0, background_share=0.0))
    return model, manifest


def test_scorer_data_kinds_and_cache(tiny, tmp_path):
    build = _script()
    model, manifest = tiny
    kw = dict(jobs=1, background_share=0.5, seed=3, quiet=True, cache=tmp_path, noise_copies=1, speeds=(0.9, 1.1))
    got = build.aligned(model, [manifest], **kw)
    n = len(read_manifest(manifest))
    assert got.kinds[:4 * n] == ["clean"] * n + ["speed 0.9"] * n + ["speed 1.1"] * n + ["noisy"] * n
    assert set(got.kinds[4 * n:]) == {"background"}
    # every copy names its recording; a noisy copy has its recording's labels, a speed copy its own
    assert got.paths[:n] == got.paths[n:2 * n] == got.paths[3 * n:4 * n]
    for k in range(n):
        np.testing.assert_array_equal(got.labels[k], got.labels[3 * n + k])
        assert len(got.labels[n + k]) > len(got.labels[k]) > len(got.labels[2 * n + k])
    speed = got.only(["speed"])
    assert speed.kinds == ["speed 0.9"] * n + ["speed 1.1"] * n
    assert got.only(["clean", "background"]).kinds == ["clean"] * n + got.kinds[4 * n:]
    # the cache gives back the same items, under a name that says what was added
    files = sorted(p.name for p in tmp_path.iterdir())
    assert files == [f"train-bg0.5-seed3-noise1x0-25dB-speed0.9,1.1-{model.features.sample_rate}.npz"]
    again = build.aligned(model, [manifest], **kw)
    assert again.kinds == got.kinds and again.paths == got.paths and again.skipped == got.skipped == 0
    for a, b, c, d in zip(got.frames, again.frames, got.labels, again.labels):
        np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(c, d)
    # another seed draws other noisy copies and background items: its own file, not this one's
    other = build.aligned(model, [manifest], **{**kw, "seed": 4})
    assert len(list(tmp_path.iterdir())) == 2
    assert not all(np.array_equal(a, b) for a, b in zip(got.frames[3 * n:], other.frames[3 * n:]))


def _pause_mixtures(model) -> set:
    from wordspot.acoustic.units import PAUSE_UNIT

    u = model.units.index(PAUSE_UNIT)
    return set(model.units.state_mixture[u, : model.units.n_states[u]].tolist())


def test_impact_items_are_pause_frames_drawn_from_their_seed(tiny):
    from wordspot.training.backgrounds import background_count

    build = _script()
    model, _ = tiny
    got = build.impact_aligned(model, 60, 0.5, seed=3, jobs=1, quiet=True)
    assert len(got.labels) == len(got.frames) == background_count(60, 0.5) == 30
    assert got.kinds == ["impacts"] * 30 and got.skipped == 0
    assert all(p.endswith("-impacts") for p in got.paths) and len(set(got.paths)) == 30
    # labelled with the pause unit's states alone, as the empty transcript's chain has nothing else
    assert set(np.concatenate(got.labels).tolist()) <= _pause_mixtures(model)
    assert all(f.shape == (len(y), model.features.dim) for f, y in zip(got.frames, got.labels))
    again = build.impact_aligned(model, 60, 0.5, seed=3, jobs=2, quiet=True)
    for a, b in zip(got.frames, again.frames):
        np.testing.assert_array_equal(a, b)
    other = build.impact_aligned(model, 60, 0.5, seed=4, jobs=1, quiet=True)
    assert not np.array_equal(got.frames[0][:5], other.frames[0][:5])
    assert build.impact_aligned(model, 60, 0.0, seed=3, jobs=1, quiet=True).labels == []
    # at least MIN_BACKGROUNDS when the share is above zero
    assert len(build.impact_aligned(model, 8, 0.1, seed=3, jobs=1, quiet=True).labels) == 20


def test_scorer_step_adds_the_impact_items_and_records_their_share(tiny, tmp_path, monkeypatch):
    from wordspot.model import load_model, save_model
    from wordspot.training.scorer_fit import ScorerConfig

    build = _script()
    model, manifest = tiny
    monkeypatch.setattr(build, "DEV", tmp_path / "no-dev.csv")  # no dev figures for the tone corpus
    config = ScorerConfig(hidden=(8,), context=1, max_frames=5000, max_epochs=2, seed=1)
    made = {}
    for share in (0.0, 0.5):
        path = save_model(model, tmp_path / f"starter-{share}.model")
        build.add_scorer(path, 1, True, [manifest], config, noise_copies=0, speeds=(), impact_share=share)
        made[share] = load_model(path)
    none, some = made[0.0].info["scorer"], made[0.5].info["scorer"]
    assert (none["impact_share"], none["impact_items"]) == (0.0, 0)
    # 8 recordings: round(0.5 * 8) = 4, raised to MIN_BACKGROUNDS
    assert (some["impact_share"], some["impact_items"]) == (0.5, 20)
    assert "impacts alone, share 0.5" in some["labels"]
    assert made[0.5].scorer is not None and not made[0.5].scorer.same_as(made[0.0].scorer)
