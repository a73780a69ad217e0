"""The takes folder: recorded WAV files and the manifests that list them.

Layout (every path in a manifest is relative to the folder)::

    FOLDER/pronunciations.txt                          the words and their phones (a lexicon
                                                       file) unless ``--lexicon`` names another
    FOLDER/train.csv        path,transcript,speaker   takes to train on
    FOLDER/held-out.csv     path,transcript,speaker   takes kept for testing
    FOLDER/audio/SPEAKER/WORD-N.wav                    16-bit PCM at the model rate
    FOLDER/set-aside/...    takes found without a manifest row (moved, never deleted)

A take is saved in two atomic steps under one lock: its WAV file first, then the
manifest with its new row. A crash between the two leaves a WAV file that no manifest
lists; :meth:`TakeFolder.reconcile` (run when the folder is opened) moves such files into
``set-aside/`` and reports manifest rows whose file is missing, so the manifests never
name a file that is not there because of us, and nothing recorded is lost.

Takes folders made before the pronunciation file got its present name hold it as
``lexicon.txt``; :func:`folder_pronunciations` still finds it there and says so once.
"""

from __future__ import annotations

import csv
import io
import os
import re
import shutil
import threading
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from wordspot.audio.writing import write_wav
from wordspot.errors import ManifestError, WordspotError
from wordspot.language.lexicon import check_word
from wordspot.util.atomic import is_temporary, write_bytes_atomically
from wordspot.web.words import MAX_WORD_LENGTH

try:  # POSIX: also keep a second process on the same folder out while we write
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None

__all__ = [
    "TRAIN_MANIFEST",
    "HELD_OUT_MANIFEST",
    "PRONUNCIATIONS_FILE",
    "OLD_PRONUNCIATIONS_FILE",
    "folder_pronunciations",
    "AUDIO_FOLDER",
    "SET_ASIDE_FOLDER",
    "ManifestRow",
    "Reconciliation",
    "SavedTake",
    "TakeFolder",
    "speaker_slug",
]

TRAIN_MANIFEST = "train.csv"
HELD_OUT_MANIFEST = "held-out.csv"
AUDIO_FOLDER = "audio"
SET_ASIDE_FOLDER = "set-aside"
#: The takes folder's lexicon file: the words to record and their phones.
PRONUNCIATIONS_FILE = "pronunciations.txt"
#: Its earlier name; a folder that has only this file keeps using it.
OLD_PRONUNCIATIONS_FILE = "lexicon.txt"
_LOCK_FILE = ".wordspot-takes.lock"
_HEADER = ("path", "transcript", "speaker")
_SLUG_RE = re.compile(r"[^a-z0-9_-]+")


def speaker_slug(name: str) -> str:
    """A folder name for a speaker: lower case letters, digits, ``-`` and ``_`` only."""
    slug = _SLUG_RE.sub("-", str(name).strip().lower()).strip("-")
    if not slug:
        raise WordspotError(f"speaker name {name!r} has no letters or digits; type a name such as baker-a")
    return slug[:40]


def folder_pronunciations(folder) -> tuple[Path, str | None]:
    """The takes folder's pronunciation file, and a note when it goes by its earlier name.

    Returns ``FOLDER/pronunciations.txt`` (which need not exist yet), or
    ``FOLDER/lexicon.txt`` when only that older file is there: it is read and added to
    where it is, never moved or copied, so nothing in it is lost and commands that name it
    keep working. The note (None when there is nothing to say) is one plain sentence.
    """
    folder = Path(folder)
    new, old = folder / PRONUNCIATIONS_FILE, folder / OLD_PRONUNCIATIONS_FILE
    if not old.is_file():
        return new, None
    if new.exists():
        return new, (f"{old} is not read: this folder also has {new}, which is; move any words you "
                     f"still need from {OLD_PRONUNCIATIONS_FILE} into it")
    return old, (f"the words and phones are read from and added to {old}, the name this file had before; "
                 f"new takes folders call it {PRONUNCIATIONS_FILE}")


@dataclass(frozen=True)
class ManifestRow:
    """One row of a manifest as written: relative path, transcript, speaker."""

    path: str
    transcript: str
    speaker: str


