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
    assert files == [f"train-noise1x0-25dB-speed0.9,1.1-{model.features.sample_rate}.npz"]
    again = build.aligned(model, [manifest], **kw)
    assert again.kinds == got.kinds and again.paths == got.paths and again.skipped == got.skipped == 0
    for a, b, c, d in zip(got.frames, again.frames, got.labels, again.labels):
        np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(c, d)
