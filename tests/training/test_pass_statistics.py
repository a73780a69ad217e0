"""The statistics pass: the compiled path equals the plain one bit for bit on real recordings."""

from __future__ import annotations

import numpy as np
import pytest

from conftest import LEXICON_DIR, RECORDINGS
from wordspot.corpus import read_manifest
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.starters import starter_path
from wordspot.training.adapt import _chunks, vocabulary_for
from wordspot.training.data import prepare_items
from wordspot.training.trainer import pass_statistics

pytestmark = pytest.mark.skipif(not (RECORDINGS / "train.csv").is_file() or not starter_path("starter").is_file(),
                                reason="demo recordings or the starter model not present")


@pytest.fixture(scope="module")
def starter_items():
    start = load_model("starter")
    utts = read_manifest(RECORDINGS / "train.csv")[::40]  # ~30 recordings, several transcripts and voices
    lexicon, _ = vocabulary_for({w for u in utts for w in u.words}, read_lexicon(LEXICON_DIR / "bakery.txt"),
                                start.lexicon)
    items, _ = prepare_items(utts, lexicon, start.units, start.features)
    return start, sorted(items, key=lambda it: it.words)


@pytest.mark.parametrize("prune", [0.0, 1e-4])
def test_pass_equals_the_plain_pass_bit_for_bit(starter_items, prune):
    start, items = starter_items
    assert len(items) > 16  # more than one chunk
    fast = pass_statistics(_chunks(items), start.mixtures, start.units, prune=prune)
    plain = pass_statistics(_chunks(items), start.mixtures, start.units, prune=prune, reference=True)
    for name in ("occupancy", "first", "second"):
        np.testing.assert_array_equal(getattr(fast.stats, name), getattr(plain.stats, name))
    for name in ("trans_counts", "loglik", "unit_frames"):
        np.testing.assert_array_equal(getattr(fast, name), getattr(plain, name))
    assert np.isfinite(fast.loglik).all() and fast.stats.occupancy.sum() > 1000


def test_pass_in_two_processes_equals_one(starter_items):
    start, items = starter_items
    one = pass_statistics(_chunks(items), start.mixtures, start.units, prune=1e-4)
    two = pass_statistics(_chunks(items), start.mixtures, start.units, prune=1e-4, jobs=2)
    for name in ("occupancy", "first", "second"):
        np.testing.assert_array_equal(getattr(one.stats, name), getattr(two.stats, name))
    np.testing.assert_array_equal(one.trans_counts, two.trans_counts)