@dataclass
class Reconciliation:
    """What :meth:`TakeFolder.reconcile` found and did."""

    set_aside: list[str] = field(default_factory=list)
    missing: list[tuple[str, str]] = field(default_factory=list)
    unfinished: list[str] = field(default_factory=list)

    def notes(self) -> list[str]:
        """Plain-language lines for the page and the console."""
        out = []
        if self.set_aside:
            out.append(f"{len(self.set_aside)} take(s) had no row in a manifest (saving was interrupted); "
                       f"they were moved to {SET_ASIDE_FOLDER}/ so you can listen to them: "
                       + ", ".join(self.set_aside))
        for manifest, path in self.missing:
            out.append(f"{manifest} lists {path}, but the file is missing; record it again or remove the row")
        if self.unfinished:
            out.append(f"removed {len(self.unfinished)} unfinished temporary file(s): " + ", ".join(self.unfinished))
        return out


@dataclass(frozen=True)
class SavedTake:
    """Where a take went: its path relative to the folder and the manifest that lists it."""

    path: str
    manifest: str
    word: str
    speaker: str


def _read_rows(path: Path) -> list[ManifestRow]:
    if not path.is_file():
        return []
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise ManifestError(f"{path}: cannot read the manifest ({exc}); save it as UTF-8 CSV") from None
    reader = csv.DictReader(io.StringIO(text, newline=""))
    if reader.fieldnames is None:
        return []
    names = [n.strip().lower() for n in reader.fieldnames]
    if "path" not in names or "transcript" not in names:
        raise ManifestError(f"{path}: the first row must name the columns path,transcript,speaker; "
                            "fix the header or move the file away")
    reader.fieldnames = names
    rows = []
    try:
        for r in reader:
            if (r.get("path") or "").strip():
                rows.append(ManifestRow(r["path"].strip(), (r.get("transcript") or "").strip(),
                                        (r.get("speaker") or "").strip()))
    except csv.Error as exc:
        raise ManifestError(f"{path}: not valid CSV ({exc}); check quotes and commas") from None
    return rows


