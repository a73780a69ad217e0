"""Tuning a starter's state scorer to a user's recordings (regularised fine-tuning).

The starter's network (:class:`wordspot.acoustic.scorer.StateScorer`) was fitted on many
voices. Here it is trained further, from its own weights, on the frames of the user's
recordings labelled by forced alignment with the (already adapted) mixtures. A few
hundred recordings of a few words would soon make it forget everything else, so the
training targets keep a share ``rho`` of the starter's own posteriors:

    target = (1 - rho) * one_hot(label) + rho * starter_posterior

Minimising the cross-entropy against these targets is the same as minimising the
cross-entropy to the labels plus ``rho`` times the KL divergence from the starter's
output to the new one (Yu, Yao, Su, Li & Seide 2013, "KL-divergence regularized deep
neural network adaptation for improved large vocabulary speech recognition", ICASSP,
eqs. 5-8). ``rho = 0`` is plain fine-tuning, ``rho = 1`` keeps the starter's outputs.

The trainer is a small numpy one (scikit-learn's ``MLPClassifier`` takes hard labels
only): the same network (ReLU hidden layers, softmax output), mini-batch Adam (Kingma &
Ba 2015, "Adam: a method for stochastic optimization", ICLR, Algorithm 1). For a softmax
output and cross-entropy with any target distribution the gradient at the output-layer
values is ``(p - target)`` per frame; it is carried back through the layers as usual.
Loss and penalty follow scikit-learn's convention (mean over frames, plus
``0.5 * l2 * sum(W**2) / n``), so that one plain gradient step equals one step of
``MLPClassifier(solver="sgd", momentum=0)`` for hard labels (checked in the tests).

Early stopping watches the same loss on a held-out share of the user's recordings
(whole recordings); the starter itself counts as epoch 0, so it is kept when no epoch
beats it. A frame whose label is a mixture id the starter has no output for (no starter
training frame carried it) takes the starter's posterior alone as its target; those
outputs stay as they are.

Build and training time only; numpy alone.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from wordspot.acoustic.scorer import SCORER_DTYPE, StateScorer
from wordspot.errors import TrainingError
from wordspot.training.scorer_fit import UNSEEN_LOGIT, check_labelled_frames, stacked_sample

__all__ = [
    "ScorerAdaptConfig",
    "ScorerAdaptation",
    "forward",
    "soft_targets",
    "loss_and_gradients",
    "Adam",
    "seen_outputs",
    "adapt_scorer",
]

_LAYERS = ("all", "output")
_PRIORS = ("adapted", "starter")


@dataclass(frozen=True)
class ScorerAdaptConfig:
    """How the starter's scorer is tuned to the user's recordings.

    The defaults were chosen on dev data only (the demo's dev voices, none of its test
    sets; ``tests/benchmarks/scorer_adapt_dev.py``, record in
    ``docs/experiments/2026-12-02-scorer-adaptation.md``): every layer at rho 0.25 (8,000
    frames, 3 epochs, step 0.001) raised a stand-in network's dev frame accuracy from
    56.4% to 64.2% and cut the dev command WER with the network alone from 7.6% to 0.6%
    (means of 3 seeds); rho 0.5 and the output layer alone gained less. With the shipped starter's network: 68.2%
    -> 72.0% of dev frames, command WER and other talk unchanged. It costs about 1 s of one
    core for the demo's recordings.

    Parameters
    ----------
    rho : float in [0, 1]
        Share of the starter's own posterior in every target (the KL-divergence weight).
    layers : {"all", "output"}
        Train every layer, or only the output layer (the hidden layers stay the starter's).
    learning_rate : float > 0
        Adam's step size.
    batch_size : int >= 1
    max_epochs : int >= 1
        Passes over the sampled training frames at most.
    patience : int >= 1
        Stop when the held-out loss has not improved for this many epochs.
    max_frames : int >= 1
        Training frames at most (a seeded uniform sample of the training recordings'
        frames); the held-out recordings give at most ``max_frames * held_out_share``.
    held_out_share : float in [0, 0.5]
        Share of recordings kept out of training to choose the epoch (at least one
        recording stays in training; 0 or too few recordings: ``max_epochs`` are run).
    l2 : float >= 0
        Weight penalty, as scikit-learn's ``alpha``.
    prior : {"adapted", "starter"}
        The state prior the posteriors are divided by at decoding: the mean target over
        the user's frames (what the tuned network was trained towards), or the starter's.
    prior_count : float > 0
        Added to every class's (target) frame count before the adapted prior is taken.
    seed : int >= 0
        Seeds the held-out split, the frame sample and the batch order.
    """

    rho: float = 0.25
    layers: str = "all"
    learning_rate: float = 1e-3
    batch_size: int = 256
    max_epochs: int = 3
    patience: int = 1
    max_frames: int = 8_000
    held_out_share: float = 0.15
    l2: float = 0.0
    prior: str = "adapted"
    prior_count: float = 1.0
    seed: int = 0

    def __post_init__(self) -> None:
        def number(name, low, high=None, open_low=False):
            v = getattr(self, name)
            ok = isinstance(v, (int, float)) and not isinstance(v, bool) and np.isfinite(v)
            ok = ok and (v > low if open_low else v >= low) and (high is None or v <= high)
            if not ok:
                bound = f"> {low}" if open_low else f">= {low}"
                rng = f"from {low} to {high}" if high is not None else bound
                raise TrainingError(f"scorer adaptation {name} must be a number {rng}, got {v!r}")

        def whole(name, low):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < low:
                raise TrainingError(f"scorer adaptation {name} must be a whole number >= {low}, got {v!r}")

        number("rho", 0.0, 1.0)
        number("learning_rate", 0.0, open_low=True)
        number("l2", 0.0)
        number("held_out_share", 0.0, 0.5)
        number("prior_count", 0.0, open_low=True)
        for name, low in (("batch_size", 1), ("max_epochs", 1), ("patience", 1), ("max_frames", 1), ("seed", 0)):
            whole(name, low)
        if self.layers not in _LAYERS:
            raise TrainingError(f"scorer adaptation layers must be one of {', '.join(_LAYERS)}, got {self.layers!r}")
        if self.prior not in _PRIORS:
            raise TrainingError(f"scorer adaptation prior must be one of {', '.join(_PRIORS)}, got {self.prior!r}")


@dataclass
class ScorerAdaptation:
    """What the tuning did.

    Attributes
    ----------
    train_loss : list of float
        Mean training loss of each epoch (over its batches, before each step).
    held_out_loss : list of float
        Held-out loss of the starter (first entry) and after each epoch; empty without a
        held-out share.
    best_epoch : int
        The epoch kept (0: the starter's network unchanged).
    train_frames, held_out_frames : int
    held_out_accuracy : tuple of float
        Share of held-out frames whose most probable output is the aligned label, for the
        starter and for the network kept (NaN without a held-out share).
    seconds_of_speech : float
        Seconds of the user's recordings aligned to speech (not pause) states.
    recordings : int
        Recordings whose frames took part (training and held-out).
    """

    train_loss: list = field(default_factory=list)
    held_out_loss: list = field(default_factory=list)
    best_epoch: int = 0
    train_frames: int = 0
    held_out_frames: int = 0
    held_out_accuracy: tuple = (float("nan"), float("nan"))
    seconds_of_speech: float = 0.0
    recordings: int = 0


# ------------------------------------------------------------------ the network (pure functions)


def forward(weights, biases, x: np.ndarray) -> tuple[list, np.ndarray]:
    """Every layer's output for standardised inputs ``x`` (N, I).

    Returns
    -------
    activations : list of ndarray
        ``[x, hidden_1, ..., hidden_L]`` (after ReLU).
    log_p : ndarray, shape (N, P)
        Log-softmax of the output layer.
    """
    acts = [x]
    h = x
    for w, b in zip(weights[:-1], biases[:-1]):
        h = np.maximum(h @ w + b, 0.0)
        acts.append(h)
    z = h @ weights[-1] + biases[-1]
    z = z - z.max(axis=1, keepdims=True)
    return acts, z - np.log(np.exp(z).sum(axis=1, keepdims=True))


def soft_targets(labels: np.ndarray, starter_p: np.ndarray, rho: float, seen: np.ndarray | None = None) -> np.ndarray:
    """``(1 - rho) * one_hot(labels) + rho * starter_p`` per frame (rows sum to one).

    ``seen``: per class, whether the starter has an output for it; a frame whose label is
    not seen gets ``starter_p`` alone.
    """
    labels = np.asarray(labels, dtype=np.int64)
    hard = np.full(labels.shape, 1.0 - rho, dtype=starter_p.dtype)
    if seen is not None:
        hard[~np.asarray(seen, dtype=bool)[labels]] = 0.0
    t = starter_p * (1.0 - hard)[:, None]
    t[np.arange(labels.size), labels] += hard
    return t


def loss_and_gradients(weights, biases, x: np.ndarray, targets: np.ndarray, l2: float = 0.0):
    """Mean cross-entropy of the network's softmax against ``targets`` and its gradients.

    ``loss = -sum(targets * log p) / N + 0.5 * l2 * sum_k sum(W_k**2) / N`` (scikit-learn's
    ``MLPClassifier`` convention). At the output-layer values the gradient is
    ``(p - targets) / N``, carried back through the ReLU layers.

    Returns
    -------
    loss : float
    weight_grads, bias_grads : list of ndarray
        Same shapes as ``weights`` and ``biases``.
    """
    n = x.shape[0]
    acts, log_p = forward(weights, biases, x)
    loss = float(-(targets * log_p).sum() / n)
    if l2:
        loss += 0.5 * l2 * sum(float((w * w).sum()) for w in weights) / n
    delta = (np.exp(log_p) - targets) / n
    gw, gb = [None] * len(weights), [None] * len(weights)
    for k in range(len(weights) - 1, -1, -1):
        gw[k] = acts[k].T @ delta
        if l2:
            gw[k] += (l2 / n) * weights[k]
        gb[k] = delta.sum(axis=0)
        if k:
            delta = (delta @ weights[k].T) * (acts[k] > 0)
    return loss, gw, gb


class Adam:
    """Adam steps for a list of arrays (Kingma & Ba 2015, Algorithm 1), updating them in place."""

    def __init__(self, params, learning_rate: float, beta1: float = 0.9, beta2: float = 0.999, eps: float = 1e-8):
        self.params = params
        self.lr, self.b1, self.b2, self.eps = learning_rate, beta1, beta2, eps
        self.m = [np.zeros_like(p) for p in params]
        self.v = [np.zeros_like(p) for p in params]
        self.t = 0

    def step(self, grads) -> None:
        self.t += 1
        lr = float(self.lr * np.sqrt(1 - self.b2 ** self.t) / (1 - self.b1 ** self.t))  # a Python float keeps float32
        for p, g, m, v in zip(self.params, grads, self.m, self.v):
            m *= self.b1
            m += (1 - self.b1) * g
            v *= self.b2
            v += (1 - self.b2) * (g * g)
            p -= (lr * m / (np.sqrt(v) + self.eps)).astype(p.dtype, copy=False)


def seen_outputs(scorer: StateScorer) -> np.ndarray:
    """Per class, whether the scorer has an output for it (not a fixed :data:`UNSEEN_LOGIT` column)."""
    w, b = scorer.weights[-1], scorer.biases[-1]
    return ~((b <= UNSEEN_LOGIT / 2) & (w == 0).all(axis=0))


# ------------------------------------------------------------------ tuning


def _mean_loss(log_p: np.ndarray, targets: np.ndarray) -> float:
    return float(-(targets * log_p).sum() / max(1, log_p.shape[0]))


def adapt_scorer(scorer: StateScorer, frames_list, labels_list, config: ScorerAdaptConfig | None = None,
                 *, speech_classes=None, frame_seconds: float = 0.01) -> tuple[StateScorer, ScorerAdaptation]:
    """Tune ``scorer`` to labelled frames of the user's recordings.

    Parameters
    ----------
    scorer : StateScorer
        The starter's network; it is not changed.
    frames_list : list of ndarray, shape (T_i, D)
        The model's feature frames of each recording.
    labels_list : list of ndarray of int, shape (T_i,)
        Mixture id of every frame (forced alignment with the adapted mixtures).
    config : ScorerAdaptConfig, optional
    speech_classes : array of bool, shape (P,), optional
        Which mixture ids are speech (for ``seconds_of_speech``); all when None.
    frame_seconds : float
        Seconds per frame (the features' hop).

    Returns
    -------
    scorer : StateScorer
        The tuned network (same shape, input standardisation and context).
    report : ScorerAdaptation

    Raises
    ------
    TrainingError
        Mismatched or empty input, labels outside the classes, frames of another size.
    """
    config = config or ScorerAdaptConfig()
    p = scorer.n_classes
    dim = check_labelled_frames(frames_list, labels_list, p)
    if dim != scorer.frame_dim:
        raise TrainingError(f"frames of {dim} values, but the state scorer reads {scorer.frame_dim}")
    speech = np.ones(p, bool) if speech_classes is None else np.asarray(speech_classes, bool)
    n_speech = sum(int(speech[np.asarray(y, np.int64)].sum()) for y in labels_list)
    report = ScorerAdaptation(seconds_of_speech=n_speech * frame_seconds,
                              recordings=sum(1 for y in labels_list if len(y)))

    rng = np.random.default_rng(config.seed)
    order = rng.permutation(len(frames_list))
    n_held = min(int(round(config.held_out_share * len(order))), len(order) - 1)
    held, train = np.sort(order[:n_held]), np.sort(order[n_held:])
    x, y = stacked_sample(frames_list, labels_list, train, scorer.context, config.max_frames, rng)
    if y.size == 0:
        raise TrainingError("no labelled frames to tune the state scorer on")
    held_limit = max(1, int(config.max_frames * config.held_out_share))
    hx, hy = stacked_sample(frames_list, labels_list, held, scorer.context, held_limit, rng) if n_held else (None, None)
    if hy is not None and hy.size == 0:
        hx = hy = None
    for a in (x, hx):
        if a is not None:
            a -= scorer.input_mean
            a /= scorer.input_scale

    weights = [w.copy() for w in scorer.weights]
    biases = [b.copy() for b in scorer.biases]
    seen = seen_outputs(scorer)
    # Only the output layer: the hidden layers are fixed, so their output is computed once.
    n_fixed = len(weights) - 1 if config.layers == "output" else 0
    if n_fixed:
        x = forward(weights[:n_fixed] + [weights[n_fixed]], biases[:n_fixed] + [biases[n_fixed]], x)[0][-1]
        if hx is not None:
            hx = forward(weights[:n_fixed] + [weights[n_fixed]], biases[:n_fixed] + [biases[n_fixed]], hx)[0][-1]
    tw, tb = weights[n_fixed:], biases[n_fixed:]
    start_w, start_b = [w.copy() for w in tw], [b.copy() for b in tb]
    ht = None if hx is None else soft_targets(hy, np.exp(forward(tw, tb, hx)[1]), config.rho, seen)
    report.train_frames, report.held_out_frames = int(y.size), 0 if hy is None else int(hy.size)

    def held_out():
        log_p = forward(tw, tb, hx)[1]
        return _mean_loss(log_p, ht), float(np.mean(np.argmax(log_p, axis=1) == hy))

    best = (0, [w.copy() for w in tw], [b.copy() for b in tb])
    acc0 = acc = float("nan")
    if hx is not None:
        loss, acc0 = held_out()
        acc = acc0
        report.held_out_loss.append(loss)
    best_loss, since = (report.held_out_loss[0] if report.held_out_loss else np.inf), 0
    adam = Adam(tw + tb, config.learning_rate)
    mask = seen.astype(tw[-1].dtype)
    # Each batch's targets come from the starter's layers on that very batch, so that where
    # they equal the network's own outputs (rho = 1, or before any step) the gradient is
    # exactly zero: a product over a subset of rows need not round as the same rows did in a
    # product over all of them, and Adam's step, divided by the gradient's own size, would
    # turn that rounding noise (about 1e-8 in float32, as large as its epsilon) into moves.
    for epoch in range(1, config.max_epochs + 1):
        perm = rng.permutation(y.size)
        losses = []
        for i in range(0, y.size, config.batch_size):
            rows = perm[i:i + config.batch_size]
            xb = x[rows]
            targets = soft_targets(y[rows], np.exp(forward(start_w, start_b, xb)[1]), config.rho, seen)
            loss, gw, gb = loss_and_gradients(tw, tb, xb, targets, config.l2)
            gw[-1] *= mask  # outputs the starter never had stay as they are
            gb[-1] *= mask
            adam.step(gw + gb)
            losses.append(loss * rows.size)
        report.train_loss.append(float(sum(losses) / y.size))
        if hx is None:
            best = (epoch, [w.copy() for w in tw], [b.copy() for b in tb])
            continue
        loss, accuracy = held_out()
        report.held_out_loss.append(loss)
        if loss < best_loss:
            best_loss, since, acc = loss, 0, accuracy
            best = (epoch, [w.copy() for w in tw], [b.copy() for b in tb])
        else:
            since += 1
            if since >= config.patience:
                break
    report.best_epoch = best[0]
    report.held_out_accuracy = (acc0, acc)
    new_w = tuple(weights[:n_fixed]) + tuple(best[1])
    new_b = tuple(biases[:n_fixed]) + tuple(best[2])
    log_prior = scorer.log_prior
    if config.prior == "adapted" and best[0] > 0:
        t = soft_targets(y, np.exp(forward(start_w, start_b, x)[1]), config.rho, seen)
        counts = t.sum(axis=0, dtype=np.float64) + config.prior_count
        log_prior = np.log(counts / counts.sum())
    tuned = StateScorer(context=scorer.context, input_mean=scorer.input_mean, input_scale=scorer.input_scale,
                        weights=new_w, biases=new_b, log_prior=np.asarray(log_prior, dtype=SCORER_DTYPE),
                        inputs=scorer.inputs)
    return tuned, report
