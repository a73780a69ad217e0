"""Word confidence: the measures of a recognised word and the probability that it is right.

For every word on the best path the decoder computes the *measures* named in
:data:`MEASURE_NAMES` (:func:`word_measures`). A model trained with a calibration
(:class:`wordspot.util.logistic.Calibration`, fitted by :mod:`wordspot.evaluation.calibrate`)
turns them into the probability that the word is right; a model without one, or with
one over other measures than this decoder computes, keeps the heuristic
:func:`heuristic_confidence`.

Measures (over the word's frames, its trailing pause included, unless said otherwise):

- ``acoustic_per_frame``: the word's acoustic log score divided by its frames;
- ``free_margin``: ``d``, the mean per-frame difference between that score and the score of
  the single best state of the whole network at each frame (an unconstrained upper bound,
  so ``d <= 0`` up to the transition terms);
- ``frames_per_phone``: log of the frames of the word's phones (pause excluded) over its
  number of phones (very short or very long phones are suspicious);
- ``filler_margin``: per frame, the word's acoustic score minus the best free sequence of
  phones and pauses over the same frames (:mod:`wordspot.decoding.spans`; <= 0 up to the
  gap's skip term, since the word's own phones are one such sequence);
- ``runner_up_margin``: per frame, the word's acoustic score minus that of the best other
  command passing once through the same frames;
- ``next_to_filler``: how many of the word's two neighbours on the best path (0, 1 or 2)
  are the filler: a command inside other talk rather than between pauses;
- ``phones``: the number of phones of the word's pronunciation (short words turn up in
  other talk more easily);
- ``phone_filler_margin``: the mean over the word's phones (aligned to its phone frames)
  of each phone's per-frame margin over the best free sequence of phones and pauses on
  that phone's frames (``Recognizer.phone_margin``): every phone counts the same, so one
  phone that fits badly shows even in a long word.

With a state scorer, the measures of :data:`POSTERIOR_MEASURE_NAMES` read its log
posteriors along the word's best path (:func:`path_posterior_measures`; the margin over the
filler is the decoder's). Four of them soften the worst phone for speakers whose vowels are
not the lexicon's (an accent moves a vowel to a neighbouring one): on a vowel's frames the
best vowel's posterior, or the summed posterior of the vowels of its broad class
(:data:`VOWEL_CLASSES`), stands in for the listed vowel's; the second-worst phone; the mean
of the two worst; the worst clipped at :data:`WORST_PHONE_FLOOR`. A model with a second
network (``own_scorer``, fitted on the user's recordings alone) gives the same measures from
it as :data:`OWN_POSTERIOR_MEASURE_NAMES`.

Without the filler (``--no-filler``) or with a one-word vocabulary the margins are
undefined (NaN) and the confidence is the heuristic.

The heuristic is ``exp(min(d, 0) / CONFIDENCE_SCALE)``: 1 when the word's path is as good as
the best free choice of state at every frame, falling towards 0 as other states explain
the frames better.
"""

from __future__ import annotations

import math
import warnings
from typing import Sequence

import numpy as np

from wordspot.errors import WordspotWarning

__all__ = [
    "MEASURE_NAMES",
    "BASE_MEASURE_NAMES",
    "POSTERIOR_MEASURE_NAMES",
    "OWN_POSTERIOR_MEASURE_NAMES",
    "OWN_PREFIX",
    "NO_POSTERIORS",
    "CONFIDENCE_SCALE",
    "DEFAULT_MIN_CONFIDENCE",
    "VOWEL_CLASSES",
    "WORST_PHONE_FLOOR",
    "word_measures",
    "path_posterior_measures",
    "heuristic_confidence",
    "usable_calibration",
    "calibration_columns",
    "word_confidence",
    "split_by_confidence",
]

#: The measures of every word, with or without a state scorer.
BASE_MEASURE_NAMES = ("acoustic_per_frame", "free_margin", "frames_per_phone", "filler_margin", "runner_up_margin",
                      "next_to_filler", "phones", "phone_filler_margin")

