"""The state scorer's forward pass: window stacking, posteriors, scaled likelihoods."""

import warnings

import numpy as np
import pytest

from wordspot.acoustic.scorer import StateScorer, stack_context
from wordspot.audio.workspace import work_array


def naive_stack(frames, c):
    """Row t: frames t-c .. t+c, indices clipped to the first and last frame."""
    n, d = frames.shape
    out = np.zeros((n, d * (2 * c + 1)), dtype=np.float32)
    for t in range(n):
        for k in range(2 * c + 1):
            j = min(max(t + k - c, 0), n - 1)
            out[t, k * d:(k + 1) * d] = frames[j]
    return out


@pytest.mark.parametrize("n, c", [(20, 0), (20, 1), (20, 5), (3, 5), (1, 2), (11, 5)])
def test_stack_context_matches_a_plain_loop(rng, n, c):
    frames = rng.normal(size=(n, 4)).astype(np.float32)
    got = stack_context(frames, c)
    assert got.dtype == np.float32 and got.shape == (n, 4 * (2 * c + 1))
    np.testing.assert_array_equal(got, naive_stack(frames, c))


def random_scorer(rng, d=3, c=2, hidden=(7, 5), p=6):
    sizes = [d * (2 * c + 1), *hidden, p]
    weights = tuple(rng.normal(size=(a, b)) / np.sqrt(a) for a, b in zip(sizes[:-1], sizes[1:]))
    biases = tuple(rng.normal(size=b) for b in sizes[1:])
    prior = rng.uniform(0.5, 2.0, p)
    return StateScorer(c, rng.normal(size=sizes[0]), rng.uniform(0.5, 2.0, sizes[0]), weights, biases,
                       np.log(prior / prior.sum()))


