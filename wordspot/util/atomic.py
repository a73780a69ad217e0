"""Writing a file so that readers see the old content or the new, never half of it.

The data goes to a temporary file in the target's own folder (so the rename stays on one
file system), is flushed to disk, and is renamed over the target with :func:`os.replace`,
which POSIX and Windows both perform as one step. A crash or a kill at any moment leaves
either the old file or the new one, plus at most a stray ``.NAME.*.tmp`` file.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable, BinaryIO

__all__ = ["TEMP_SUFFIX", "write_atomically", "write_bytes_atomically", "is_temporary"]

#: Suffix of the temporary files; a leftover one is an unfinished write.
TEMP_SUFFIX = ".tmp"


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _sync_folder(folder: Path) -> None:
    try:  # make the rename itself durable (not possible on every system)
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
    except OSError:
        pass


def write_atomically(path, write: Callable[[BinaryIO], None]) -> Path:
    """Call ``write(handle)`` on a temporary file, then rename it to ``path``.

    Parameters
    ----------
    path : str or os.PathLike
        The target; its folder must exist. An existing file is replaced only once the new
        content is completely on disk.
    write : callable
        Writes the whole content to the binary handle it is given.

    Returns
    -------
    Path

    Raises
    ------
    OSError
        The folder is missing or not writable (callers turn it into their own message);
        the temporary file is removed and the target left as it was.
    """
    target = Path(os.fspath(path))
    folder = target.parent
    tmp_name = None
    try:
        with tempfile.NamedTemporaryFile(dir=folder, prefix=f".{target.name}.", suffix=TEMP_SUFFIX,
                                         delete=False) as handle:
            tmp_name = handle.name
            write(handle)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp_name, 0o666 & ~_umask())
        os.replace(tmp_name, target)
        tmp_name = None
    finally:
        if tmp_name is not None:
            try:
                os.unlink(tmp_name)
            except OSError:
                pass
    _sync_folder(folder)
    return target


def write_bytes_atomically(path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (see :func:`write_atomically`)."""
    return write_atomically(path, lambda handle: handle.write(data))


def is_temporary(path) -> bool:
    """True for a name :func:`write_atomically` uses for its temporary files."""
    name = Path(path).name
    return name.startswith(".") and name.endswith(TEMP_SUFFIX)