#: The measures from the state scorer's log posteriors (NaN for a model without a scorer).
#: The first four are older than the others; new names are added at the end, so that a
#: calibration stored with the older names reads the same values.
POSTERIOR_MEASURE_NAMES = ("posterior_mean", "posterior_phone_mean", "posterior_worst_phone",
                           "posterior_filler_margin", "posterior_worst_phone_any_vowel",
                           "posterior_worst_phone_vowel_class", "posterior_second_worst_phone",
                           "posterior_two_worst_phones", "posterior_worst_phone_floored")

#: The same measures from a second network fitted on the user's recordings alone (a model's
#: ``own_scorer``, beside the tuned starter's ``scorer``); NaN for a model without one.
OWN_PREFIX = "own_"
OWN_POSTERIOR_MEASURE_NAMES = tuple(OWN_PREFIX + name for name in POSTERIOR_MEASURE_NAMES)

#: ARPAbet vowels by broad class, front / central / back by where the vowel starts (the usual
#: vowel chart of American English; from memory). A diphthong goes with its first part.
VOWEL_CLASSES = {
    "front": ("IY", "IH", "EY", "EH", "AE"),
    "central": ("AH", "ER", "AY", "AW"),
    "back": ("UW", "UH", "OW", "AO", "AA", "OY"),
}

#: The floor of ``posterior_worst_phone_floored`` (mean log posterior of the worst phone):
#: below it a phone counts as simply unlike the lexicon, however far below. The best of
#: -4, -5, -6, -8 on dev commands with unlisted vowels; the measure is an option, in no
#: default calibration (docs/experiments/2026-12-03-unlisted-pronunciations.md).
WORST_PHONE_FLOOR = -4.0

#: The measures :func:`word_measures` returns, in order; a calibration names the ones it uses.
MEASURE_NAMES = BASE_MEASURE_NAMES + POSTERIOR_MEASURE_NAMES + OWN_POSTERIOR_MEASURE_NAMES

#: The posterior measures of a word when the model has no state scorer (or no second one).
NO_POSTERIORS = (float("nan"),) * len(POSTERIOR_MEASURE_NAMES)

#: Nats per frame by which a word may trail the best free state before its heuristic
#: confidence falls to 1/e (chosen by us).
CONFIDENCE_SCALE = 4.0

#: The word-confidence threshold used when none is given and the model's confidence is
#: calibrated (words below it are dropped). Chosen on the demo's dev voices over three
#: seeds, with the scorer's posterior measures in the calibration
#: (docs/experiments/2026-12-02-default-threshold.md): the threshold with the lowest sum of
#: the dev error rates (command WER, joined commands not exactly right, real phrases WER,
#: 10 dB commands not exactly right, other-talk files with a command; one term per use,
#: equal weights: common practice, no source). Against 0.005 before: other talk with a
#: command 39.8% -> 18.7% of files, command WER 1.1% -> 1.8%, real phrases 5.5% -> 8.8%.
DEFAULT_MIN_CONFIDENCE = 0.05


def word_measures(*, acoustic: float, best_free: np.ndarray, start: int, phone_end: int, end: int,
                  n_phones: int, filler_margin: float = float("nan"), runner_up_margin: float = float("nan"),
                  next_to_filler: int = 0, phone_filler_margin: float = float("nan"),
                  posterior: Sequence[float] = NO_POSTERIORS,
                  own_posterior: Sequence[float] = NO_POSTERIORS) -> tuple[float, ...]:
    """The measures of one recognised word, in the order of :data:`MEASURE_NAMES`.

    Parameters
    ----------
    acoustic : float
        The word's acoustic log score over frames ``start .. end``.
    best_free : ndarray, shape (T + 1,)
        Running sum of the best state score of each frame (``best_free[t]`` = sum of frames
        before ``t``).
    start, phone_end, end : int
        First frame, last frame of the phones, last frame with the trailing pause (inclusive).
    n_phones : int >= 1
    filler_margin, runner_up_margin : float
        Per-frame margins over frames ``start .. end`` (see the module docstring).
    next_to_filler : int
        Neighbours on the best path that are the filler.
    phone_filler_margin : float
        Mean per-phone margin over the filler (see the module docstring).
    posterior : sequence of floats
        The measures of :data:`POSTERIOR_MEASURE_NAMES` (NaN without a state scorer).
    own_posterior : sequence of floats
        The same from the model's second network (:data:`OWN_POSTERIOR_MEASURE_NAMES`).
    """
    span = end - start + 1
    free_margin = (acoustic - (best_free[end + 1] - best_free[start])) / span
    return (acoustic / span, float(free_margin), math.log((phone_end - start + 1) / n_phones),
            float(filler_margin), float(runner_up_margin), float(next_to_filler), float(n_phones),
            float(phone_filler_margin)) + tuple(float(v) for v in posterior) + tuple(float(v) for v in own_posterior)


