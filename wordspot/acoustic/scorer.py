"""A discriminatively trained state scorer: a small feed-forward network over a window of frames.

The hybrid approach (Bourlard & Morgan 1994, "Connectionist speech recognition"; Hinton et
al. 2012, IEEE Signal Processing Magazine 29(6)): a network reads the model's own feature
frames (the normalised cepstra with deltas), ``context`` frames on each side of the
current one, and gives the posterior of every mixture id of the model (every unit state
has one; the pause unit's states are the background). The search wants likelihoods, so
the posterior is divided by the state's prior (its share of the training frames): a
*scaled likelihood*, ``scale * (log P(state | window) - log P(state))``.

What the network reads is named by its ``inputs``: ``"cepstra"``, the model's own feature
frames (the default, and that of every model file written before the choice existed), or
another kind that :mod:`wordspot.audio.scorer_inputs` lists and computes from a waveform
(log mel-band energies, alone or beside the cepstra).

Run time needs numpy alone: input standardisation, ReLU hidden layers and a softmax
output, in single precision. Fitting lives in :mod:`wordspot.training.scorer_fit`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["StateScorer", "stack_context", "SCORER_DTYPE"]

#: Precision of the network's arrays and arithmetic.
SCORER_DTYPE = np.float32

def stack_context(frames: np.ndarray, context: int) -> np.ndarray:
    """Each frame with its ``context`` neighbours on either side, side by side.

    Row ``t`` holds frames ``t - context .. t + context`` in that order (each ``D``
    values); frames before the first or after the last repeat the edge frame.

    Parameters
    ----------
    frames : ndarray, shape (T, D)
    context : int >= 0

    Returns
    -------
    ndarray, shape (T, D * (2 * context + 1)), float32
    """
    x = np.asarray(frames, dtype=SCORER_DTYPE)
    return _stack_into(x, int(context), np.empty((x.shape[0], x.shape[1] * (2 * int(context) + 1)), SCORER_DTYPE))


def _stack_into(x: np.ndarray, c: int, out: np.ndarray) -> np.ndarray:
    n, d = x.shape
    for k in range(2 * c + 1):
        shift = k - c
        block = out[:, k * d:(k + 1) * d]
        lo, hi = max(0, -shift), min(n, n - shift)  # rows whose neighbour t + shift exists
        if hi > lo:
            block[lo:hi] = x[lo + shift:hi + shift]
            block[:lo] = x[0]
            block[hi:] = x[n - 1]
        else:  # the window reaches past both ends for every row
            block[:] = x[0] if shift < 0 else x[n - 1]
    return out


def _windows(x: np.ndarray, c: int, work) -> np.ndarray:
    """:func:`stack_context` of float32 ``x`` (T >= 1) as a read-only view: row ``t`` of the
    frames padded with ``c`` copies of the edge frames on each side, read ``2 c + 1``
    frames long (the rows overlap in memory)."""
    n, d = x.shape
    if c == 0:
        return x
    padded = work("scorer_padded", (n + 2 * c, d), SCORER_DTYPE)
    padded[:c] = x[0]
    padded[c:c + n] = x
    padded[c + n:] = x[n - 1]
    step = padded.strides[1]
    return np.lib.stride_tricks.as_strided(padded, shape=(n, d * (2 * c + 1)), strides=(d * step, step),
                                           writeable=False)


def _fresh(name: str, shape: tuple, dtype) -> np.ndarray:
    return np.empty(shape, dtype=dtype)


@dataclass(frozen=True, eq=False)
class StateScorer:
    """A trained network giving the posterior of every mixture id from a window of frames.

    Attributes
    ----------
    context : int
        Frames on each side of the current one (the window is ``2 * context + 1`` frames).
    input_mean, input_scale : ndarray, shape (D * (2 * context + 1),), float32
        The stacked input is standardised as ``(x - input_mean) / input_scale``.
    weights : tuple of ndarray
        Layer ``k`` maps its input to its output by ``h @ weights[k] + biases[k]``;
        shapes ``(in, out)``, float32. Hidden layers use ReLU; the last is the softmax
        over the ``P`` mixture ids.
    biases : tuple of ndarray
        Shapes ``(out,)``, float32.
    log_prior : ndarray, shape (P,), float32
        Log share of each mixture id among the training frames (floored, never -inf).
    inputs : str
        What the frames handed to it are (default ``"cepstra"``: the model's features;
        the kinds: :data:`wordspot.audio.scorer_inputs.INPUT_KINDS`).
    """

    context: int
    input_mean: np.ndarray
    input_scale: np.ndarray
    weights: tuple
    biases: tuple
    log_prior: np.ndarray
    inputs: str = "cepstra"

    def __post_init__(self) -> None:
        cast = lambda a: np.ascontiguousarray(a, dtype=SCORER_DTYPE)  # noqa: E731
        object.__setattr__(self, "input_mean", cast(self.input_mean))
        object.__setattr__(self, "input_scale", cast(self.input_scale))
        object.__setattr__(self, "weights", tuple(cast(w) for w in self.weights))
        object.__setattr__(self, "biases", tuple(cast(b) for b in self.biases))
        object.__setattr__(self, "log_prior", cast(self.log_prior))
        self.validate()

    def validate(self) -> None:
        """Check shapes and values.

        Raises
        ------
        ValueError
            Naming what is wrong.
        """
        c = self.context
        if not (isinstance(self.inputs, str) and self.inputs):
            raise ValueError(f"inputs must name what the network reads (e.g. 'cepstra'), got {self.inputs!r}")
        if not (isinstance(c, (int, np.integer)) and not isinstance(c, bool) and c >= 0):
            raise ValueError(f"context must be a whole number >= 0, got {c!r}")
        if not self.weights or len(self.weights) != len(self.biases):
            raise ValueError(f"{len(self.weights)} weight tables but {len(self.biases)} bias vectors")
        n_in = self.input_mean.shape[0] if self.input_mean.ndim == 1 else -1
        if n_in <= 0 or n_in % (2 * c + 1):
            raise ValueError(f"input mean of shape {self.input_mean.shape} does not fit a window of {2 * c + 1} frames")
        if self.input_scale.shape != self.input_mean.shape:
            raise ValueError(f"input scale has shape {self.input_scale.shape}, the mean {self.input_mean.shape}")
        width = n_in
        for k, (w, b) in enumerate(zip(self.weights, self.biases)):
            if w.ndim != 2 or w.shape[0] != width or b.shape != (w.shape[1],):
                raise ValueError(f"layer {k}: weights {w.shape} and biases {b.shape} do not follow "
                                 f"an input of {width} values")
            width = w.shape[1]
        if width < 2:
            raise ValueError(f"the output has {width} class(es); at least 2 are needed")
        if self.log_prior.shape != (width,):
            raise ValueError(f"log prior has shape {self.log_prior.shape}, the output {width} classes")
        arrays = (self.input_mean, self.input_scale, self.log_prior, *self.weights, *self.biases)
        if not all(np.isfinite(a).all() for a in arrays):
            raise ValueError("the network's parameters are not all finite")
        if (self.input_scale <= 0).any():
            raise ValueError("input scales must be > 0")
        if np.logaddexp.reduce(self.log_prior.astype(np.float64)) > 1e-3:
            raise ValueError("the prior's probabilities add up to more than one")

    @property
    def n_classes(self) -> int:
        """Output classes (the model's mixture ids)."""
        return int(self.log_prior.shape[0])

    @property
    def frame_dim(self) -> int:
        """Values per feature frame."""
        return int(self.input_mean.shape[0] // (2 * self.context + 1))

    @property
    def hidden_sizes(self) -> tuple[int, ...]:
        return tuple(int(w.shape[1]) for w in self.weights[:-1])

    def logits(self, frames: np.ndarray, work=None) -> np.ndarray:
        """Output-layer values before the softmax, (T, P) float32.

        ``work``: optional ``work(name, shape, dtype)`` giving reusable scratch arrays
        (:func:`wordspot.audio.workspace.work_array`) for the stacked input and hidden
        layers; the result is always a new array.
        """
        work = work or _fresh
        x = np.asarray(frames, dtype=SCORER_DTYPE)
        if x.ndim != 2 or x.shape[1] != self.frame_dim:
            raise ValueError(f"frames must have shape (T, {self.frame_dim}), got {x.shape}")
        if x.shape[0] == 0:
            return np.zeros((0, self.n_classes), SCORER_DTYPE)
        return self._logits(x, work, fresh=True)

    def _logits(self, x: np.ndarray, work, *, fresh: bool) -> np.ndarray:
        """:meth:`logits` of checked float32 frames (T >= 1); the output layer in a work
        array unless ``fresh``."""
        h = work("scorer_input", (x.shape[0], self.input_mean.shape[0]), SCORER_DTYPE)
        # stacking and centring in one pass: the windows are overlapping rows of the
        # edge-padded frames (the numbers of stack_context, then the same subtraction)
        np.subtract(_windows(x, self.context, work), self.input_mean, out=h)
        h /= self.input_scale
        last = len(self.weights) - 1
        for k, (w, b) in enumerate(zip(self.weights, self.biases)):
            out = (np.empty((x.shape[0], w.shape[1]), SCORER_DTYPE) if k == last and fresh
                   else work("scorer_output" if k == last else f"scorer_hidden_{k % 2}", (x.shape[0], w.shape[1]),
                             SCORER_DTYPE))
            np.matmul(h, w, out=out)
            out += b
            if k < last:
                np.maximum(out, 0.0, out=out)
            h = out
        return h

    def log_posteriors(self, frames: np.ndarray, work=None) -> np.ndarray:
        """Log posterior of every mixture id at every frame, (T, P) float32 (rows sum to one in
        the probability domain); ``work`` as in :meth:`logits`."""
        z = self.logits(frames, work)
        z -= z.max(axis=1, keepdims=True)
        z -= np.log(np.exp(z).sum(axis=1, keepdims=True))
        return z

    def column_log_posteriors(self, frames: np.ndarray, columns=None, work=None) -> np.ndarray:
        """:meth:`log_posteriors` in ``columns`` (mixture ids, in that order; all by default),
        as a new C-contiguous float64 array (T, len(columns)).

        The same numbers as ``log_posteriors(frames)[:, columns].astype(np.float64)`` (the
        readable reference; tests compare them bit for bit), with less work: the output
        layer and the softmax's work in reused arrays (``work`` as in :meth:`logits`), each
        frame's normaliser (its largest logit and the log of its sum of exponentials, in
        float32 as there) computed once over every class, and only ``columns`` normalised
        and widened to float64.
        """
        work = work or _fresh
        x = np.asarray(frames, dtype=SCORER_DTYPE)
        if x.ndim != 2 or x.shape[1] != self.frame_dim:
            raise ValueError(f"frames must have shape (T, {self.frame_dim}), got {x.shape}")
        cols = None if columns is None else np.asarray(columns, dtype=np.int64)
        if cols is not None and np.array_equal(cols, np.arange(self.n_classes)):
            cols = None  # every class in its own order: no selection
        n_out = self.n_classes if cols is None else cols.shape[0]
        if x.shape[0] == 0:
            return np.zeros((0, n_out))
        z = self._logits(x, work, fresh=False)
        z -= z.max(axis=1, keepdims=True)
        lse = np.log(np.exp(z, out=work("scorer_exp", z.shape, SCORER_DTYPE)).sum(axis=1, keepdims=True))
        if cols is not None:
            z = np.take(z, cols, axis=1, out=work("scorer_columns", (z.shape[0], n_out), SCORER_DTYPE), mode="clip")
        z -= lse
        return z.astype(np.float64)

    def scaled_log_likelihoods(self, frames: np.ndarray, scale: float = 1.0, columns=None,
                               work=None) -> np.ndarray:
        """``scale * (log P(state | window) - log P(state))``, (T, P) float32.

        ``columns``: mixture ids to return (in that order); all by default. ``work`` as in
        :meth:`logits`.
        """
        z = self.log_posteriors(frames, work)
        prior = self.log_prior
        if columns is not None:
            columns = np.asarray(columns, dtype=np.int64)
            z, prior = z[:, columns], prior[columns]
        z -= prior
        if scale != 1.0:
            z *= SCORER_DTYPE(scale)
        return z

    def same_as(self, other: "StateScorer") -> bool:
        """Bit-for-bit equality of every parameter."""
        if not isinstance(other, StateScorer) or self.context != other.context or self.inputs != other.inputs:
            return False
        pairs = [(self.input_mean, other.input_mean), (self.input_scale, other.input_scale),
                 (self.log_prior, other.log_prior)]
        if len(self.weights) != len(other.weights):
            return False
        pairs += list(zip(self.weights, other.weights)) + list(zip(self.biases, other.biases))
        return all(a.shape == b.shape and a.tobytes() == b.tobytes() for a, b in pairs)
