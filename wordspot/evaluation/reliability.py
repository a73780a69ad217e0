"""How well word confidences match how often the words are right: the reliability table.

Every word the recogniser heard (those below the confidence threshold included) is
labelled right when the alignment of all heard words with the reference
(:func:`wordspot.evaluation.scoring.align_words`) pairs it as a hit, wrong otherwise (a
substitution or an insertion; every word on a recording with no command is wrong). The
words are put in equal-width confidence bins; for a calibrated confidence, each bin's mean
confidence should match its share of right words (a reliability diagram, DeGroot and
Fienberg 1983, "The comparison and evaluation of forecasters", The Statistician).

The *expected calibration error* sums, over the bins, the share of words in the bin times
the gap between its mean confidence and its share right (Naeini, Cooper and Hauskrecht
2015, "Obtaining well calibrated probabilities using Bayesian binning", AAAI).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from wordspot.errors import ScoringError
from wordspot.evaluation.scoring import HIT, EvaluationResult, align_words

__all__ = [
    "RELIABILITY_BINS",
    "ReliabilityRow",
    "word_hits",
    "reliability_table",
    "expected_calibration_error",
    "labelled_confidences",
    "reliability_of",
]

#: Equal-width confidence bins of the reliability table.
RELIABILITY_BINS = 10


@dataclass(frozen=True)
class ReliabilityRow:
    """One confidence bin: ``low <= confidence < high`` (the last bin includes 1).

    ``mean_confidence`` and ``share_correct`` are None for an empty bin.
    """

    low: float
    high: float
    words: int
    correct: int
    mean_confidence: float | None

    @property
    def share_correct(self) -> float | None:
        return self.correct / self.words if self.words else None

    def to_dict(self) -> dict:
        return {"low": self.low, "high": self.high, "words": self.words, "correct": self.correct,
                "mean_confidence": self.mean_confidence, "share_correct": self.share_correct}


def word_hits(reference: Sequence[str], recognised: Sequence[str]) -> tuple[bool, ...]:
    """For each recognised word, in order: whether the alignment makes it a hit."""
    pairs = align_words(reference, recognised).pairs
    return tuple(p.operation == HIT for p in pairs if p.recognised is not None)


def reliability_table(confidences, correct, *, bins: int = RELIABILITY_BINS) -> tuple[ReliabilityRow, ...]:
    """Words, right words and mean confidence per equal-width bin of [0, 1].

    Parameters
    ----------
    confidences : array_like of float in [0, 1]
    correct : array_like of bool, same length
    bins : int >= 1

    Returns
    -------
    tuple of ReliabilityRow
        ``bins`` rows, lowest confidences first, empty bins included.
    """
    conf = np.asarray(confidences, dtype=np.float64).reshape(-1)
    right = np.asarray(correct, dtype=bool).reshape(-1)
    if conf.shape != right.shape:
        raise ScoringError(f"reliability needs one label per confidence; got {conf.size} and {right.size}")
    if not (np.isfinite(conf).all() and (conf >= 0).all() and (conf <= 1).all()):
        raise ScoringError("reliability needs confidences from 0 to 1")
    if isinstance(bins, bool) or not isinstance(bins, (int, np.integer)) or bins < 1:
        raise ScoringError(f"bins must be a whole number >= 1, got {bins!r}")
    which = np.minimum((conf * bins).astype(np.int64), bins - 1)
    rows = []
    for k in range(bins):
        inside = which == k
        n = int(inside.sum())
        rows.append(ReliabilityRow(k / bins, (k + 1) / bins, n, int(right[inside].sum()),
                                   float(conf[inside].mean()) if n else None))
    return tuple(rows)


def expected_calibration_error(rows: Sequence[ReliabilityRow]) -> float | None:
    """Sum over bins of (words in bin / all words) * |mean confidence - share right|; None without words."""
    total = sum(r.words for r in rows)
    if total == 0:
        return None
    return float(sum(r.words / total * abs(r.mean_confidence - r.share_correct) for r in rows if r.words))


def labelled_confidences(result: EvaluationResult) -> tuple[np.ndarray, np.ndarray]:
    """Every heard word's confidence and whether it is right, over a scored set.

    Words below the confidence threshold count too (``ScoredUtterance.every_word``).
    Utterances without confidences are left out.
    """
    conf, right = [], []
    for s in result.scores:
        words, confidences = s.utterance.every_word()
        if confidences is None or len(confidences) != len(words):
            continue
        conf.extend(confidences)
        right.extend(word_hits(s.utterance.reference, words))
    return np.array(conf, dtype=np.float64), np.array(right, dtype=bool)


def reliability_of(result: EvaluationResult, *, bins: int = RELIABILITY_BINS) -> tuple[ReliabilityRow, ...] | None:
    """The reliability table of a scored set; None when no word with a confidence was heard."""
    conf, right = labelled_confidences(result)
    if conf.size == 0:
        return None
    return reliability_table(conf, right, bins=bins)
