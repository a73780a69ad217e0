"""The detection trade-off: misses against false accepts as a confidence threshold moves.

Each recognised word carries a confidence (``WordSegment.confidence``: the probability
that the word is right when the model is calibrated, else a heuristic in [0, 1]). A
*threshold* t keeps the words with confidence >= t and drops the others; the words the
recogniser's own threshold already dropped take part too (``ScoredUtterance.every_word``),
so the curve reaches below it. Every item is then scored again (the same alignment
as :func:`wordspot.evaluation.scoring.align_words`). At each threshold:

- **miss rate** = (S + D) / N over the command items (reference words deleted or
  substituted, over the reference words; see :func:`wordspot.evaluation.scoring.miss_rate`);
- **false accepts** = words kept on the non-command items (empty reference); per hour of
  that audio when the durations are known;
- **false-accept rate** = the share of non-command items on which at least one word is
  kept. This is the rate of the equal error rate and of the picture's x-axis: a rate
  between 0 and 1 that the normal-deviate axis can show, unlike a count per hour.

The **equal error rate** (EER) is where the miss rate equals the false-accept rate along
the operating points taken in threshold order, joined by straight lines.

The picture is a detection error trade-off (DET) plot: both rates on normal-deviate axes,
x -> Phi^-1(x) with Phi the standard normal distribution function (Martin, Doddington,
Kamm, Ordowski and Przybocki 1997, "The DET curve in assessment of detection task
performance", Eurospeech), on which scores with normal distributions give straight lines.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from wordspot.errors import ScoringError
from wordspot.evaluation.scoring import EvaluationResult, ScoredUtterance, align_words, false_accepts_per_hour

__all__ = [
    "DET_TICKS",
    "TradeOff",
    "normal_deviate",
    "trade_off",
    "equal_error_rate",
    "measurable",
    "equal_error_rate_of",
]

#: Rates (as fractions) labelled on the DET axes, shown in percent.
DET_TICKS = (0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.4, 0.6, 0.8, 0.9, 0.95, 0.98, 0.99)
# Rates of exactly 0 or 1 lie at infinity on the normal-deviate scale; they are drawn here.
_EDGE = 0.0005


def normal_deviate(p) -> np.ndarray:
    """Phi^-1(p), the standard normal quantile, with p clipped to [0.0005, 0.9995].

    Parameters
    ----------
    p : array_like of float in [0, 1]

    Returns
    -------
    ndarray of float
        0 for p = 0.5, 1 for p = Phi(1) = 0.8413...; rates of 0 and 1 land at the clip edges.
    """
    from scipy.stats import norm

    return norm.ppf(np.clip(np.asarray(p, dtype=float), _EDGE, 1.0 - _EDGE))


@dataclass(frozen=True)
class TradeOff:
    """Operating points of the confidence threshold, in ascending threshold order.

    Attributes
    ----------
    thresholds : ndarray of float
        Words with confidence below the threshold are dropped; the first keeps every word,
        the last (``inf``) drops every word.
    misses : ndarray of int
        S + D over the command items at each threshold.
    false_accepts : ndarray of int
        Words kept on the non-command items.
    accepting_items : ndarray of int
        Non-command items with at least one word kept.
    command_words : int
        N, the reference words of the command items.
    non_command_utterances : int
    non_command_seconds : float or None
        Total duration of the non-command items (None when any is unknown).
    """

    thresholds: np.ndarray
    misses: np.ndarray
    false_accepts: np.ndarray
    accepting_items: np.ndarray
    command_words: int
    non_command_utterances: int
    non_command_seconds: float | None

    @property
    def miss_rate(self) -> np.ndarray:
        """(S + D) / N at each threshold."""
        return self.misses / max(self.command_words, 1)

    @property
    def false_accept_rate(self) -> np.ndarray:
        """Share of non-command items with at least one word kept, at each threshold."""
        return self.accepting_items / max(self.non_command_utterances, 1)

    @property
    def false_accepts_per_hour(self) -> np.ndarray | None:
        """False accepts per hour of non-command audio at each threshold (None if unknown)."""
        if false_accepts_per_hour(1, self.non_command_seconds) is None:
            return None
        return self.false_accepts * 3600.0 / self.non_command_seconds

    @property
    def equal_error_rate(self) -> float | None:
        """See :func:`equal_error_rate`."""
        return equal_error_rate(self.miss_rate, self.false_accept_rate)


def _item_levels(reference, recognised, confidences, command: bool):
    """Per-item counts for each number of its distinct confidences lying below the threshold."""
    conf = np.asarray(confidences, dtype=float)
    levels = np.unique(conf)
    counts = []
    for k in range(levels.size + 1):
        floor = levels[k] if k < levels.size else math.inf
        kept = tuple(w for w, c in zip(recognised, conf) if c >= floor)
        if command:
            a = align_words(reference, kept)
            counts.append(a.substitutions + a.deletions)
        else:
            counts.append(len(kept))
    return levels, np.array(counts, dtype=np.int64)


def trade_off(utterances: Sequence[ScoredUtterance]) -> TradeOff:
    """Misses and false accepts at every threshold where either can change.

    Parameters
    ----------
    utterances : sequence of ScoredUtterance
        Each with ``confidences`` (one per recognised word); at least one command item
        (non-empty reference) and one non-command item (empty reference).

    Returns
    -------
    TradeOff
        Thresholds: 0, every distinct confidence, and ``inf``.

    Raises
    ------
    ScoringError
        Confidences missing or of the wrong length, or one of the two kinds of item absent.
    """
    items = []
    for u in utterances:
        words, confidences = u.every_word()
        if confidences is None or len(confidences) != len(words):
            raise ScoringError(
                f"{u.path}: the detection trade-off needs one confidence per recognised word; "
                f"got {None if confidences is None else len(confidences)} for {len(words)} word(s)"
            )
        items.append((bool(u.reference), *_item_levels(u.reference, words, confidences, bool(u.reference))))
    quiet = [u for u in utterances if not u.reference]
    n_words = sum(len(u.reference) for u in utterances)
    if not quiet or n_words == 0:
        raise ScoringError(
            "the detection trade-off needs recordings with commands and recordings with none "
            f"(rows with an empty transcript); this set has {len(utterances) - len(quiet)} and {len(quiet)}"
        )
    every = [levels for _, levels, _ in items]
    thresholds = np.unique(np.concatenate([[0.0, math.inf]] + every))
    misses = np.zeros(thresholds.size, dtype=np.int64)
    accepts = np.zeros(thresholds.size, dtype=np.int64)
    accepting = np.zeros(thresholds.size, dtype=np.int64)
    for command, levels, counts in items:
        at = counts[np.searchsorted(levels, thresholds, side="left")]
        if command:
            misses += at
        else:
            accepts += at
            accepting += at > 0
    durations = [u.seconds for u in quiet]
    seconds = float(sum(durations)) if None not in durations else None
    return TradeOff(thresholds, misses, accepts, accepting, n_words, len(quiet), seconds)


def equal_error_rate(miss_rate, false_accept_rate) -> float | None:
    """The rate at which the miss rate equals the false-accept rate.

    The operating points (in threshold order, from keeping every word to keeping none) are
    joined by straight lines; the EER is where that line first reaches miss = false accept.

    Parameters
    ----------
    miss_rate, false_accept_rate : array_like of float, same length >= 1

    Returns
    -------
    float or None
        None when no point has the miss rate at or above the false-accept rate, or when
        even the first point (every word kept) already misses more than it falsely accepts
        (the rates never meet).
    """
    miss = np.asarray(miss_rate, dtype=float)
    fa = np.asarray(false_accept_rate, dtype=float)
    if miss.shape != fa.shape or miss.ndim != 1 or miss.size == 0:
        raise ScoringError(f"equal_error_rate needs two equal-length 1-D arrays; got {miss.shape} and {fa.shape}")
    gap = miss - fa
    reached = np.flatnonzero(gap >= 0)
    if reached.size == 0:
        return None
    i = int(reached[0])
    if gap[i] == 0:
        return float(miss[i])
    if i == 0:
        return None
    share = gap[i - 1] / (gap[i - 1] - gap[i])  # gap[i-1] < 0 < gap[i]
    return float(miss[i - 1] + share * (miss[i] - miss[i - 1]))


def measurable(result: EvaluationResult) -> bool:
    """Whether `trade_off` can run on a scored set: both kinds of item, every confidence known."""
    utts = [s.utterance for s in result.scores]
    every = [u.every_word() for u in utts]
    return (result.reference_words > 0 and result.non_command_utterances > 0
            and all(c is not None and len(c) == len(w) for w, c in every))


def equal_error_rate_of(result: EvaluationResult) -> float | None:
    """The EER of a scored set, or None when it is not `measurable` (or the rates never meet)."""
    if not measurable(result):
        return None
    return trade_off([s.utterance for s in result.scores]).equal_error_rate
