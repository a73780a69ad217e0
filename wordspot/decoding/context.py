"""Commands said inside other talk: talk right before and right after a word.

A person gives a command between pauses, alone or with other commands ("oven three
minutes"); a command word heard in the middle of a sentence ("when" heard as "one" in
"wipe the counter when you have a moment") has other talk right before and right after
it. On the best path, other talk shows as the filler's phones or as command words whose
confidence is below the threshold (the search, paying a penalty for every filler phone,
often spells a sentence with poor command words rather than with the filler).

:func:`inside_talk` marks a kept word as *inside talk* when, on both of its sides (or on
either, with ``sides=1``), other talk comes closer than ``gap`` frames: the pause between
them (pause items and the words' own trailing pauses) is shorter than that. A kept
neighbouring command, the start or the end of the recording ends the search on that side
with "no talk there". The decoder drops such words like words below the threshold
(:class:`wordspot.decoding.decoder.DecoderSettings.talk_gap`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

__all__ = ["PAUSE", "FILLER", "COMMAND", "PathItem", "inside_talk"]

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


def _side_is_talk(items: Sequence[PathItem], at: int, step: int, pause: int, confidences, threshold: float,
                  gap: int, through: bool) -> bool:
    """Whether other talk starts within ``gap`` frames of item ``at`` going in direction
    ``step`` (-1 before, +1 after), ``pause`` frames of pause already counted; with
    ``through``, kept commands closer than ``gap`` are passed over (the words said together
    are judged as one group)."""
    j = at + step
    while 0 <= j < len(items):
        it = items[j]
        if it.kind == PAUSE:
            pause += it.last - it.first + 1
        elif it.kind == FILLER:
            return pause < gap
        else:
            if step < 0:
                pause += it.last - it.phone_end  # its trailing pause lies between
            if confidences[it.segment] < threshold:
                return pause < gap  # a dropped word: other talk
            if not through or pause >= gap:
                return False  # a kept command: commands said together
            pause = 0 if step < 0 else it.last - it.phone_end
        if pause >= gap:
            return False
        j += step
    return False  # the start or the end of the recording


def inside_talk(items: Sequence[PathItem], confidences: Sequence[float], threshold: float, gap: int,
                sides: int = 2, through: bool = False) -> np.ndarray:
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
        before = _side_is_talk(items, k, -1, 0, confidences, threshold, gap, through)
        after = _side_is_talk(items, k, +1, it.last - it.phone_end, confidences, threshold, gap, through)
        marked[it.segment] = (before + after) >= sides
    return marked
