"""Commands said amid other talk: talk right before or right after a word.

A person gives a command between pauses, alone or with other commands ("oven three
minutes"); a command word heard in the middle of a sentence ("when" heard as "one" in
"wipe the counter when you have a moment") has other talk right next to it. On the best
path, other talk shows as the filler's phones or as command words whose confidence is
below the threshold (the search, paying a penalty for every filler phone, often spells a
sentence with poor command words rather than with the filler).

:func:`inside_talk` marks a kept word when other talk comes closer than ``gap`` frames
(the pause between them, pause items and words' own trailing pauses, is shorter) on both
of its sides, or with ``sides=1`` on either. ``min_talk`` asks that the talk found be that
many frames long (filler phones and dropped words' phones, short pauses inside allowed),
so that a breath or a click next to a command is not talk. A kept neighbouring command
ends the search on that side ("commands said together"), or with ``through`` is looked
past, so that words said together are judged as one group; the start or the end of the
recording ends it with "no talk there".

The decoder (``DecoderSettings.talk_gap``, ``talk_length``) uses one side, looking past
kept commands, with a gap of 0.2 s and at least 0.5 s of talk: chosen on the demo's dev
voices (docs/experiments/2026-12-03-commands-amid-talk.md), and drops the marked words
like words below the threshold.

:func:`run_confidences` is the other way of judging the words of a phrase
(``DecoderSettings.word_rule = "run"``): the command words said between pauses longer
than ``run_pause`` form one run, and every word of a run is judged by the mean
confidence of the run, so a phrase is kept or dropped whole ("inner": only the weak words
between two confident words of a run are kept with it). :func:`keep_words` applies
the threshold (either way) and then the amid-talk rule, as the decoder does.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

__all__ = ["PAUSE", "FILLER", "COMMAND", "PathItem", "inside_talk", "word_runs", "run_confidences", "keep_words"]

#: Kinds of item on the best path.
PAUSE, FILLER, COMMAND = 0, 1, 2


@dataclass(frozen=True)
class PathItem:
    """One item of the best path: its kind and frames (all inclusive).

    ``phone_end`` is the last frame of the item's phones; frames ``phone_end + 1 ..
    last`` are its trailing pause (none for a pause or filler item). ``segment`` is the
    index of a command's word among the recognition's words (``-1`` for other items).
    """

    kind: int
    first: int
    phone_end: int
    last: int
    segment: int = -1


def _talk_length(items: Sequence[PathItem], j: int, step: int, confidences, threshold: float, gap: int) -> int:
    """Frames of talk (filler phones, phones of words below the threshold) in the stretch of
    talk starting at item ``j`` in direction ``step``; pauses shorter than ``gap`` inside it
    do not end it."""
    talk = pause = 0
    first = j
    while 0 <= j < len(items):
        it = items[j]
        if it.kind == PAUSE:
            pause += it.last - it.first + 1
            if pause >= gap:
                break
        elif it.kind == FILLER or confidences[it.segment] < threshold:
            trailing = it.last - it.phone_end
            if step < 0 and j != first:
                pause += trailing  # going back, a word's trailing pause comes before its phones
                if pause >= gap:
                    break
            talk += it.phone_end - it.first + 1
            pause = trailing if step > 0 else 0
        else:
            break  # a kept command
        j += step
    return talk


def _side_is_talk(items: Sequence[PathItem], at: int, step: int, pause: int, confidences, threshold: float,
                  gap: int, through: bool, min_talk: int) -> bool:
    """Whether at least ``min_talk`` frames of other talk start within ``gap`` frames of
    item ``at`` going in direction ``step`` (-1 before, +1 after), ``pause`` frames of pause
    already counted; with ``through``, kept commands closer than ``gap`` are passed over
    (the words said together are judged as one group)."""
    j = at + step
    while 0 <= j < len(items):
        it = items[j]
        if it.kind == PAUSE:
            pause += it.last - it.first + 1
        elif it.kind == FILLER:
            return pause < gap and _talk_length(items, j, step, confidences, threshold, gap) >= min_talk
        else:
            if step < 0:
                pause += it.last - it.phone_end  # its trailing pause lies between
            if confidences[it.segment] < threshold:  # a dropped word: other talk
                return pause < gap and _talk_length(items, j, step, confidences, threshold, gap) >= min_talk
            if not through or pause >= gap:
                return False  # a kept command: commands said together
            pause = 0 if step < 0 else it.last - it.phone_end
        if pause >= gap:
            return False
        j += step
    return False  # the start or the end of the recording


def inside_talk(items: Sequence[PathItem], confidences: Sequence[float], threshold: float, gap: int,
                sides: int = 2, through: bool = False, min_talk: int = 0) -> np.ndarray:
    """Which words have other talk closer than ``gap`` frames on ``sides`` sides (1 or 2).

    Parameters
    ----------
    items : sequence of PathItem
        The best path in time order.
    confidences : sequence of float
        Confidence of each word (indexed by ``PathItem.segment``).
    threshold : float
        Words below it count as other talk; only words at or above it can be marked.
    gap : int >= 0
        Frames of pause that separate a word from talk; 0 marks nothing.
    sides : {1, 2}
    through : bool
        Look past kept commands closer than ``gap`` (judge words said together as one
        group: a phrase between pauses is kept, a phrase inside a sentence is not).
    min_talk : int >= 0
        Frames of talk a side needs (filler phones and dropped words' phones, pauses
        shorter than ``gap`` inside it allowed) to count as talk.

    Returns
    -------
    ndarray of bool, one per word (``len(confidences)``).
    """
    if sides not in (1, 2):
        raise ValueError(f"sides must be 1 or 2, got {sides!r}")
    marked = np.zeros(len(confidences), dtype=bool)
    if gap <= 0:
        return marked
    for k, it in enumerate(items):
        if it.kind != COMMAND or confidences[it.segment] < threshold:
            continue
        before = _side_is_talk(items, k, -1, 0, confidences, threshold, gap, through, min_talk)
        after = _side_is_talk(items, k, +1, it.last - it.phone_end, confidences, threshold, gap, through, min_talk)
        marked[it.segment] = (before + after) >= sides
    return marked


def word_runs(items: Sequence[PathItem], pause: int, among=None) -> np.ndarray:
    """The run of each command word: a new run starts after more than ``pause`` frames
    between the end of one word's phones and the start of the next word (indexed by
    ``PathItem.segment``; filler and pause items in between count only as time).

    ``among`` (bool per word): only these words form runs, the others lying between count
    only as time and get run -1.
    """
    words = sorted((it for it in items if it.kind == COMMAND), key=lambda it: it.segment)
    runs = np.full(len(words), -1, dtype=np.int64)
    run, prev_end = -1, None
    for it in words:
        if among is not None and not among[it.segment]:
            continue
        if prev_end is None or it.first - prev_end - 1 > pause:
            run += 1
        runs[it.segment] = run
        prev_end = it.phone_end
    return runs


def run_confidences(items: Sequence[PathItem], confidences: Sequence[float], pause: int,
                    floor: float = 0.0) -> np.ndarray:
    """Each word's confidence replaced by the mean confidence of its run (:func:`word_runs`).

    A word alone between longer pauses keeps its own confidence, and so does a word below
    ``floor``, which is left out of the runs (the words around it are judged without it).
    """
    c = np.asarray(confidences, dtype=np.float64)
    if c.size == 0:
        return c.copy()
    among = c >= floor
    runs = word_runs(items, pause, among)
    out = c.copy()
    if among.any():
        r = runs[among]
        means = np.bincount(r, weights=c[among]) / np.bincount(r)
        out[among] = means[r]
    return out


def keep_words(items: Sequence[PathItem], confidences: Sequence[float], threshold: float, gap: int,
               min_talk: int = 0, run_pause: int | None = None, run_floor: float = 0.0, inner: bool = False
               ) -> tuple[np.ndarray, np.ndarray]:
    """Which words the decoder keeps: (kept, said amid talk), one bool per word.

    Each word is judged by its own confidence, or with ``run_pause`` (frames) by its run's
    mean (:func:`run_confidences`, words below ``run_floor`` left out of the runs); with
    ``inner`` too, a run whose mean reaches ``threshold`` keeps only its words that reach
    it on their own and the weaker words between two of those (a weak word at either end
    of a run stays dropped), and a run below it is dropped whole. A word judged below
    ``threshold`` is dropped, and so is a word :func:`inside_talk` marks (one side, past
    kept commands, ``min_talk`` frames of talk; ``gap`` 0 or a threshold of 0 marks
    nothing), with the judged confidences.
    """
    own = np.asarray(confidences, dtype=np.float64)
    judged = own
    if run_pause is not None:
        judged = run_confidences(items, own, run_pause, run_floor)
        if inner:
            judged = _inner_judged(items, own, judged, threshold, run_pause, run_floor)
    above = judged >= threshold
    inside = np.zeros(judged.shape[0], dtype=bool)
    if gap > 0 and threshold > 0 and above.any():
        inside = inside_talk(items, judged, threshold, gap, sides=1, through=True, min_talk=min_talk)
    return above & ~inside, inside


def _inner_judged(items, own: np.ndarray, means: np.ndarray, threshold: float, pause: int,
                  floor: float) -> np.ndarray:
    """The ``inner`` judging of :func:`keep_words`: own confidences, run means for the weak
    words between two words of their run that reach ``threshold``, and a run below it
    judged by its mean whole."""
    runs = word_runs(items, pause, own >= floor)
    out = own.copy()
    for r in np.unique(runs[runs >= 0]):
        idx = np.flatnonzero(runs == r)
        if means[idx[0]] < threshold:
            out[idx] = np.minimum(own[idx], means[idx])
            continue
        strong = idx[own[idx] >= threshold]
        if strong.size:
            between = idx[(idx > strong.min()) & (idx < strong.max())]
            out[between] = np.maximum(own[between], means[between])
    return out