def _scikit_learn_pair(rng):
    """A fitted scikit-learn MLPClassifier with random weights, our StateScorer with the same
    weights, 30 frames and their stacked, standardised input: ``(clf, scorer, frames, stacked)``."""
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier

    d, c, p = 3, 2, 5
    x = rng.normal(size=(40, d * (2 * c + 1)))
    clf = MLPClassifier(hidden_layer_sizes=(8, 6), activation="relu", max_iter=3, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        clf.fit(x, np.arange(40) % p)
    # make the weights far from their starting values so the comparison means something
    clf.coefs_ = [rng.normal(size=w.shape) for w in clf.coefs_]
    clf.intercepts_ = [rng.normal(size=b.shape) for b in clf.intercepts_]
    mean, scale = rng.normal(size=x.shape[1]), rng.uniform(0.5, 2.0, x.shape[1])
    scorer = StateScorer(c, mean, scale, tuple(clf.coefs_), tuple(clf.intercepts_), np.full(p, -np.log(p)))
    frames = rng.normal(size=(30, d)).astype(np.float32)
    stacked = (stack_context(frames, c).astype(np.float64) - mean.astype(np.float32)) / scale.astype(np.float32)
    return clf, scorer, frames, stacked


def test_forward_pass_equals_scikit_learn(rng):
    # Reference library: scikit-learn's MLPClassifier.predict_proba with the same weights
    # (ReLU hidden layers, softmax output), on the stacked and standardised input.
    clf, scorer, frames, stacked = _scikit_learn_pair(rng)
    expected = clf.predict_proba(stacked)
    got = np.exp(scorer.log_posteriors(frames).astype(np.float64))
    np.testing.assert_allclose(got, expected, rtol=2e-4, atol=1e-6)
    assert not np.allclose(expected, expected.mean(axis=0))  # the frames are told apart


def test_posteriors_sum_to_one(rng):
    scorer = random_scorer(rng)
    lp = scorer.log_posteriors(rng.normal(size=(50, 3)) * 5)
    assert lp.dtype == np.float32 and lp.shape == (50, 6)
    assert np.all(lp <= 0)
    np.testing.assert_allclose(np.exp(lp.astype(np.float64)).sum(axis=1), 1.0, atol=1e-5)


def test_scaled_log_likelihoods(rng):
    scorer = random_scorer(rng)
    frames = rng.normal(size=(25, 3)).astype(np.float32)
    lp = scorer.log_posteriors(frames)
    np.testing.assert_allclose(scorer.scaled_log_likelihoods(frames, 0.5), 0.5 * (lp - scorer.log_prior),
                               rtol=1e-6, atol=1e-6)
    cols = np.array([4, 0, 2])
    np.testing.assert_allclose(scorer.scaled_log_likelihoods(frames, 2.0, columns=cols),
                               2.0 * (lp[:, cols] - scorer.log_prior[cols]), rtol=1e-6, atol=1e-5)


def test_work_arrays_give_the_same_numbers(rng):
    scorer = random_scorer(rng)
    for n in (40, 9, 40):  # reuse, shrink and grow the same scratch arrays
        frames = rng.normal(size=(n, 3)).astype(np.float32)
        a = scorer.log_posteriors(frames)
        b = scorer.log_posteriors(frames, work=work_array)
        np.testing.assert_array_equal(a, b)


def test_short_and_empty_inputs(rng):
    scorer = random_scorer(rng, c=5)
    assert scorer.log_posteriors(np.zeros((0, 3))).shape == (0, 6)
    one = rng.normal(size=(1, 3))
    # a single frame is its own window on every side
    np.testing.assert_allclose(scorer.log_posteriors(one), scorer.log_posteriors(np.repeat(one, 3, axis=0))[1:2],
                               rtol=1e-6, atol=1e-6)
    with pytest.raises(ValueError, match=r"frames must have shape \(T, 3\)"):
        scorer.log_posteriors(np.zeros((4, 5)))


def test_parameters_are_checked(rng):
    good = random_scorer(rng)
    kw = dict(context=good.context, input_mean=good.input_mean, input_scale=good.input_scale,
              weights=good.weights, biases=good.biases, log_prior=good.log_prior)
    with pytest.raises(ValueError, match="layer 1"):
        StateScorer(**{**kw, "weights": (good.weights[0], good.weights[1][:-1], good.weights[2])})
    with pytest.raises(ValueError, match="log prior"):
        StateScorer(**{**kw, "log_prior": good.log_prior[:-1]})
    with pytest.raises(ValueError, match="window of 7 frames"):
        StateScorer(**{**kw, "context": 3})
    with pytest.raises(ValueError, match="not all finite"):
        StateScorer(**{**kw, "biases": (good.biases[0] * np.nan, *good.biases[1:])})
    with pytest.raises(ValueError, match="scales must be > 0"):
        StateScorer(**{**kw, "input_scale": -good.input_scale})
    with pytest.raises(ValueError, match="add up to more than one"):
        StateScorer(**{**kw, "log_prior": np.zeros(6)})
    assert StateScorer(**kw).same_as(good)


def test_forward_pass_on_log_mel_inputs_equals_scikit_learn(rng):
    # Reference library: scikit-learn's MLPClassifier.predict_proba with the same weights, on
    # the stacked and standardised log-mel inputs of a waveform (wordspot.audio.scorer_inputs).
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier

    from wordspot.audio.features import FeatureSettings
    from wordspot.audio.scorer_inputs import scorer_inputs

    settings = FeatureSettings()
    t = np.arange(8000) / 16000
    wave = np.sin(2 * np.pi * 300 * t) * np.linspace(0, 1, t.size) + 0.05 * rng.standard_normal(t.size)
    for kind in ("log-mel", "cepstra+log-mel"):
        frames = scorer_inputs(wave, settings, kind)
        c, p = 2, 6
        x = rng.normal(size=(40, frames.shape[1] * (2 * c + 1)))
        clf = MLPClassifier(hidden_layer_sizes=(9,), activation="relu", max_iter=2, random_state=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            clf.fit(x, np.arange(40) % p)
        clf.coefs_ = [rng.normal(size=w.shape) / np.sqrt(w.shape[0]) for w in clf.coefs_]
        clf.intercepts_ = [rng.normal(size=b.shape) for b in clf.intercepts_]
        mean, scale = rng.normal(size=x.shape[1]) * 0.1, rng.uniform(0.5, 2.0, x.shape[1])
        scorer = StateScorer(c, mean, scale, tuple(clf.coefs_), tuple(clf.intercepts_), np.full(p, -np.log(p)),
                             inputs=kind)
        assert scorer.inputs == kind and scorer.frame_dim == frames.shape[1]
        stacked = (stack_context(frames, c).astype(np.float64) - mean.astype(np.float32)) / scale.astype(np.float32)
        expected = clf.predict_proba(stacked)
        np.testing.assert_allclose(np.exp(scorer.log_posteriors(frames).astype(np.float64)), expected,
                                   rtol=2e-4, atol=1e-6)
        assert not np.allclose(expected, expected.mean(axis=0))


def test_inputs_default_to_cepstra_and_count_in_sameness(rng):
    a = random_scorer(rng)
    assert a.inputs == "cepstra"
    b = StateScorer(a.context, a.input_mean, a.input_scale, a.weights, a.biases, a.log_prior, inputs="log-mel")
    assert a.same_as(a) and not a.same_as(b) and not b.same_as(a)
    with pytest.raises(ValueError, match="inputs must name what the network reads"):
        StateScorer(a.context, a.input_mean, a.input_scale, a.weights, a.biases, a.log_prior, inputs="")


@pytest.mark.parametrize("columns", [None, [4, 0, 2], [5, 4, 3, 2, 1, 0], [0, 1, 2, 3, 4, 5], [3]])
def test_column_log_posteriors_are_the_reference_numbers_bit_for_bit(rng, columns):
    # The fast path against the readable one it shortens: log_posteriors, the columns
    # taken, widened to float64 (same float32 operations, so equal to the last bit).
    scorer = random_scorer(rng)
    for n in (30, 7, 30):  # reuse, shrink and grow the work arrays
        frames = (rng.normal(size=(n, 3)) * 4).astype(np.float32)
        want = scorer.log_posteriors(frames)
        want = (want if columns is None else want[:, columns]).astype(np.float64)
        for work in (None, work_array):
            got = scorer.column_log_posteriors(frames, columns, work=work)
            assert got.dtype == np.float64 and got.flags.c_contiguous
            np.testing.assert_array_equal(got, want)


def test_column_log_posteriors_equal_scikit_learn(rng):
    # Reference library: scikit-learn's MLPClassifier.predict_proba with the same weights
    # (as test_forward_pass_equals_scikit_learn), its log in the chosen columns.
    clf, scorer, frames, stacked = _scikit_learn_pair(rng)
    cols = [3, 1, 4]
    expected = clf.predict_proba(stacked)[:, cols]
    got = np.exp(scorer.column_log_posteriors(frames, cols))
    # float32 arithmetic against scikit-learn's float64: the tolerance of the forward-pass test
    np.testing.assert_allclose(got, expected, rtol=2e-4, atol=1e-6)


def test_column_log_posteriors_of_no_frames_and_wrong_frames(rng):
    scorer = random_scorer(rng, c=5)
    assert scorer.column_log_posteriors(np.zeros((0, 3)), [1, 2]).shape == (0, 2)
    assert scorer.column_log_posteriors(np.zeros((0, 3))).shape == (0, 6)
    with pytest.raises(ValueError, match=r"frames must have shape \(T, 3\)"):
        scorer.column_log_posteriors(np.zeros((4, 5)))


@pytest.mark.parametrize("n, c", [(20, 0), (20, 5), (3, 5), (1, 2)])
def test_windows_view_is_the_stacked_input(rng, n, c):
    from wordspot.acoustic.scorer import _windows

    frames = rng.normal(size=(n, 4)).astype(np.float32)
    np.testing.assert_array_equal(_windows(frames, c, work_array), naive_stack(frames, c))
