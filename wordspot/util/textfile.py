"""Reading a user's files (manifest, lexicon, time labels; audio paths) with one clear error per problem."""

from __future__ import annotations

import csv
import io
import os
from pathlib import Path

__all__ = ["read_user_text", "check_is_file", "csv_with_header"]


def read_user_text(path, *, error: type, kind: str, missing: str, names: str, save_as: str,
                   encoding: str = "utf-8") -> tuple[Path, str]:
    """Return ``(path, text)`` of a text file a person wrote.

    Parameters
    ----------
    path : str or path-like
    error : exception class
        Raised (with the file name and a fix) for every problem.
    kind : str
        What the file is, in messages ("manifest", "lexicon").
    missing : str
        How the missing file is called ("manifest", "lexicon file").
    names : str
        What the user should name instead of a folder ("manifest CSV file").
    save_as : str
        How to fix an encoding problem ("save the manifest as UTF-8 CSV").
    encoding : str
        Text encoding ("utf-8", or "utf-8-sig" to accept a byte-order mark).
    """
    try:
        p = Path(os.fspath(path))
    except TypeError:
        raise error(f"{kind} path must be a file name, got {path!r}") from None
    check_is_file(p, error=error, not_found=f"{missing} not found; check the path",
                  is_folder=f"is a folder; name the {names}")
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise error(f"{p}: cannot read the {kind} ({exc.strerror or exc})") from None
    try:
        text = data.decode(encoding)
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise error(f"{p}, line {line}: not valid UTF-8 text; {save_as}") from None
    return p, text


def check_is_file(path: Path, *, error: type, not_found: str, is_folder: str) -> None:
    """Raise ``error`` naming ``path`` unless it is an existing file that is not a folder.

    ``not_found`` and ``is_folder`` are the messages' tails (after ``"<path>: "``).
    """
    try:
        found, folder = path.exists(), path.is_dir()
    except (OSError, ValueError) as exc:
        raise error(f"{str(path)[:200]}: cannot use this path ({getattr(exc, 'strerror', None) or exc})") from None
    if not found:
        raise error(f"{path}: {not_found}")
    if folder:
        raise error(f"{path}: {is_folder}")


def csv_with_header(p: Path, text: str, *, error: type, required, kind: str, example: str, rows: str):
    """Start reading CSV ``text`` of file ``p``: skip blank lines, check the header.

    Parameters
    ----------
    required : sequence of str
        Column names the header must hold (compared lower-case, without spaces).
    kind, example, rows : str
        For messages: what the file is ("manifest"), its header (``path,transcript,speaker``)
        and what a row stands for ("recording").

    Returns
    -------
    reader : csv.reader
        Positioned after the header (``reader.line_num`` gives line numbers).
    index : dict
        Column name -> position, for every column of the header.

    Raises
    ------
    error
        The file is empty or the header lacks a required column; a ``csv.Error`` while
        reading the header is turned into one too.
    """
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    try:
        header = next(reader, None)
        while header is not None and not any(cell.strip() for cell in header):
            header = next(reader, None)
    except csv.Error as exc:
        raise error(f"{p}, line {reader.line_num}: not valid CSV ({exc}); check quotes and commas") from None
    if header is None:
        raise error(f"{p}: {kind} is empty; it needs a header row `{example}` and one row per {rows}")
    names = [cell.strip().lower() for cell in header]
    missing = [c for c in required if c not in names]
    if missing:
        raise error(
            f"{p}, line {reader.line_num}: header lacks column(s) {', '.join(missing)}; "
            f"the first row must name the columns, e.g. `{example}` (found: {','.join(names)})"
        )
    return reader, {name: i for i, name in reversed(list(enumerate(names)))}
