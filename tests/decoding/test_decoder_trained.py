"""Recognition with a model trained on part of the demo corpus (slow: trains first).

Run with ``pytest -m slow tests/decoding/test_decoder_trained.py``. The model is trained once per
module on every third demo training recording (mixtures 1, 2, 4).
"""

from __future__ import annotations

import collections
from pathlib import Path

import pytest

from wordspot.corpus import read_manifest
from wordspot.decoding.decoder import DecoderSettings, build_recognizer
from wordspot.audio.features import file_features
from wordspot.language.lexicon import read_lexicon

pytestmark = pytest.mark.slow

REPO = Path(__file__).resolve().parents[2]
RECORDINGS = REPO / "recordings"
LEXICON_DIR = REPO / "lexicon"


@pytest.fixture(scope="module")
def model():
    from wordspot.training.trainer import TrainingConfig, train

    if not (RECORDINGS / "train.csv").exists():
        pytest.skip("demo recordings not generated")
    utts = read_manifest(RECORDINGS / "train.csv")[::3]
    trained, _ = train(utts, read_lexicon(LEXICON_DIR / "bakery.txt"),
                       # The mixtures alone: these tests are about the search over the phone
                       # models; decoding with a state scorer has its own tests
                       # (test_scorer_decoding.py), and fitting one would double the time here.
                       config=TrainingConfig(mixtures=(1, 2, 4), jobs=2, scorer=None), quiet=True)
    return trained


@pytest.fixture(scope="module")
def test_features(model):
    out = {}
    for name in ("test.csv", "test-phrases.csv"):
        out[name] = [(u, file_features(u.path, model.features)) for u in read_manifest(RECORDINGS / name)]
    return out


def test_each_test_word_is_recognised(model, test_features):
    # Every command word is recognised, alone and exactly, in most of its test files
    # (ten per word: five held-out voices x two takes).
    rec = build_recognizer(model)
    right = collections.defaultdict(list)
    for utt, frames in test_features["test.csv"]:
        right[" ".join(utt.words)].append(rec.decode(frames).words == list(utt.words))
    weak = {w: f"{sum(v)}/{len(v)}" for w, v in right.items() if sum(v) <= len(v) / 2}
    assert not weak, f"words recognised in half their files or fewer: {weak}"
    total = sum(sum(v) for v in right.values()) / sum(len(v) for v in right.values())
    assert total >= 0.75


def test_phrases_have_the_right_length_and_ordered_times(model, test_features):
    rec = build_recognizer(model)
    n_right = 0
    phrases = test_features["test-phrases.csv"]
    for utt, frames in phrases:
        r = rec.decode(frames)
        n_right += len(r.words) == len(utt.words)
        ends = [(s.start, s.end) for s in r.segments]
        for (a0, a1), (b0, b1) in zip(ends[:-1], ends[1:]):
            assert a0 < a1 <= b0 < b1  # words in order, no overlap
        for s in r.segments:
            assert 0.0 <= s.start and s.end <= r.duration + 1e-9
            assert 0.0 <= s.confidence <= 1.0
    assert n_right / len(phrases) >= 0.75


def test_default_beam_equals_unpruned(model, test_features):
    # The default beams are meant to cost no accuracy: on the demo test set they give the
    # unpruned result for at least 99% of the files
    # (docs/experiments/2026-12-01-decoder-settings.md).
    pruned = build_recognizer(model)
    exact = build_recognizer(model, settings=DecoderSettings.unpruned())
    files = test_features["test.csv"] + test_features["test-phrases.csv"]
    same = 0
    for _, frames in files:
        a, b = pruned.decode(frames), exact.decode(frames)
        same += a.words == b.words and (a.score == pytest.approx(b.score, rel=1e-9) or not a.words)
    assert same / len(files) >= 0.99


def test_single_word_setting_gives_one_word(model, test_features):
    rec = build_recognizer(model, settings=DecoderSettings(single_word=True))
    free = build_recognizer(model)
    n_better = n_worse = 0
    for utt, frames in test_features["test.csv"]:
        one, many = rec.decode(frames), free.decode(frames)
        assert len(one.words) <= 1
        n_better += one.words == list(utt.words) and many.words != list(utt.words)
        n_worse += one.words != list(utt.words) and many.words == list(utt.words)
    # Isolated commands: knowing there is one word can only help on single-word files
    # (each Viterbi choice within fewer paths; a loss would need the empty result).
    assert n_better >= n_worse