class TakeFolder:
    """A folder of takes and its two manifests; safe to use from several threads.

    Parameters
    ----------
    folder : str or path
        Created if missing.
    sample_rate : int
        Rate of the WAV files written (the model rate).
    """

    def __init__(self, folder, *, sample_rate: int = 16000):
        self.folder = Path(folder).resolve()
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise WordspotError(f"cannot create the takes folder {folder}: {exc.strerror or exc}") from None
        if not self.folder.is_dir():
            raise WordspotError(f"{folder} is not a folder; choose another path for the takes")
        self.sample_rate = int(sample_rate)
        self._lock = threading.Lock()

    # -- locking -----------------------------------------------------------------------
    @contextmanager
    def locked(self):
        """Hold the folder's lock (threads of this process, and other processes on POSIX)."""
        with self._lock:
            if fcntl is None:  # pragma: no cover
                yield
                return
            with open(self.folder / _LOCK_FILE, "a+b") as handle:
                fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
                try:
                    yield
                finally:
                    fcntl.flock(handle.fileno(), fcntl.LOCK_UN)

    # -- reading -----------------------------------------------------------------------
    def manifest_path(self, held_out: bool = False) -> Path:
        return self.folder / (HELD_OUT_MANIFEST if held_out else TRAIN_MANIFEST)

    def rows(self, held_out: bool = False) -> list[ManifestRow]:
        """The rows of ``train.csv`` (or ``held-out.csv``), in file order."""
        return _read_rows(self.manifest_path(held_out))

    def counts(self, speaker: str | None = None) -> dict[str, list[int]]:
        """Word -> [takes in train.csv, takes in held-out.csv] (of one speaker if given)."""
        out: dict[str, list[int]] = {}
        for k, held in enumerate((False, True)):
            for r in self.rows(held):
                if speaker is not None and r.speaker != speaker:
                    continue
                out.setdefault(r.transcript.lower(), [0, 0])[k] += 1
        return out

    def resolve(self, relative: str) -> Path:
        """The file a relative path names, refusing anything outside the folder.

        Raises
        ------
        WordspotError
            The path is absolute or leads out of the folder (``..``).
        """
        candidate = Path(relative)
        if candidate.is_absolute() or ".." in candidate.parts:
            raise WordspotError(f"{relative}: only paths inside the takes folder can be read")
        full = (self.folder / candidate).resolve()
        if not full.is_relative_to(self.folder):
            raise WordspotError(f"{relative}: only paths inside the takes folder can be read")
        return full

    # -- writing -----------------------------------------------------------------------
    def _append_row(self, manifest: Path, row: ManifestRow) -> None:
        old = manifest.read_bytes() if manifest.is_file() else b""
        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        if not old.strip():
            old = b""
            writer.writerow(_HEADER)
        elif not old.endswith(b"\n"):
            old += b"\n"
        writer.writerow([row.path, row.transcript, row.speaker])
        write_bytes_atomically(manifest, old + buffer.getvalue().encode("utf-8"))

    def _free_name(self, speaker_dir: Path, word: str, listed: set[str]) -> Path:
        stem = word.replace("'", "")
        n = 1
        while True:
            candidate = speaker_dir / f"{stem}-{n}.wav"
            if not candidate.exists() and candidate.relative_to(self.folder).as_posix() not in listed:
                return candidate
            n += 1

    def add_take(self, wave: np.ndarray, word: str, speaker: str, *, held_out: bool = False) -> SavedTake:
        """Save a take (already at the folder's rate) and list it in its manifest.

        The WAV file is written first, then the manifest (each atomically), under the lock.

        Raises
        ------
        WordspotError
            A bad or too long word (its file name is made of it), a bad speaker name, or
            the folder cannot be written.
        """
        word = check_word(str(word).strip().lower())
        if len(word) > MAX_WORD_LENGTH:
            raise WordspotError(f"the word {word[:MAX_WORD_LENGTH]}... is {len(word)} characters long, too long "
                                f"for a file name; takes are saved only of words of at most {MAX_WORD_LENGTH} "
                                "characters (shorten it in the lexicon)")
        slug = speaker_slug(speaker)
        manifest = self.manifest_path(held_out)
        with self.locked():
            listed = {r.path for r in self.rows(False)} | {r.path for r in self.rows(True)}
            speaker_dir = self.folder / AUDIO_FOLDER / slug
            try:
                speaker_dir.mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise WordspotError(f"cannot create {speaker_dir}: {exc.strerror or exc}") from None
            target = self._free_name(speaker_dir, word, listed)
            write_wav(target, wave, self.sample_rate)
            row = ManifestRow(target.relative_to(self.folder).as_posix(), word, slug)
            try:
                self._append_row(manifest, row)
            except OSError as exc:
                raise WordspotError(f"{manifest}: cannot update the manifest ({exc.strerror or exc}); "
                                    f"the take stays in {row.path} and is set aside when the page restarts") from None
        return SavedTake(row.path, manifest.name, word, slug)

    def reconcile(self) -> Reconciliation:
        """Bring the folder back in step after an interruption (see the module docstring)."""
        found = Reconciliation()
        with self.locked():
            listed: set[str] = set()
            for held in (False, True):
                manifest = self.manifest_path(held)
                for r in self.rows(held):
                    listed.add(r.path)
                    if not (self.folder / r.path).is_file():
                        found.missing.append((manifest.name, r.path))
            for p in sorted(self.folder.rglob("*")):
                if not p.is_file() or SET_ASIDE_FOLDER in p.relative_to(self.folder).parts[:1]:
                    continue
                rel = p.relative_to(self.folder).as_posix()
                if is_temporary(p) and (p.parent == self.folder or rel.startswith(AUDIO_FOLDER + "/")):
                    p.unlink()
                    found.unfinished.append(rel)
                elif rel.startswith(AUDIO_FOLDER + "/") and p.suffix.lower() == ".wav" and rel not in listed:
                    found.set_aside.append(self._set_aside(p, rel))
        return found

    def _set_aside(self, path: Path, rel: str) -> str:
        target = self.folder / SET_ASIDE_FOLDER / rel
        n = 1
        while target.exists():
            target = target.with_name(f"{path.stem}.{n}{path.suffix}")
            n += 1
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.move(os.fspath(path), os.fspath(target))
        return target.relative_to(self.folder).as_posix()
