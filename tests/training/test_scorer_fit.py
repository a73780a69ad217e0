"""Fitting the state scorer: determinism, every class an output, the prior, the checks."""

import numpy as np
import pytest

from wordspot.errors import TrainingError
from wordspot.training.scorer_fit import (UNSEEN_LOGIT, ScorerConfig, fit_scorer, fit_scorer_with_report,
                                          held_out_split, label_log_prior)

SMALL = dict(hidden=(16,), context=1, max_epochs=6, batch_size=64, learning_rate=0.01)


def labelled(rng, n_utts=24, length=40, n_classes=5, dim=4, unseen=()):
    """Frames near a class centre; runs of a few frames per label, as an alignment gives."""
    centres = rng.normal(scale=3.0, size=(n_classes, dim))
    seen = [k for k in range(n_classes) if k not in unseen]
    frames, labels = [], []
    for _ in range(n_utts):
        y = np.repeat(rng.choice(seen, size=length // 4), 4)
        frames.append((centres[y] + rng.normal(size=(y.size, dim))).astype(np.float32))
        labels.append(y)
    return frames, labels


def test_same_seed_same_weights(rng):
    frames, labels = labelled(rng)
    a = fit_scorer(frames, labels, 5, ScorerConfig(**SMALL, seed=3))
    b = fit_scorer(frames, labels, 5, ScorerConfig(**SMALL, seed=3))
    assert a.same_as(b)
    c = fit_scorer(frames, labels, 5, ScorerConfig(**SMALL, seed=4))
    assert not a.same_as(c)


def test_learns_the_classes_and_keeps_the_best_epoch(rng):
    frames, labels = labelled(rng)
    scorer, report = fit_scorer_with_report(frames[:20], labels[:20], 5, ScorerConfig(**SMALL, held_out_share=0.2))
    assert report.held_out_frames == 4 * 40 and report.train_frames == 16 * 40
    assert report.best_epoch == int(np.argmin(report.held_out_loss))
    assert report.held_out_accuracy > 0.9
    hits = [np.mean(np.argmax(scorer.log_posteriors(x), axis=1) == y) for x, y in zip(frames[20:], labels[20:])]
    assert np.mean(hits) > 0.9
    assert scorer.context == 1 and scorer.frame_dim == 4 and scorer.hidden_sizes == (16,)


def test_copies_of_one_recording_are_held_out_together(rng):
    # 10 recordings, each with two copies (e.g. noisy, played faster): 30 items in 10 groups
    groups = [f"rec{k}" for k in range(10)] * 3
    held, train = held_out_split(30, 0.2, np.random.default_rng(5), groups)
    assert held.size == 6 and train.size == 24 and np.intersect1d(held, train).size == 0
    assert {groups[i] for i in held}.isdisjoint(groups[i] for i in train)
    assert len({groups[i] for i in held}) == 2
    # without groups: the split of the items themselves, as before
    held, _ = held_out_split(30, 0.2, np.random.default_rng(5))
    np.testing.assert_array_equal(held, np.sort(np.random.default_rng(5).permutation(30)[:6]))
    frames, labels = labelled(rng, n_utts=12)
    a = fit_scorer(frames * 2, labels * 2, 5, ScorerConfig(**SMALL, seed=1), groups=list(range(12)) * 2)
    b = fit_scorer(frames * 2, labels * 2, 5, ScorerConfig(**SMALL, seed=1), groups=list(range(12)) * 2)
    assert a.same_as(b)
    _, report = fit_scorer_with_report(frames * 2, labels * 2, 5, ScorerConfig(**SMALL, held_out_share=0.25),
                                       groups=list(range(12)) * 2)
    assert report.held_out_frames == 6 * 40  # 3 recordings, both copies
    with pytest.raises(TrainingError, match="groups"):
        fit_scorer(frames, labels, 5, ScorerConfig(**SMALL), groups=[0, 1])


def test_every_class_gets_a_column(rng):
    frames, labels = labelled(rng, n_classes=6, unseen=(2, 5))
    scorer = fit_scorer(frames, labels, 6, ScorerConfig(**SMALL))
    lp = scorer.log_posteriors(np.concatenate(frames))
    assert lp.shape[1] == 6
    assert np.all(lp[:, [2, 5]] < UNSEEN_LOGIT / 2)  # about zero probability whatever the frame
    # scaled: far below every seen class, although its prior is floored
    sll = scorer.scaled_log_likelihoods(np.concatenate(frames), 1.0)
    assert np.all(sll[:, [2, 5]].max(axis=1) < sll[:, [0, 1, 3, 4]].min(axis=1) - 1000)
    assert np.all(np.isfinite(scorer.log_prior))


def test_two_classes(rng):
    # scikit-learn fits one logistic output for two classes; the scorer still has two columns
    frames, labels = labelled(rng, n_classes=2)
    scorer = fit_scorer(frames, labels, 2, ScorerConfig(**SMALL))
    lp = scorer.log_posteriors(frames[0])
    assert lp.shape == (40, 2)
    np.testing.assert_allclose(np.exp(lp.astype(np.float64)).sum(axis=1), 1.0, atol=1e-5)
    assert np.mean(np.argmax(lp, axis=1) == labels[0]) > 0.9


def test_log_prior_from_label_counts():
    labels = [np.array([0, 0, 1]), np.array([0, 3])]
    # counts 3, 1, 0, 1 plus one each: 4, 2, 1, 2 over 9
    np.testing.assert_allclose(label_log_prior(labels, 4), np.log(np.array([4, 2, 1, 2]) / 9))


def test_frames_are_subsampled(rng):
    frames, labels = labelled(rng, n_utts=10)
    _, report = fit_scorer_with_report(frames, labels, 5, ScorerConfig(**SMALL, max_frames=100, held_out_share=0.0))
    assert report.train_frames == 100 and report.held_out_frames == 0
    assert len(report.train_loss) == SMALL["max_epochs"]  # no early stopping without held-out utterances


def test_bad_input_is_named(rng):
    frames, labels = labelled(rng, n_utts=3)
    with pytest.raises(TrainingError, match="labels outside 0..3"):
        fit_scorer(frames, labels, 4, ScorerConfig(**SMALL))
    with pytest.raises(TrainingError, match=r"utterance 1: frames \(40, 4\) and labels \(39,\)"):
        fit_scorer(frames, [labels[0], labels[1][:-1], labels[2]], 5, ScorerConfig(**SMALL))
    with pytest.raises(TrainingError, match="no labelled frames"):
        fit_scorer([np.zeros((0, 4))], [np.zeros(0, int)], 5, ScorerConfig(**SMALL))
    with pytest.raises(TrainingError, match="hidden sizes"):
        ScorerConfig(hidden=(0,))
    with pytest.raises(TrainingError, match="held_out_share"):
        ScorerConfig(held_out_share=0.9)


def test_the_scorer_records_its_inputs(rng):
    frames, labels = labelled(rng, n_utts=6)
    quick = {**SMALL, "max_epochs": 1}
    assert fit_scorer(frames, labels, 5, ScorerConfig(**quick)).inputs == "cepstra"
    a = fit_scorer(frames, labels, 5, ScorerConfig(**quick, inputs="log-mel"))
    b = fit_scorer(frames, labels, 5, ScorerConfig(**quick))
    assert a.inputs == "log-mel" and not a.same_as(b)  # the same weights, another kind of input
    with pytest.raises(TrainingError, match="scorer inputs must be one of cepstra, log-mel, cepstra\\+log-mel; got 'mfcc'"):
        ScorerConfig(inputs="mfcc")
