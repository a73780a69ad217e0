"""Tuning a starter's state scorer to a user's recordings: the gradient (against finite
differences and scikit-learn), the soft targets, the training loop and its place in adaptation."""

import warnings
from dataclasses import replace

import numpy as np
import pytest

from scorer_helpers import aligned_corpus
from wordspot.acoustic.scorer import StateScorer, stack_context
from wordspot.cli import main
from wordspot.corpus import read_manifest
from wordspot.errors import TrainingError
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model, save_model
from wordspot.training.adapt import AdaptationConfig, adapt
from wordspot.training.scorer_adapt import (Adam, ScorerAdaptConfig, adapt_scorer, forward, loss_and_gradients,
                                            seen_outputs, soft_targets)
from wordspot.training.scorer_fit import UNSEEN_LOGIT, ScorerConfig, fit_scorer


def small_net(rng, sizes=(6, 5, 4, 3), dtype=np.float64):
    weights = [(rng.normal(size=(a, b)) / np.sqrt(a)).astype(dtype) for a, b in zip(sizes[:-1], sizes[1:])]
    biases = [rng.normal(scale=0.1, size=b).astype(dtype) for b in sizes[1:]]
    return weights, biases


# ------------------------------------------------------------------ the gradient


def test_gradient_matches_finite_differences(rng):
    # Central differences (f(w + h) - f(w - h)) / 2h: the usual numerical gradient check
    # (common practice, no source). Soft targets and the L2 penalty both take part.
    weights, biases = small_net(rng)
    x = rng.normal(size=(7, 6))
    t = rng.dirichlet(np.ones(3), size=7)
    loss, gw, gb = loss_and_gradients(weights, biases, x, t, l2=0.3)
    h = 1e-6
    for params, grads in ((weights, gw), (biases, gb)):
        for p, g in zip(params, grads):
            num = np.zeros_like(p)
            for idx in np.ndindex(p.shape):
                keep = p[idx]
                p[idx] = keep + h
                up = loss_and_gradients(weights, biases, x, t, l2=0.3)[0]
                p[idx] = keep - h
                down = loss_and_gradients(weights, biases, x, t, l2=0.3)[0]
                p[idx] = keep
                num[idx] = (up - down) / (2 * h)
            np.testing.assert_allclose(g, num, rtol=1e-5, atol=1e-8)
    # and the loss itself is the cross-entropy to the targets plus the penalty
    log_p = forward(weights, biases, x)[1]
    expected = -(t * log_p).sum() / 7 + 0.5 * 0.3 * sum((w * w).sum() for w in weights) / 7
    assert loss == pytest.approx(expected, rel=1e-12)


