"""Fitting the state scorer (:mod:`wordspot.acoustic.scorer`) on labelled frames.

Each training frame carries a mixture id (from a forced alignment with the model); the
network reads the frame with its neighbours and learns the id. The fit is scikit-learn's
``MLPClassifier`` (ReLU hidden layers, softmax output, Adam, L2 penalty), one epoch per
``partial_fit`` call, so that early stopping can watch a held-out share of whole
*utterances* (frames of one utterance are too alike to judge each other). The weights
of the best epoch are copied into a :class:`StateScorer`; every class gets an output
column, including ids no training frame carries (zero weights and a bias of
:data:`UNSEEN_LOGIT`: a posterior of about zero whatever the input).

Build and training time only (imports scikit-learn); recognition needs numpy alone.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from wordspot.acoustic.scorer import SCORER_DTYPE, StateScorer, stack_context
from wordspot.audio.scorer_inputs import INPUT_KINDS
from wordspot.errors import TrainingError

__all__ = ["UNSEEN_LOGIT", "ScorerConfig", "ScorerFit", "fit_scorer", "fit_scorer_with_report", "held_out_split",
           "label_log_prior", "check_labelled_frames", "stacked_sample"]

#: Output-layer value of a class no training frame carries (its weights are zero).
UNSEEN_LOGIT = -1e4


@dataclass(frozen=True)
class ScorerConfig:
    """How the state scorer is fitted.

    Parameters
    ----------
    hidden : tuple of int
        Units of each hidden layer.
    context : int >= 0
        Frames on each side of the current one.
    seed : int
        Seeds the held-out split, the frame subsample, initial weights and batch order:
        the same data and seed give the same weights.
    max_epochs : int >= 1
        Passes over the training frames at most.
    patience : int >= 1
        Stop when the held-out loss has not improved for this many epochs.
    batch_size : int >= 1
    learning_rate : float > 0
        Adam's step size.
    l2 : float >= 0
        Weight penalty (scikit-learn's ``alpha``).
    held_out_share : float in [0, 0.5]
        Share of utterances kept out of training to choose the epoch (0: no early
        stopping, ``max_epochs`` are run). At least one utterance stays in training.
    max_frames : int >= 1
        At most this many training frames are used (a seeded uniform subsample; held-out
        frames at most ``max_frames * held_out_share``).
    prior_count : float > 0
        Added to every class's frame count before the log prior is taken, so a class no
        frame carries still has a finite prior.
    inputs : str
        What the frames handed to the fit are (one of
        :data:`wordspot.audio.scorer_inputs.INPUT_KINDS`; :mod:`wordspot.audio.scorer_inputs`
        computes them); the scorer records it. Default ``"cepstra"``, the model's features.
    """

    hidden: tuple[int, ...] = (512, 512)
    context: int = 5
    seed: int = 0
    max_epochs: int = 20
    patience: int = 2
    batch_size: int = 256
    learning_rate: float = 1e-3
    l2: float = 1e-4
    held_out_share: float = 0.1
    max_frames: int = 200_000
    prior_count: float = 1.0
    inputs: str = "cepstra"

    def __post_init__(self) -> None:
        def whole(name, low):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < low:
                raise TrainingError(f"scorer {name} must be a whole number >= {low}, got {v!r}")

        if not self.hidden or any(isinstance(h, bool) or not isinstance(h, (int, np.integer)) or h < 1
                                  for h in self.hidden):
            raise TrainingError(f"scorer hidden sizes must be whole numbers >= 1, got {self.hidden!r}")
        for name, low in (("context", 0), ("max_epochs", 1), ("patience", 1), ("batch_size", 1),
                          ("max_frames", 1), ("seed", 0)):
            whole(name, low)
        for name in ("learning_rate", "prior_count"):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and np.isfinite(v) and v > 0):
                raise TrainingError(f"scorer {name} must be a number > 0, got {v!r}")
        if self.inputs not in INPUT_KINDS:
            raise TrainingError(f"scorer inputs must be one of {', '.join(INPUT_KINDS)}; got {self.inputs!r}")
        if not (isinstance(self.l2, (int, float)) and np.isfinite(self.l2) and self.l2 >= 0):
            raise TrainingError(f"scorer l2 must be a number >= 0, got {self.l2!r}")
        if not (isinstance(self.held_out_share, (int, float)) and 0.0 <= self.held_out_share <= 0.5):
            raise TrainingError(f"scorer held_out_share must be from 0 to 0.5, got {self.held_out_share!r}")


@dataclass
class ScorerFit:
    """What the fit did: per-epoch mean held-out and training loss, the epoch kept, frames used."""

    train_loss: list[float]
    held_out_loss: list[float]
    best_epoch: int
    train_frames: int
    held_out_frames: int
    held_out_accuracy: float


def label_log_prior(labels_list, n_classes: int, prior_count: float = 1.0) -> np.ndarray:
    """Log share of each class among all labelled frames, with ``prior_count`` added to
    every count (never -inf), shape (n_classes,)."""
    counts = np.zeros(n_classes, dtype=np.float64)
    for y in labels_list:
        counts += np.bincount(np.asarray(y, dtype=np.int64), minlength=n_classes)[:n_classes]
    counts += prior_count
    return np.log(counts / counts.sum())


def check_labelled_frames(frames_list, labels_list, n_classes):
    """Check frames against labels (shapes, class range) and return the frame dimension."""
    if len(frames_list) != len(labels_list):
        raise TrainingError(f"{len(frames_list)} frame matrices but {len(labels_list)} label vectors")
    if not isinstance(n_classes, (int, np.integer)) or n_classes < 2:
        raise TrainingError(f"the scorer needs at least 2 classes, got {n_classes!r}")
    dim = None
    for k, (x, y) in enumerate(zip(frames_list, labels_list)):
        x, y = np.asarray(x), np.asarray(y)
        if x.ndim != 2 or y.shape != (x.shape[0],):
            raise TrainingError(f"utterance {k}: frames {x.shape} and labels {y.shape} do not match")
        if dim is None:
            dim = x.shape[1]
        elif x.shape[1] != dim:
            raise TrainingError(f"utterance {k}: frames of {x.shape[1]} values, earlier ones {dim}")
        if y.size and (y.min() < 0 or y.max() >= n_classes):
            raise TrainingError(f"utterance {k}: labels outside 0..{n_classes - 1}")
        if not np.isfinite(x).all():
            raise TrainingError(f"utterance {k}: frames hold NaN or infinite values")
    if dim is None or sum(len(y) for y in labels_list) == 0:
        raise TrainingError("no labelled frames to fit the scorer on")
    return dim


def stacked_sample(frames_list, labels_list, which, context, limit, rng):
    """Stacked windows and labels of the utterances ``which``, at most ``limit`` frames."""
    sizes = np.array([len(labels_list[i]) for i in which], dtype=np.int64)
    total = int(sizes.sum())
    keep = np.sort(rng.choice(total, size=limit, replace=False)) if total > limit else None
    starts = np.concatenate([[0], np.cumsum(sizes)])
    xs, ys = [], []
    for j, i in enumerate(which):
        if keep is None:
            rows = slice(None)
        else:
            lo, hi = np.searchsorted(keep, [starts[j], starts[j + 1]])
            rows = keep[lo:hi] - starts[j]
            if rows.size == 0:
                continue
        xs.append(stack_context(frames_list[i], context)[rows])
        ys.append(np.asarray(labels_list[i], dtype=np.int64)[rows])
    if not xs:
        return np.zeros((0, 0), SCORER_DTYPE), np.zeros(0, np.int64)
    return np.concatenate(xs), np.concatenate(ys)


def _column_stats(x: np.ndarray, block: int = 16384) -> tuple[np.ndarray, np.ndarray]:
    """Mean and standard deviation of every column (float64 sums over row blocks), as
    float32; a constant column gets scale 1."""
    mean = x.mean(axis=0, dtype=np.float64)
    ss = np.zeros_like(mean)
    for i in range(0, x.shape[0], block):
        d = x[i:i + block].astype(np.float64) - mean
        ss += np.einsum("ij,ij->j", d, d)
    std = np.sqrt(ss / x.shape[0])
    return mean.astype(SCORER_DTYPE), np.where(std > 1e-6, std, 1.0).astype(SCORER_DTYPE)


def _mean_loss(clf, x, y, classes) -> tuple[float, float]:
    p = clf.predict_proba(x)
    col = np.searchsorted(classes, y)
    picked = p[np.arange(y.size), col]
    return float(-np.mean(np.log(np.maximum(picked, 1e-30)))), float(np.mean(np.argmax(p, axis=1) == col))


def fit_scorer(frames_list, labels_list, n_classes: int, config: ScorerConfig | None = None,
               groups=None) -> StateScorer:
    """Fit a state scorer; see :func:`fit_scorer_with_report`."""
    return fit_scorer_with_report(frames_list, labels_list, n_classes, config, groups)[0]


def held_out_split(n_items: int, share: float, rng, groups=None) -> tuple[np.ndarray, np.ndarray]:
    """Item indices held out and trained on (each sorted): ``share`` of the items, or of
    the ``groups`` when given (all items of a group fall on one side), at least one left
    to train on."""
    if groups is None:
        order = rng.permutation(n_items)
        n_held = min(int(round(share * n_items)), n_items - 1)
        return np.sort(order[:n_held]), np.sort(order[n_held:])
    if len(groups) != n_items:
        raise TrainingError(f"{len(groups)} groups for {n_items} utterances")
    names, which = np.unique(np.asarray([str(g) for g in groups]), return_inverse=True)
    order = rng.permutation(names.size)
    n_held = min(int(round(share * names.size)), names.size - 1)
    held = np.isin(which, order[:n_held])
    return np.flatnonzero(held), np.flatnonzero(~held)


def fit_scorer_with_report(frames_list, labels_list, n_classes: int, config: ScorerConfig | None = None,
                           groups=None) -> tuple[StateScorer, ScorerFit]:
    """Fit a state scorer on labelled frames.

    Parameters
    ----------
    frames_list : list of ndarray, shape (T_i, D)
        The scorer's input frames of each utterance (``config.inputs``: by default the
        model's features).
    labels_list : list of ndarray of int, shape (T_i,)
        The mixture id of every frame (0 .. n_classes - 1).
    n_classes : int
        The model's mixture count; the output always has this many columns.
    config : ScorerConfig, optional
    groups : sequence, optional
        One key per utterance (e.g. its recording's path): copies of one recording (noisy,
        played faster) share a key and are held out together, so early stopping is not
        judged on copies of training recordings. None: every utterance is its own group.

    Returns
    -------
    scorer : StateScorer
    report : ScorerFit

    Raises
    ------
    TrainingError
        Mismatched or empty input, or labels outside the classes.
    """
    import warnings

    from sklearn.exceptions import ConvergenceWarning
    from sklearn.neural_network import MLPClassifier

    config = config or ScorerConfig()
    check_labelled_frames(frames_list, labels_list, n_classes)
    rng = np.random.default_rng(config.seed)
    held, train = held_out_split(len(frames_list), config.held_out_share, rng, groups)
    n_held = held.size
    x, y = stacked_sample(frames_list, labels_list, train, config.context, config.max_frames, rng)
    if y.size == 0:
        raise TrainingError("no labelled frames to fit the scorer on")
    held_limit = max(1, int(config.max_frames * max(config.held_out_share, 0.0)))
    hx, hy = stacked_sample(frames_list, labels_list, held, config.context, held_limit, rng) if n_held else (None, None)
    if hy is not None and hy.size == 0:
        hx = hy = None

    # Input standardisation from the training windows, applied in place in float32 as
    # StateScorer applies it.
    mean, scale = _column_stats(x)
    for a in (x, hx):
        if a is not None:
            a -= mean
            a /= scale

    classes = np.arange(n_classes)
    clf = MLPClassifier(hidden_layer_sizes=tuple(int(h) for h in config.hidden), activation="relu",
                        solver="adam", alpha=float(config.l2), batch_size=int(config.batch_size),
                        learning_rate_init=float(config.learning_rate), shuffle=True,
                        # one generator for the whole fit, so each epoch draws a new batch order
                        random_state=np.random.RandomState(config.seed))
    best, best_loss, since, train_losses, held_losses, acc = None, np.inf, 0, [], [], float("nan")
    for epoch in range(config.max_epochs):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            clf.partial_fit(x, y, classes=classes)
        train_losses.append(float(clf.loss_))
        if hx is None:
            best = (epoch, [c.copy() for c in clf.coefs_], [b.copy() for b in clf.intercepts_])
            continue
        loss, accuracy = _mean_loss(clf, hx, hy, classes)
        held_losses.append(loss)
        if loss < best_loss:
            best_loss, since, acc = loss, 0, accuracy
            best = (epoch, [c.copy() for c in clf.coefs_], [b.copy() for b in clf.intercepts_])
        else:
            since += 1
            if since >= config.patience:
                break
    epoch, coefs, intercepts = best
    coefs, intercepts = _as_softmax(coefs, intercepts, clf.out_activation_)
    # A class no training frame carries: the network knows nothing of it, so it gets a
    # posterior of about exp(UNSEEN_LOGIT), whatever the input (its scaled likelihood is
    # then far below any other; left to training, its prior's floor could make it win).
    unseen = np.bincount(y, minlength=n_classes)[:n_classes] == 0
    coefs[-1][:, unseen] = 0.0
    intercepts[-1][unseen] = UNSEEN_LOGIT
    scorer = StateScorer(
        context=int(config.context),
        input_mean=mean,
        input_scale=scale,
        weights=tuple(coefs),
        biases=tuple(intercepts),
        log_prior=label_log_prior(labels_list, n_classes, config.prior_count).astype(SCORER_DTYPE),
        inputs=config.inputs,
    )
    report = ScorerFit(train_losses, held_losses, epoch, int(y.size), 0 if hy is None else int(hy.size), acc)
    return scorer, report


def _as_softmax(coefs, intercepts, out_activation: str):
    """scikit-learn uses one logistic output for two classes; make it a two-column softmax
    (``softmax([0, z]) = [1 - sigmoid(z), sigmoid(z)]``)."""
    coefs, intercepts = list(coefs), list(intercepts)
    if out_activation == "logistic":
        w, b = coefs[-1], intercepts[-1]
        coefs[-1] = np.concatenate([np.zeros_like(w), w], axis=1)
        intercepts[-1] = np.concatenate([np.zeros_like(b), b])
    elif out_activation != "softmax":
        raise TrainingError(f"unexpected output activation {out_activation!r}")
    return coefs, intercepts
