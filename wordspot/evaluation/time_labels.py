"""Time labels: where the commands are in long recordings.

A time-label file is a CSV file (UTF-8) with the header ``path,start,end,words`` and one
row per command said in a recording::

    path,start,end,words
    long/morning.flac,12.48,13.61,oven start
    long/morning.flac,95.02,96.30,timer five minutes
    long/quiet-night.flac,,,

``start`` and ``end`` are seconds from the start of the file to the first and just after
the last sample of the spoken command; ``words`` are separated by spaces (lower-cased
here). A recording in which no command is said has one row with ``start``, ``end`` and
``words`` all empty, so that it is still scored (every command found in it is a false
accept). ``path`` is relative to the label file's folder, or absolute. Extra columns are
ignored.
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass
from pathlib import Path

from wordspot.corpus import MAX_LISTED_PROBLEMS
from wordspot.errors import ManifestError
from wordspot.util.atomic import write_bytes_atomically
from wordspot.util.textfile import csv_with_header, read_user_text

__all__ = ["TimedCommand", "LabelledRecording", "read_time_labels", "write_time_labels", "COLUMNS"]

#: The header of a time-label file.
COLUMNS = ("path", "start", "end", "words")


@dataclass(frozen=True)
class TimedCommand:
    """One command said in a recording: words and seconds ``[start, end]``."""

    start: float
    end: float
    words: tuple[str, ...]


@dataclass(frozen=True)
class LabelledRecording:
    """A recording and the commands said in it (none for a recording without commands)."""

    path: Path
    commands: tuple[TimedCommand, ...]


def _seconds(cell: str):
    try:
        x = float(cell)
    except ValueError:
        return None
    return x if math.isfinite(x) and x >= 0 else None


def read_time_labels(path) -> list[LabelledRecording]:
    """Read a time-label file; recordings in order of first appearance, commands by start.

    Raises
    ------
    ManifestError
        Missing, unreadable or empty file, no ``path``/``start``/``end``/``words`` column,
        or rows to fix (all listed at once: empty path, a time that is not a number of
        seconds >= 0, end before start, words without times or times without words,
        commands of one recording that overlap, a recording listed both with and
        without commands).
    """
    p, text = read_user_text(path, error=ManifestError, kind="time-label file", missing="time-label file",
                             names="time-label CSV file", save_as="save the time labels as UTF-8 CSV",
                             encoding="utf-8-sig")
    reader, columns = csv_with_header(p, text, error=ManifestError, required=COLUMNS, kind="time-label file",
                                      example=",".join(COLUMNS), rows="command")
    index = {c: columns[c] for c in COLUMNS}
    try:
        order: dict[Path, list] = {}
        empty_rows: dict[Path, int] = {}
        problems: list[str] = []
        for cells in reader:
            row = reader.line_num
            if not any(cell.strip() for cell in cells):
                continue
            get = {c: cells[i].strip() if i < len(cells) else "" for c, i in index.items()}
            if not get["path"]:
                problems.append(f"line {row}: empty path")
                continue
            audio = Path(get["path"])
            if not audio.is_absolute():
                audio = p.parent / audio
            commands = order.setdefault(audio, [])
            if not (get["start"] or get["end"] or get["words"]):
                empty_rows[audio] = row
                continue
            start, end = _seconds(get["start"]), _seconds(get["end"])
            words = tuple(get["words"].lower().split())
            if start is None or end is None:
                problems.append(f"line {row}: start and end must be seconds >= 0 "
                                f"(got {get['start']!r}, {get['end']!r})")
            elif end < start:
                problems.append(f"line {row}: end {end:g} s is before start {start:g} s")
            elif not words:
                problems.append(f"line {row}: times without words; a recording with no command "
                                "has one row with start, end and words all empty")
            else:
                commands.append((start, end, words, row))
    except csv.Error as exc:
        raise ManifestError(f"{p}, line {reader.line_num}: not valid CSV ({exc}); check quotes and commas") from None
    recordings = []
    for audio, commands in order.items():
        commands.sort()
        if commands and audio in empty_rows:
            problems.append(f"line {empty_rows[audio]}: {audio.name} is listed without commands "
                            f"and with {len(commands)}")
        for a, b in zip(commands[:-1], commands[1:]):
            if b[0] < a[1]:
                problems.append(f"lines {a[3]} and {b[3]}: commands of {audio.name} overlap in time")
        recordings.append(LabelledRecording(audio, tuple(TimedCommand(s, e, w) for s, e, w, _ in commands)))
    if problems:
        shown = problems[:MAX_LISTED_PROBLEMS] + (
            [f"... and {len(problems) - MAX_LISTED_PROBLEMS} more"] if len(problems) > MAX_LISTED_PROBLEMS else [])
        raise ManifestError(f"{p}: {len(problems)} row(s) to fix:\n  " + "\n  ".join(shown))
    if not recordings:
        raise ManifestError(f"{p}: time-label file has a header but no rows; add one row per command")
    return recordings


def write_time_labels(path, recordings) -> Path:
    """Write recordings and their commands as a time-label file (atomically).

    Paths inside the file's folder are written relative to it, others absolute; times
    with millisecond precision.
    """
    target = Path(os.fspath(path))
    folder = target.parent.resolve()
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(COLUMNS)
    for rec in recordings:
        audio = Path(rec.path).resolve()
        name = audio.relative_to(folder).as_posix() if audio.is_relative_to(folder) else str(audio)
        if not rec.commands:
            w.writerow([name, "", "", ""])
        for c in rec.commands:
            w.writerow([name, f"{c.start:.3f}", f"{c.end:.3f}", " ".join(c.words)])
    return write_bytes_atomically(target, out.getvalue().encode("utf-8"))