def test_one_step_equals_one_scikit_learn_sgd_step_for_hard_labels(rng):
    # Reference: scikit-learn's MLPClassifier (ReLU hidden layers, softmax output, log loss,
    # alpha as L2). One partial_fit over the whole batch with plain SGD (no momentum, constant
    # step) moves every weight by -learning_rate * its gradient. With rho = 0 our targets are
    # the one-hot labels, so our gradient must give the same step.
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier

    n, lr, alpha = 12, 0.05, 0.01
    x = rng.normal(size=(n, 6))
    y = np.array([0, 1, 2, 3] * 3)
    clf = MLPClassifier(hidden_layer_sizes=(5, 4), activation="relu", solver="sgd", momentum=0.0,
                        nesterovs_momentum=False, learning_rate="constant", learning_rate_init=lr, alpha=alpha,
                        batch_size=n, shuffle=False, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        clf.partial_fit(x, y, classes=np.arange(4))  # creates the layers (4 classes: softmax output)
        weights, biases = small_net(rng, (6, 5, 4, 4))
        clf.coefs_ = [w.copy() for w in weights]
        clf.intercepts_ = [b.copy() for b in biases]
        clf.partial_fit(x, y)
    starter_p = np.exp(forward(weights, biases, x)[1])
    _, gw, gb = loss_and_gradients(weights, biases, x, soft_targets(y, starter_p, rho=0.0), l2=alpha)
    for ours, grad, theirs in zip(weights + biases, gw + gb, clf.coefs_ + clf.intercepts_):
        np.testing.assert_allclose(ours - lr * grad, theirs, rtol=1e-10, atol=1e-12)


def test_soft_targets():
    p = np.array([[0.2, 0.3, 0.5], [0.6, 0.3, 0.1]])
    t = soft_targets(np.array([0, 2]), p, rho=0.25)
    # (1 - rho) * one-hot + rho * starter posterior (Yu et al. 2013, eq. 8), worked by hand
    np.testing.assert_allclose(t, [[0.8, 0.075, 0.125], [0.15, 0.075, 0.775]])
    # a label the starter has no output for: the starter's posterior alone
    t = soft_targets(np.array([0, 2]), p, rho=0.25, seen=np.array([True, True, False]))
    np.testing.assert_allclose(t[1], p[1])
    np.testing.assert_allclose(soft_targets(np.array([1, 1]), p, rho=1.0), p)


def test_adam_first_step_is_the_learning_rate_times_the_sign():
    # Kingma & Ba (2015), Algorithm 1: after bias correction the first step is
    # lr * g / (|g| + eps), i.e. lr * sign(g) for |g| >> eps.
    w = np.array([1.0, -2.0, 0.5])
    Adam([w], 0.1).step([np.array([3.0, -0.01, 0.0])])
    np.testing.assert_allclose(w, [0.9, -1.9, 0.5], rtol=1e-4)  # eps shows at the 1e-5 level for |g| = 0.01


# ------------------------------------------------------------------ the tuning


def voices(rng, n_classes=5, dim=4):
    """Frames of a 'starter' voice and of a 'user' whose class centres are moved."""
    centres = rng.normal(scale=2.0, size=(n_classes, dim))
    moved = centres + rng.normal(scale=1.2, size=(n_classes, dim))

    def utterances(c, n):
        frames, labels = [], []
        for _ in range(n):
            y = np.repeat(rng.choice(n_classes, size=10), 4)
            frames.append((c[y] + rng.normal(size=(y.size, dim))).astype(np.float32))
            labels.append(y)
        return frames, labels

    return utterances(centres, 40), utterances(moved, 24), utterances(moved, 24)


@pytest.fixture
def starter_and_user(rng):
    (sf, sl), user, later = voices(rng)
    starter = fit_scorer(sf, sl, 5, ScorerConfig(hidden=(16,), context=1, max_epochs=8, batch_size=64,
                                                 learning_rate=0.01))
    return starter, user, later


def _accuracy(scorer, frames, labels):
    return float(np.mean(np.concatenate([np.argmax(scorer.log_posteriors(x), 1) == y
                                         for x, y in zip(frames, labels)])))


def _loss(scorer, frames, labels, starter, rho):
    """Mean loss against the soft targets over all the given frames."""
    total, n = 0.0, 0
    for x, y in zip(frames, labels):
        log_p = scorer.log_posteriors(x).astype(np.float64)
        t = soft_targets(y, np.exp(starter.log_posteriors(x).astype(np.float64)), rho)
        total += -(t * log_p).sum()
        n += y.size
    return total / n


FAST = dict(learning_rate=0.01, batch_size=64, max_epochs=6)


@pytest.mark.parametrize("layers", ["all", "output"])
def test_tuning_lowers_the_training_loss_and_fits_the_user(starter_and_user, layers):
    starter, (frames, labels), (later_f, later_l) = starter_and_user
    tuned, rep = adapt_scorer(starter, frames, labels,
                              ScorerAdaptConfig(rho=0.3, layers=layers, held_out_share=0.0, **FAST))
    assert rep.best_epoch == 6 and rep.train_frames == sum(y.size for y in labels)
    assert _loss(tuned, frames, labels, starter, 0.3) < 0.9 * _loss(starter, frames, labels, starter, 0.3)
    assert rep.train_loss[-1] < rep.train_loss[0]
    # new frames of the same user: more of them right than with the starter
    assert _accuracy(tuned, later_f, later_l) > _accuracy(starter, later_f, later_l) + 0.05
    # the shape and the input standardisation stay the starter's; only the output layer moves with "output"
    assert tuned.hidden_sizes == starter.hidden_sizes and tuned.context == starter.context
    np.testing.assert_array_equal(tuned.input_mean, starter.input_mean)
    if layers == "output":
        np.testing.assert_array_equal(tuned.weights[0], starter.weights[0])
    else:
        assert not np.array_equal(tuned.weights[0], starter.weights[0])


def test_rho_one_keeps_the_starter_outputs(starter_and_user):
    starter, (frames, labels), (later_f, _) = starter_and_user
    kept, _ = adapt_scorer(starter, frames, labels, ScorerAdaptConfig(rho=1.0, held_out_share=0.0, **FAST))
    free, _ = adapt_scorer(starter, frames, labels, ScorerAdaptConfig(rho=0.0, held_out_share=0.0, **FAST))

    def moved(s):
        return max(np.abs(np.exp(s.log_posteriors(x)) - np.exp(starter.log_posteriors(x))).max() for x in later_f)

    assert moved(kept) < 1e-3  # the targets are its own outputs: nothing to learn
    assert moved(free) > 0.2


def test_same_seed_same_network_and_the_seed_matters(starter_and_user):
    starter, (frames, labels), _ = starter_and_user
    cfg = ScorerAdaptConfig(max_frames=500, **FAST)
    a, ra = adapt_scorer(starter, frames, labels, replace(cfg, seed=3))
    b, rb = adapt_scorer(starter, frames, labels, replace(cfg, seed=3))
    assert a.same_as(b) and ra.held_out_loss == rb.held_out_loss
    c, _ = adapt_scorer(starter, frames, labels, replace(cfg, seed=4))
    assert not a.same_as(c)
    assert ra.train_frames == 500


def test_held_out_loss_chooses_the_epoch_and_the_starter_can_win(starter_and_user):
    starter, (frames, labels), _ = starter_and_user
    _, rep = adapt_scorer(starter, frames, labels, ScorerAdaptConfig(held_out_share=0.25, patience=6, **FAST))
    assert len(rep.held_out_loss) == 7  # the starter, then every epoch
    assert rep.best_epoch == int(np.argmin(rep.held_out_loss))
    assert rep.held_out_frames > 0
    # a step so large that every epoch is worse than the start: the starter comes back unchanged
    same, rep = adapt_scorer(starter, frames, labels,
                             ScorerAdaptConfig(held_out_share=0.25, learning_rate=50.0, max_epochs=2, batch_size=64))
    if rep.best_epoch == 0:
        assert same.same_as(starter)
    else:  # pragma: no cover - shows the numbers if the huge step happened to help
        pytest.fail(f"a learning rate of 50 improved the held-out loss: {rep.held_out_loss}")


def test_outputs_the_starter_never_had_stay_shut(rng):
    (sf, sl), (uf, ul), _ = voices(rng)
    keep = [y != 4 for y in sl]
    starter = fit_scorer([x[k] for x, k in zip(sf, keep)], [y[k] for y, k in zip(sl, keep)], 5,
                         ScorerConfig(hidden=(16,), context=1, max_epochs=4, batch_size=64, learning_rate=0.01))
    assert list(seen_outputs(starter)) == [True, True, True, True, False]
    tuned, _ = adapt_scorer(starter, uf, ul, ScorerAdaptConfig(rho=0.0, held_out_share=0.0, **FAST))
    assert tuned.biases[-1][4] == UNSEEN_LOGIT and not tuned.weights[-1][:, 4].any()


def test_adapted_prior_follows_the_targets(starter_and_user):
    starter, (frames, labels), _ = starter_and_user
    tuned, _ = adapt_scorer(starter, frames, labels, ScorerAdaptConfig(rho=0.0, held_out_share=0.0, prior_count=1.0,
                                                                       **FAST))
    counts = np.bincount(np.concatenate(labels), minlength=5) + 1.0
    np.testing.assert_allclose(np.exp(tuned.log_prior), counts / counts.sum(), rtol=1e-5)
    kept, _ = adapt_scorer(starter, frames, labels, ScorerAdaptConfig(prior="starter", held_out_share=0.0, **FAST))
    np.testing.assert_array_equal(kept.log_prior, starter.log_prior)


def test_bad_settings_and_input_are_named(starter_and_user):
    starter, (frames, labels), _ = starter_and_user
    for kw, word in ((dict(rho=1.5), "rho"), (dict(layers="middle"), "layers"), (dict(max_epochs=0), "max_epochs"),
                     (dict(prior="flat"), "prior"), (dict(learning_rate=0.0), "learning_rate")):
        with pytest.raises(TrainingError, match=word):
            ScorerAdaptConfig(**kw)
    with pytest.raises(TrainingError, match="reads 4"):
        adapt_scorer(starter, [np.zeros((5, 3), np.float32)], [np.zeros(5, int)])
    with pytest.raises(TrainingError, match="labels outside"):
        adapt_scorer(starter, frames[:1], [np.full(labels[0].shape, 7)])


def test_window_as_the_scorer_reads_it(starter_and_user):
    # the trainer's inputs are the scorer's own stacked, standardised windows: its forward
    # pass on them gives the scorer's log posteriors
    starter, (frames, _), _ = starter_and_user
    x = (stack_context(frames[0], starter.context) - starter.input_mean) / starter.input_scale
    log_p = forward(list(starter.weights), list(starter.biases), x)[1]
    np.testing.assert_allclose(log_p, starter.log_posteriors(frames[0]), atol=1e-4)


# ------------------------------------------------------------------ in adaptation


@pytest.fixture(scope="module")
def tone_start(tmp_path_factory):
    """A tone-corpus model with a scorer fitted on its own alignment, and a second corpus whose tones are higher."""
    import tone_corpus
    from tone_corpus import make_corpus
    from wordspot.training.trainer import TrainingConfig, train

    rng = np.random.default_rng(20261202)
    folder = tmp_path_factory.mktemp("scorer-adapt")
    manifest, lex_path = make_corpus(folder / "a", rng, n_utterances=30)
    lex = read_lexicon(lex_path)
    model, _ = train(read_manifest(manifest), lex, config=TrainingConfig(mixtures=(1,), first_passes=3,
                                                                         passes_per_split=2, speed_factors=(1.0,),
                                                                         noise_copies=0))
    data = aligned_corpus(model, read_manifest(manifest))
    scorer = fit_scorer([x for x, _ in data], [y for _, y in data], model.mixtures.n_mixtures,
                        ScorerConfig(hidden=(24,), context=2, max_epochs=10, learning_rate=0.01))
    start = replace(model, scorer=scorer)
    with tone_corpus.tones_scaled(1.15):
        other, _ = make_corpus(folder / "b", rng, n_utterances=16)
    start_path = save_model(start, folder / "start.model")
    return start, lex, other, start_path, lex_path


QUICK = AdaptationConfig(prior_weight=5.0, mean_transform=False, background_share=0.0,
                         scorer=ScorerAdaptConfig(learning_rate=0.002, held_out_share=0.25, max_epochs=4, patience=2))


def test_adapting_tunes_the_scorer_and_the_file_round_trips(tone_start, tmp_path):
    start, lex, other, _, _ = tone_start
    model, summary = adapt(read_manifest(other), lex, start, config=QUICK)
    assert model.scorer is not None and not model.scorer.same_as(start.scorer)
    info = model.info["scorer_adaptation"]
    assert info["tuned"] and info["epoch_kept"] >= 1 and info["recordings"] == 16
    assert info["held_out_loss"][info["epoch_kept"]] < info["held_out_loss"][0]
    note = [line for line in summary.lines() if "sound scorer" in line]
    assert note == [f"tuned the sound scorer to your voice on {info['seconds_of_speech']:.0f} seconds of speech "
                    "(16 recordings)"]
    back = load_model(save_model(model, tmp_path / "tuned.model"))
    assert back.scorer.same_as(model.scorer)
    assert back.info["scorer_adaptation"] == info
    # the mixtures do not depend on the scorer step
    kept, _ = adapt(read_manifest(other), lex, start, config=replace(QUICK, scorer=None))
    np.testing.assert_array_equal(kept.mixtures.means, model.mixtures.means)
    assert kept.scorer.same_as(start.scorer)
    assert kept.info["scorer_adaptation"] == {"tuned": False, "reason": "kept by request"}


def test_a_start_without_scorer_adapts_as_before(tone_start):
    start, lex, other, _, _ = tone_start
    plain = replace(start, scorer=None)
    a, sa = adapt(read_manifest(other), lex, plain, config=QUICK)
    b, sb = adapt(read_manifest(other), lex, plain, config=replace(QUICK, scorer=None))
    assert a.scorer is None and b.scorer is None
    assert "scorer_adaptation" not in a.info
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(a.mixtures, name), getattr(b.mixtures, name))
    assert [line for line in sa.lines() if "time" not in line] == [line for line in sb.lines() if "time" not in line]
    assert not any("scorer" in line for line in sa.lines())