def path_posterior_measures(on_path: np.ndarray, phones: np.ndarray, any_vowel: np.ndarray,
                            vowel_class: np.ndarray) -> tuple[float, ...]:
    """The posterior measures of a word's path but the margin over the filler.

    Parameters
    ----------
    on_path : ndarray, shape (F,)
        The log posterior of the path's state at each of the word's frames in a phone.
    phones : ndarray of int, shape (F,)
        The phone (0-based within the pronunciation) of each of those frames.
    any_vowel, vowel_class : ndarray, shape (F,)
        ``on_path`` with a vowel's frames given the log posterior of the best vowel, and the
        log of the summed posteriors of the vowels of the listed vowel's class, in the
        path's state position (the others as in ``on_path``).

    Returns
    -------
    tuple of 8 floats
        In the order of :data:`POSTERIOR_MEASURE_NAMES` without ``posterior_filler_margin``:
        the mean, the mean of the phone means, the worst phone mean, the worst phone mean
        with each of the two stand-ins, the second-worst phone mean (the worst with one
        phone), the mean of the two worst and the worst clipped at :data:`WORST_PHONE_FLOOR`.
    """
    counts = np.bincount(phones)
    seen = counts > 0

    def phone_means(values):
        return np.bincount(phones, weights=values, minlength=counts.size)[seen] / counts[seen]

    means = phone_means(on_path)
    two = np.sort(means)[:2]
    return (float(on_path.mean()), float(means.mean()), float(means.min()),
            float(phone_means(any_vowel).min()), float(phone_means(vowel_class).min()), float(two[-1]),
            float(two.mean()), float(max(means.min(), WORST_PHONE_FLOOR)))


def heuristic_confidence(measures: Sequence[float]) -> float:
    """``exp(min(d, 0) / CONFIDENCE_SCALE)`` from the ``free_margin`` measure ``d``."""
    d = measures[MEASURE_NAMES.index("free_margin")]
    return float(np.exp(min(d, 0.0) / CONFIDENCE_SCALE))


def usable_calibration(calibration, names: Sequence[str] = MEASURE_NAMES, *, source: str = "the model"):
    """``calibration`` if every measure it uses is one of ``names``, else None with one warning."""
    if calibration is None:
        return None
    if set(calibration.names) <= set(names):
        return calibration
    warnings.warn(
        f"{source}: the model was made by another version of wordspot, so its word confidences are rough "
        f"scores, not probabilities (its calibration uses the measures {', '.join(calibration.names)}, this "
        f"version computes {', '.join(names)}: the uncalibrated heuristic); train the model again to "
        "calibrate them",
        WordspotWarning,
        stacklevel=3,
    )
    return None


def calibration_columns(calibration, names: Sequence[str] = MEASURE_NAMES) -> np.ndarray:
    """Positions in ``names`` of the measures ``calibration`` uses, in its order."""
    return np.array([list(names).index(n) for n in calibration.names], dtype=np.int64)


def word_confidence(measures: Sequence[float], calibration=None) -> float:
    """The calibrated probability that the word is right, or the heuristic without a calibration.

    ``measures`` are in the order of :data:`MEASURE_NAMES`; the calibration reads the ones
    it names. The heuristic also applies when one of those is not finite (no filler, one
    word, or posterior measures without a state scorer).
    """
    if calibration is None:
        return heuristic_confidence(measures)
    x = np.asarray(measures, dtype=np.float64)[calibration_columns(calibration)]
    if not np.all(np.isfinite(x)):
        return heuristic_confidence(measures)
    return float(calibration.predict(x))


def split_by_confidence(segments: list, threshold: float) -> tuple[list, list]:
    """(words with confidence >= threshold, the others), each in their original order."""
    kept = [s for s in segments if s.confidence >= threshold]
    dropped = [s for s in segments if s.confidence < threshold]
    return kept, dropped
