"""Manifests: which recording says which words, by which speaker.

A manifest is a CSV file (UTF-8) with a header row::

    path,transcript,speaker
    takes/knead-01.wav,knead the dough,ana
    /data/oven/oven-on.flac,oven on,ben

``path`` is relative to the manifest's folder (or absolute); ``transcript`` is the words
spoken, separated by spaces (lower-cased here), or nothing at all for a recording in which
no command is said (background, chatter, the mixer running: "no command here"; every word
recognised in it is a false accept); ``speaker`` is optional ("unknown" when the
column is absent or the cell empty). Extra columns are ignored.

:func:`check_manifest` reports every missing file and every word without a pronunciation in
one error, so a user can fix them all in one go.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from wordspot.errors import ManifestError
from wordspot.language.lexicon import invalid_word_character
from wordspot.util.textfile import csv_with_header, read_user_text

__all__ = ["Utterance", "read_manifest", "check_manifest", "split_by_recording", "MAX_LISTED_PROBLEMS"]

#: At most this many problems are spelled out in one error; the rest are counted.
MAX_LISTED_PROBLEMS = 20

_REQUIRED = ("path", "transcript")


@dataclass(frozen=True)
class Utterance:
    """One recording and what is said in it.

    Attributes
    ----------
    path : Path
        The audio file (resolved against the manifest's folder).
    words : tuple of str
        The transcript, lower-case; empty when no command is said in the recording.
    speaker : str
        Who speaks ("unknown" if the manifest does not say).
    row : int
        Line number in the manifest (the header is line 1), for messages.
    """

    path: Path
    words: tuple[str, ...]
    speaker: str
    row: int


def _limit(problems: Sequence[str]) -> str:
    shown = list(problems[:MAX_LISTED_PROBLEMS])
    if len(problems) > MAX_LISTED_PROBLEMS:
        shown.append(f"... and {len(problems) - MAX_LISTED_PROBLEMS} more")
    return "\n  ".join(shown)


def read_manifest(path) -> list[Utterance]:
    """Read a manifest CSV into utterances, in file order.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    list of Utterance

    Raises
    ------
    ManifestError
        Missing or unreadable file, not UTF-8, not CSV, no ``path``/``transcript`` column,
        no rows, or rows with an empty path (all such rows are listed). An empty transcript
        is allowed: it marks a recording with no command in it.
    """
    p, text = read_user_text(path, error=ManifestError, kind="manifest", missing="manifest",
                             names="manifest CSV file",
                             save_as="save the manifest as UTF-8 CSV", encoding="utf-8-sig")
    if "\x00" in text:
        raise ManifestError(f"{p}: holds NUL characters, so it is not a CSV text file")
    reader, columns = csv_with_header(p, text, error=ManifestError, required=_REQUIRED, kind="manifest",
                                      example="path,transcript,speaker", rows="recording")
    try:
        i_path, i_text = columns["path"], columns["transcript"]
        i_speaker = columns.get("speaker")
        base = p.parent
        utterances: list[Utterance] = []
        problems: list[str] = []
        for cells in reader:
            row = reader.line_num
            if not any(cell.strip() for cell in cells):
                continue
            file_cell = cells[i_path].strip() if i_path < len(cells) else ""
            text_cell = cells[i_text].strip() if i_text < len(cells) else ""
            speaker = cells[i_speaker].strip() if i_speaker is not None and i_speaker < len(cells) else ""
            if not file_cell:
                problems.append(f"line {row}: empty path")
                continue
            words = tuple(text_cell.lower().split())
            audio = Path(file_cell)
            if not audio.is_absolute():
                audio = base / audio
            utterances.append(Utterance(path=audio, words=words, speaker=speaker or "unknown", row=row))
    except csv.Error as exc:
        raise ManifestError(f"{p}, line {reader.line_num}: not valid CSV ({exc}); check quotes and commas") from None
    if problems:
        raise ManifestError(f"{p}: {len(problems)} row(s) to fix:\n  {_limit(problems)}")
    if not utterances:
        raise ManifestError(f"{p}: manifest has a header but no recordings; add one row per recording")
    return utterances


def check_manifest(utterances: Sequence[Utterance], lexicon, *, manifest=None) -> None:
    """Check that every audio file exists and every word has a pronunciation.

    Parameters
    ----------
    utterances : sequence of Utterance
    lexicon : wordspot.language.lexicon.Lexicon
        Anything supporting ``word in lexicon``.
    manifest : str or os.PathLike, optional
        The manifest's name, for the message.

    Raises
    ------
    ManifestError
        One error listing all problems: each missing file (with its line) and each word not in
        the lexicon (with the lines it is on), and how to fix them.
    """
    name = str(manifest) if manifest is not None else "manifest"
    problems: list[str] = []
    unknown: dict[str, list[int]] = {}
    for utt in utterances:
        try:
            exists, folder = utt.path.exists(), utt.path.is_dir()
        except (OSError, ValueError) as exc:
            problems.append(f"line {utt.row}: cannot use the path {str(utt.path)[:200]} ({getattr(exc, 'strerror', None) or exc})")
            exists, folder = True, False
        if not exists:
            problems.append(f"line {utt.row}: audio file not found: {utt.path}")
        elif folder:
            problems.append(f"line {utt.row}: is a folder, not an audio file: {utt.path}")
        for word in utt.words:
            if word not in lexicon:
                rows = unknown.setdefault(word, [])
                if not rows or rows[-1] != utt.row:
                    rows.append(utt.row)
    spelled = {w: rows for w, rows in unknown.items() if invalid_word_character(w) is not None}
    for word in spelled:
        del unknown[word]
    for word, rows in spelled.items():
        listed = ", ".join(str(r) for r in rows[:10]) + (f" and {len(rows) - 10} more" if len(rows) > 10 else "")
        problems.append(
            f"transcript word {word!r} holds {invalid_word_character(word)!r} (line{'s' if len(rows) > 1 else ''} {listed}); "
            "write transcripts as plain words separated by spaces, without punctuation"
        )
    for word, rows in unknown.items():
        listed = ", ".join(str(r) for r in rows[:10]) + (f" and {len(rows) - 10} more" if len(rows) > 10 else "")
        problems.append(f"word {word!r} is not in the lexicon (line{'s' if len(rows) > 1 else ''} {listed})")
    if not problems:
        return
    hint = ""
    if unknown:
        words = " ".join(list(unknown)[:10])
        hint = f"\nadd the missing words to the lexicon: `wordspot lexicon suggest {words}` prints lines to paste"
    raise ManifestError(f"{name}: {len(problems)} problem(s):\n  {_limit(problems)}{hint}")


def split_by_recording(utterances: Sequence, share: float, seed: int = 0) -> tuple[list, list]:
    """(kept part, held-out part) of ``utterances``, both in manifest order, by recording.

    About ``share`` of every speaker's recordings are held out (rounded at random so that
    the expected number is exact), spread evenly over the speaker's recordings in a seeded
    random order, whatever their transcripts; at least one recording stays in the kept
    part. For recordings whose transcripts do not repeat (sentences, one take per word),
    where a split per transcript holds nothing out.
    """
    rng = np.random.default_rng([seed, 0x7265636F])
    by_speaker: dict[str, list[int]] = {}
    for i, u in enumerate(utterances):
        by_speaker.setdefault(u.speaker, []).append(i)
    held: set[int] = set()
    for speaker in sorted(by_speaker):
        members = by_speaker[speaker]
        n = len(members)
        k = min(int(share * n + rng.random()), n)
        if k <= 0:
            continue
        order = [members[j] for j in rng.permutation(n)]
        offset = rng.random()
        held.update(order[int((j + offset) * n / k)] for j in range(k))
    if held and len(held) == len(utterances):
        held.discard(max(held))
    return ([u for i, u in enumerate(utterances) if i not in held],
            [u for i, u in enumerate(utterances) if i in held])