def test_command_line_tunes_or_keeps_the_scorer(tone_start, tmp_path, capsys):
    start, _, other, start_path, lex_path = tone_start
    out = tmp_path / "tuned.model"
    common = [str(other), "--lexicon", str(lex_path), "--start", str(start_path), "--no-calibration",
              "--background-share", "0"]
    assert main(["train", *common, "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "tuned the sound scorer to your voice on" in printed
    assert not load_model(out).scorer.same_as(start.scorer)
    kept = tmp_path / "kept.model"
    assert main(["train", *common, "--out", str(kept), "--keep-starter-scorer"]) == 0
    printed = capsys.readouterr().out
    assert "kept the starting model's sound scorer as it is" in printed
    assert load_model(kept).scorer.same_as(start.scorer)


def test_command_line_fits_a_second_scorer_when_asked(tone_start, tmp_path, capsys):
    start, _, other, start_path, lex_path = tone_start
    common = [str(other), "--lexicon", str(lex_path), "--no-calibration", "--background-share", "0"]
    out = tmp_path / "two.model"
    assert main(["train", *common, "--start", str(start_path), "--out", str(out), "--second-scorer"]) == 0
    assert "a second sound scorer: fitted on" in capsys.readouterr().out
    model = load_model(out)
    assert model.own_scorer is not None and model.info["own_scorer"]["hidden"] == [256, 256]
    assert not model.scorer.same_as(start.scorer)  # the starter's is tuned as well
    assert main(["train", *common, "--from-scratch", "--out", str(tmp_path / "x.model"), "--second-scorer"]) == 2
    assert "--second-scorer applies when adapting a model only" in capsys.readouterr().err


def test_a_scorer_reading_other_inputs_is_kept_as_it_is_when_adapting():
    # Tuning reads the aligned feature frames (cepstra); a starter whose scorer reads log-mel
    # inputs keeps it untouched, and the summary says why.
    from dataclasses import replace

    from wordspot.acoustic.scorer import StateScorer
    from wordspot.model import load_model
    from wordspot.training.adapt import tune_scorer
    from wordspot.training.scorer_adapt import ScorerAdaptConfig

    model = load_model("starter")
    s = model.scorer
    n_in = 40 * (2 * s.context + 1)
    w0 = np.random.default_rng(0).normal(size=(n_in, s.weights[0].shape[1]))
    mel = StateScorer(s.context, np.zeros(n_in), np.ones(n_in), (w0,) + s.weights[1:], s.biases, s.log_prior,
                      inputs="log-mel")
    got, info, note = tune_scorer(replace(model, scorer=mel), [], model.mixtures, ScorerAdaptConfig())
    assert got is mel and info["tuned"] is False
    assert "not supported yet" in note and "log-mel" in note


def _pause_columns(model):
    from wordspot.acoustic.units import PAUSE_UNIT

    u = model.units.index(PAUSE_UNIT)
    return np.unique(model.units.state_mixture[u, :model.units.n_states[u]])


def test_impact_items_for_the_scorer_are_seeded_pause_items_of_impacts(tone_start):
    # The scorer's impact items: background items of kind "impacts" only, a share of the
    # recordings in number (at least MIN_BACKGROUNDS), the same for the same seed, others
    # for another, none at 0; aligned, every frame gets a pause mixture id. (Our own rule.)
    from wordspot.training.adapt import align_for_scorer, scorer_impact_items
    from wordspot.training.backgrounds import MIN_BACKGROUNDS
    from wordspot.training.data import prepare_items

    start, lex, other, _, _ = tone_start
    utts = read_manifest(other)
    items, _ = prepare_items(utts, lex, start.units, start.features)
    config = replace(QUICK, scorer_impacts=0.5)
    got = scorer_impact_items(items, utts, start, config)
    assert len(got) == MIN_BACKGROUNDS and all(it.background and it.words == () for it in got)
    assert all(str(it.path).endswith("-impacts") for it in got)
    again = scorer_impact_items(items, utts, start, config)
    assert all(np.array_equal(a.frames, b.frames) for a, b in zip(got, again))
    moved = scorer_impact_items(items, utts, start, replace(config, seed=1))
    assert not np.array_equal(got[0].frames, moved[0].frames)
    assert scorer_impact_items(items, utts, start, replace(QUICK, scorer_impacts=0.0)) == []
    frames, labels = align_for_scorer(items, start.mixtures)
    with_extra, extra_labels = align_for_scorer(items, start.mixtures, got)
    assert len(with_extra) == len(frames) + len(got)
    assert all(np.array_equal(a, b) for a, b in zip(extra_labels, labels))  # the recordings' labels unchanged
    assert np.isin(np.concatenate(extra_labels[len(labels):]), _pause_columns(start)).all()


def test_impact_items_tune_the_scorer_towards_pause_on_impacts_and_leave_the_mixtures(tone_start):
    # Items of impacts among the scorer's tuning frames raise its pause posterior on
    # impacts it has not heard (another seed) against tuning without them; the mixtures
    # never see them (bit for bit the same), and the model's info counts them.
    from wordspot.audio.augment import background
    from wordspot.audio.features import compute_features

    start, lex, other, _, _ = tone_start
    assert AdaptationConfig().scorer_impacts == 0.1  # on by default
    plain, _ = adapt(read_manifest(other), lex, start, config=replace(QUICK, scorer_impacts=0.0))
    with_impacts, _ = adapt(read_manifest(other), lex, start, config=replace(QUICK, scorer_impacts=0.5))
    for name in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(plain.mixtures, name), getattr(with_impacts.mixtures, name))
    assert with_impacts.info["scorer_adaptation"]["impact_items"] == 20
    assert with_impacts.info["scorer_adaptation"]["recordings"] == plain.info["scorer_adaptation"]["recordings"] == 16
    assert "impact_items" not in plain.info["scorer_adaptation"]
    rng = np.random.default_rng(77)
    rate = start.features.sample_rate
    clips = [background("impacts", int(2.0 * rate), -30.0, rng, sample_rate=rate) for _ in range(5)]
    cols = _pause_columns(start)

    def pause_share(model):
        return np.mean([np.exp(model.scorer.log_posteriors(compute_features(c, model.features)))[:, cols].sum(1).mean()
                        for c in clips])

    assert pause_share(with_impacts) > pause_share(plain) + 0.05


@pytest.mark.parametrize("share", [-0.1, 1.5, True, "0.1", float("nan")])
def test_a_bad_scorer_impact_share_is_refused(share):
    with pytest.raises(TrainingError, match="scorer_impacts must be a number from 0 to 1"):
        AdaptationConfig(scorer_impacts=share)


OWN = ScorerConfig(hidden=(24,), context=2, max_epochs=10, learning_rate=0.01, max_frames=20_000)


def test_an_own_scorer_is_fitted_on_the_recordings_instead_of_tuning(tone_start, tmp_path):
    from wordspot.training.frame_labels import align_frames

    start, lex, other, _, _ = tone_start
    config = replace(QUICK, own_scorer=OWN, own_scorer_role="instead", follow_noise_copies=0, follow_speeds=())
    model, summary = adapt(read_manifest(other), lex, start, config=config)
    tuned, _ = adapt(read_manifest(other), lex, start, config=replace(config, own_scorer=None))
    # the mixtures do not depend on the scorer step; the scorer is a new network over the same ids
    np.testing.assert_array_equal(model.mixtures.means, tuned.mixtures.means)
    assert model.scorer.n_classes == start.scorer.n_classes and model.scorer.context == 2
    assert not model.scorer.same_as(start.scorer) and not model.scorer.same_as(tuned.scorer)
    info = model.info["scorer"]
    assert info["fitted"] and info["items"] == 16 and "scorer_adaptation" not in model.info
    assert model.own_scorer is None
    assert any(line.startswith("sound scorer: fitted on") for line in summary.lines())
    # it learned the recordings' own alignment with the adapted mixtures (tones a phone apart:
    # far above guessing one of the ids; common practice, no source)
    bare = replace(model, scorer=None)
    got = align_frames(bare, read_manifest(other))
    hits = np.concatenate([np.argmax(model.scorer.log_posteriors(x), axis=1) == y
                           for x, y in zip(got.frames, got.labels)])
    assert hits.mean() > 0.6
    back = load_model(save_model(model, tmp_path / "own.model"))
    assert back.scorer.same_as(model.scorer) and back.info["scorer"] == info


def test_an_own_scorer_beside_keeps_the_tuned_one_and_round_trips(tone_start, tmp_path):
    start, lex, other, _, _ = tone_start
    config = replace(QUICK, own_scorer=OWN, follow_noise_copies=0, follow_speeds=())
    assert config.own_scorer_role == "beside"
    model, summary = adapt(read_manifest(other), lex, start, config=config)
    tuned, _ = adapt(read_manifest(other), lex, start, config=replace(config, own_scorer=None))
    # the tuned starter's network is the one the default gives; the second is the one fitted
    # "instead" (same recordings, mixtures and seed)
    assert model.scorer.same_as(tuned.scorer) and tuned.own_scorer is None
    instead, _ = adapt(read_manifest(other), lex, start, config=replace(config, own_scorer_role="instead"))
    assert model.own_scorer.same_as(instead.scorer)
    assert model.info["own_scorer"]["fitted"] and model.info["scorer_adaptation"]["tuned"]
    assert any("a second sound scorer: fitted on" in line for line in summary.lines())
    back = load_model(save_model(model, tmp_path / "both.model"))
    assert back.scorer.same_as(model.scorer) and back.own_scorer.same_as(model.own_scorer)


@pytest.mark.parametrize("field, value", [("own_scorer", "yes"), ("own_scorer_role", "both")])
def test_a_bad_own_scorer_setting_is_refused(field, value):
    with pytest.raises(TrainingError, match=field):
        AdaptationConfig(**{field: value})


def test_the_training_on_every_recording_keeps_the_first_trainings_second_network(tone_start):
    from wordspot.training.adapt import adapting

    start, lex, other, _, _ = tone_start
    utts = read_manifest(other)
    config = replace(QUICK, own_scorer=OWN, follow_noise_copies=0, follow_speeds=())
    fit = adapting(start, lex, config=config)
    first, _ = fit(utts[4:], held_out=utts[:4])
    final, summary = fit(utts)
    assert final.own_scorer.same_as(first.own_scorer) and final.info["own_scorer"] == first.info["own_scorer"]
    assert first.info["own_scorer"]["items"] == 12  # the recordings not held out
    assert any("not held out for the calibration, kept" in line for line in summary.lines())
    # without a first training with held-out recordings, each call fits its own
    alone, _ = adapting(start, lex, config=config)(utts)
    assert alone.info["own_scorer"]["items"] == 16 and not alone.own_scorer.same_as(first.own_scorer)
