"""The statistics pass: the compiled path equals the plain one bit for bit on real recordings."""

from __future__ import annotations

import numpy as np
import pytest

from conftest import LEXICON_DIR, RECORDINGS
from wordspot.corpus import read_manifest
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.starters import starter_path
from wordspot.acoustic.gmm import scoring_matrix
from wordspot.training.adapt import _chunks, align_for_scorer, held_out_fit, vocabulary_for
from wordspot.training.frame_labels import align_chunk, align_one
from wordspot.training.data import prepare_items
from wordspot.training.trainer import pass_loglik, pass_statistics

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


def test_forward_only_loglik_equals_the_pass_bit_for_bit(starter_items):
    # the held-out fit reads the log-likelihoods alone: the forward pass gives them unchanged
    start, items = starter_items
    full = pass_statistics(_chunks(items), start.mixtures, start.units, prune=1e-4)
    assert np.isfinite(full.loglik).all()
    np.testing.assert_array_equal(pass_loglik(_chunks(items), start.mixtures, start.units), full.loglik)
    np.testing.assert_array_equal(pass_loglik(_chunks(items), start.mixtures, start.units, jobs=2), full.loglik)
    # a chain that cannot explain the frames (too few of them) is -inf in both
    short = [(items[0].frames[:2], items[0].graph)]
    assert pass_loglik([short], start.mixtures, start.units)[0] == -np.inf
    assert pass_statistics([short], start.mixtures, start.units).loglik[0] == -np.inf


def test_held_out_fit_is_the_frame_average_of_the_pass(starter_items):
    start, items = starter_items
    full = pass_statistics(_chunks(items), start.mixtures, start.units, prune=1e-4)
    expected = float(full.loglik.sum() / sum(it.frames.shape[0] for it in items))
    assert held_out_fit(items, start.units, start.mixtures, prune=1e-4) == expected


def test_alignment_for_the_scorer_equals_one_by_one_alignment(starter_items):
    # each chain's columns made once, no component posteriors, work in two processes:
    # the same labels as align_one, recording by recording
    start, items = starter_items
    scoring = scoring_matrix(start.mixtures)
    expected = [align_one(it.frames, it.graph, scoring, start.mixtures.n_components) for it in items]
    got = align_chunk([(it.frames, it.graph) for it in items], scoring, start.mixtures.n_components)
    assert [s for s, _ in got] == [s for s, _ in expected]
    for (_, a), (_, b) in zip(got, expected):
        np.testing.assert_array_equal(a, b)
    for jobs in (1, 2):
        frames, labels = align_for_scorer(items, start.mixtures, jobs=jobs)
        assert len(labels) == sum(np.isfinite(s) for s, _ in expected) > 16
        for y, (_, b) in zip(labels, [e for e in expected if np.isfinite(e[0])]):
            np.testing.assert_array_equal(y, b)
