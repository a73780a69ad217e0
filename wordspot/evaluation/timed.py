"""Scoring commands found in long recordings against time labels.

Matching rule, per recording: a found command and a labelled one *can* match when their
words are the same and their spans overlap by more than zero seconds. Among those pairs,
the one with the longest overlap is matched first (ties: earlier label, then earlier found
command), then the longest of the pairs left whose two sides are both still free, and so
on; each label and each found command is matched at most once. A matched pair is a *hit*;
a label left over is a *miss*; a found command left over is a *false accept* (counted per
hour of scanned audio; those overlapping some label are also counted as *wrong words*).

Boundary error of a hit: found start minus labelled start, and found end minus labelled
end, in seconds (negative: early).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from wordspot.errors import ScoringError
from wordspot.evaluation.time_labels import TimedCommand

__all__ = ["BOUNDARY_TOLERANCE", "TimedMatch", "RecordingScore", "TimedScore", "match_commands", "score_timed",
           "format_timed_score"]

#: A hit's start and end both within this many seconds of the label count as "on time".
BOUNDARY_TOLERANCE = 0.3


def _overlap(a: TimedCommand, b: TimedCommand) -> float:
    return min(a.end, b.end) - max(a.start, b.start)


@dataclass(frozen=True)
class TimedMatch:
    """Indices of a matched label and found command, and the overlap in seconds."""

    label: int
    found: int
    overlap: float


def match_commands(labels, found) -> list[TimedMatch]:
    """Match one recording's found commands to its labels (see the module docstring).

    Parameters
    ----------
    labels, found : sequence of TimedCommand (or anything with start, end and words)

    Returns
    -------
    list of TimedMatch, in label order
    """
    pairs = []
    for i, a in enumerate(labels):
        for j, b in enumerate(found):
            if tuple(a.words) == tuple(b.words):
                ov = _overlap(a, b)
                if ov > 0:
                    pairs.append((-ov, i, j))
    pairs.sort()
    used_label, used_found, out = set(), set(), []
    for neg, i, j in pairs:
        if i not in used_label and j not in used_found:
            used_label.add(i)
            used_found.add(j)
            out.append(TimedMatch(i, j, -neg))
    return sorted(out, key=lambda m: m.label)


@dataclass
class RecordingScore:
    """One recording's labels, found commands and their matches."""

    path: str
    labels: tuple
    found: tuple
    matches: list[TimedMatch]
    seconds: float

    @property
    def misses(self) -> list:
        hit = {m.label for m in self.matches}
        return [c for i, c in enumerate(self.labels) if i not in hit]

    @property
    def false_accepts(self) -> list:
        hit = {m.found for m in self.matches}
        return [c for j, c in enumerate(self.found) if j not in hit]


@dataclass
class TimedScore:
    """Hits, misses, false accepts and boundary errors over a set of recordings.

    Attributes
    ----------
    recordings : list of RecordingScore
    labels, hits, misses, false_accepts, wrong_words : int
    hours : float
        Scanned audio in hours.
    start_errors, end_errors : ndarray
        Per hit, found minus labelled time in seconds.
    """

    recordings: list[RecordingScore]
    labels: int
    hits: int
    misses: int
    false_accepts: int
    wrong_words: int
    hours: float
    start_errors: np.ndarray = field(repr=False)
    end_errors: np.ndarray = field(repr=False)

    @property
    def hit_rate(self) -> float:
        return self.hits / self.labels if self.labels else float("nan")

    @property
    def false_accepts_per_hour(self) -> float:
        return self.false_accepts / self.hours if self.hours > 0 else float("nan")

    def boundary(self) -> dict:
        """Mean and median absolute start and end error (s), and the share of hits on time."""
        s, e = np.abs(self.start_errors), np.abs(self.end_errors)
        if not s.size:
            nan = float("nan")
            return {"start_mean": nan, "start_median": nan, "end_mean": nan, "end_median": nan, "on_time": nan}
        return {
            "start_mean": float(s.mean()), "start_median": float(np.median(s)),
            "end_mean": float(e.mean()), "end_median": float(np.median(e)),
            "on_time": float(np.mean((s <= BOUNDARY_TOLERANCE) & (e <= BOUNDARY_TOLERANCE))),
        }


def score_timed(labelled, found_by_path, seconds_by_path) -> TimedScore:
    """Score found commands against labelled recordings.

    Parameters
    ----------
    labelled : sequence of LabelledRecording
    found_by_path : mapping str -> sequence of commands (start, end, words)
        Keyed by ``str(recording.path)``; a recording missing here found nothing.
    seconds_by_path : mapping str -> float
        Duration of each scanned recording.

    Raises
    ------
    ScoringError
        No recordings, or a recording without a duration.
    """
    if not labelled:
        raise ScoringError("no labelled recordings to score")
    scores = []
    starts, ends = [], []
    for rec in labelled:
        key = str(rec.path)
        if key not in seconds_by_path:
            raise ScoringError(f"{key}: no duration given for this labelled recording (was it scanned?)")
        found = tuple(found_by_path.get(key, ()))
        matches = match_commands(rec.commands, found)
        scores.append(RecordingScore(key, rec.commands, found, matches, float(seconds_by_path[key])))
        for m in matches:
            starts.append(found[m.found].start - rec.commands[m.label].start)
            ends.append(found[m.found].end - rec.commands[m.label].end)
    n_labels = sum(len(r.labels) for r in scores)
    hits = sum(len(r.matches) for r in scores)
    fas = [(r, c) for r in scores for c in r.false_accepts]
    wrong = sum(1 for r, c in fas if any(_overlap(c, lab) > 0 for lab in r.labels))
    return TimedScore(
        recordings=scores, labels=n_labels, hits=hits, misses=n_labels - hits, false_accepts=len(fas),
        wrong_words=wrong, hours=sum(r.seconds for r in scores) / 3600.0,
        start_errors=np.asarray(starts, dtype=float), end_errors=np.asarray(ends, dtype=float),
    )


def format_timed_score(score: TimedScore) -> str:
    """A few lines of plain text summing up a :class:`TimedScore`."""
    b = score.boundary()
    lines = [
        f"recordings {len(score.recordings)}, {score.hours * 60:.1f} min of audio, {score.labels} labelled commands",
        f"found with the right words {score.hits} ({100 * score.hit_rate:.1f}%: hits), "
        f"missed {score.misses}",
        f"found where none was said or with the wrong words {score.false_accepts} "
        f"({score.false_accepts_per_hour:.1f} per hour: false accepts; {score.wrong_words} of them wrong words "
        "on a command)",
    ]
    if score.hits:
        lines.append(
            f"timing of the commands found: starts off by {b['start_mean']:.3f} s on average "
            f"({b['start_median']:.3f} s median), ends by {b['end_mean']:.3f} s ({b['end_median']:.3f} s); "
            f"{100 * b['on_time']:.1f}% within {BOUNDARY_TOLERANCE:g} s at both ends"
        )
    return "\n".join(lines)
