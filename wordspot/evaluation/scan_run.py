"""Scanning the recordings of a time-label file and scoring what was found.

The glue between :mod:`wordspot.stream.scan` and :mod:`wordspot.evaluation.timed`; the
command line (``wordspot scan --reference``) and the demo both call :func:`evaluate_scan`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

from wordspot.evaluation.time_labels import TimedCommand, read_time_labels
from wordspot.evaluation.timed import TimedScore, score_timed
from wordspot.stream.scan import ScanResult, scan_files

__all__ = ["ScanEvaluation", "evaluate_scan", "score_results"]


@dataclass
class ScanEvaluation:
    """The score of a scan against time labels, with each file's result and the time taken."""

    score: TimedScore
    results: list[ScanResult] = field(repr=False)
    seconds: float

    @property
    def failed(self) -> list[tuple[str, str]]:
        """Files that could not be read and why (they count as finding nothing)."""
        return [(r.path, r.error) for r in self.results if r.error]


def evaluate_scan(recognizer, labels, *, settings=None, jobs: int = 1, quiet: bool = True) -> ScanEvaluation:
    """Scan every recording of a time-label file and score the commands found.

    Parameters
    ----------
    recognizer : wordspot.decoding.decoder.Recognizer
    labels : str, os.PathLike or list of LabelledRecording
        A time-label file (see :mod:`wordspot.evaluation.time_labels`) or its records.
    settings : wordspot.stream.scan.ScanSettings, optional
    """
    recordings = read_time_labels(labels) if not isinstance(labels, list) else labels
    began = time.perf_counter()
    results = scan_files(recognizer, [r.path for r in recordings], settings=settings, jobs=jobs, quiet=quiet)
    seconds = time.perf_counter() - began
    return ScanEvaluation(score_results(recordings, results), results, seconds)


def score_results(recordings, results) -> TimedScore:
    """Score scan results (one per labelled recording, any order) against the labels."""
    found = {r.path: [TimedCommand(c.start, c.end, c.words) for c in r.commands] for r in results}
    durations = {r.path: r.duration for r in results}
    return score_timed(recordings, found, durations)
