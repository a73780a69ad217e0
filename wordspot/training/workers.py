"""Local worker processes that end with the process that started them, and its work folder.

A worker of :class:`~wordspot.training.cluster.ProcessExecutor` runs :func:`tie_to_parent`
first. Two things then end it once its parent is gone, however the parent ended (even
killed with SIGKILL, which runs no clean-up of its own):

- on Linux, the kernel sends it SIGTERM when the parent ends (``prctl(PR_SET_PDEATHSIG)``);
- everywhere, a small thread checks every second whether its parent process has changed
  (``os.getppid()``: an orphan is handed to another process) or, on Linux, is a zombie.

Either way, and when a worker ends on its own because its parent's end closed its task
pipe, the worker first removes its parent's work folder. The parent's work folder
(frames files and joblib's temporary files) is named after the parent's process id
(``wordspot-work-<pid>-...``), so a later run also removes the folders of processes that
no longer exist (:func:`remove_stale_folders`).

Linux sends that signal when the *thread* that started the worker ends, not only the
process: workers must be started from a thread that lives as long as they do (the main
thread, or joblib's own manager thread, as in ``wordspot train``).
"""

from __future__ import annotations

import atexit
import contextlib
import os
import re
import shutil
import signal
import sys
import tempfile
import threading
import time
from pathlib import Path

__all__ = ["FOLDER_PREFIX", "PARENT_VARIABLE", "work_folder", "remove_stale_folders", "tie_to_parent",
           "end_with_starter"]

#: Start of the name of a process's work folder; its process id follows.
FOLDER_PREFIX = "wordspot-work-"
_FOLDER_RE = re.compile(re.escape(FOLDER_PREFIX) + r"(\d+)-")
#: Environment variable naming the process a ``wordspot train`` run ends with (set by the
#: recording page for the training it starts; see :func:`end_with_starter`).
PARENT_VARIABLE = "WORDSPOT_END_WITH"
_PR_SET_PDEATHSIG = 1  # from <linux/prctl.h>
_POLL_SECONDS = 1.0

_own: dict[int, Path] = {}  # process id -> its work folder (a forked child makes its own)


def _alive(pid: int) -> bool:
    """Whether a process ``pid`` exists (another user's counts as existing)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True
    return True


def remove_stale_folders(root=None) -> list[Path]:
    """Remove the work folders in ``root`` (default: the temporary folder) of processes that
    no longer exist; return them."""
    root = Path(root if root is not None else tempfile.gettempdir())
    removed = []
    with contextlib.suppress(OSError):
        for entry in root.iterdir():
            m = _FOLDER_RE.match(entry.name)
            if m and int(m.group(1)) != os.getpid() and not _alive(int(m.group(1))) and entry.is_dir():
                shutil.rmtree(entry, ignore_errors=True)
                removed.append(entry)
    return removed


def work_folder() -> Path:
    """This process's work folder in the temporary folder (made on first use, removed at exit).

    Making it first removes the folders that ended processes left behind.
    """
    pid = os.getpid()
    folder = _own.get(pid)
    if folder is None or not folder.is_dir():
        root = tempfile.gettempdir()
        remove_stale_folders(root)
        folder = Path(tempfile.mkdtemp(prefix=f"{FOLDER_PREFIX}{pid}-", dir=root))
        _own[pid] = folder
        atexit.register(_remove_own, pid, folder)
    return folder


def _remove_own(pid: int, folder: Path) -> None:
    if os.getpid() == pid:
        shutil.rmtree(folder, ignore_errors=True)


def _orphaned(parent_pid: int, folder: str | None) -> None:
    """The parent is gone: remove its work folder and this process's own, and end now.

    ``os._exit`` skips the exit handlers, so this process's own work folder (a training
    started by the recording page has one, shared with its workers) is removed here.
    """
    if folder:
        shutil.rmtree(folder, ignore_errors=True)
    own = _own.get(os.getpid())
    if own is not None:
        shutil.rmtree(own, ignore_errors=True)
    os._exit(1)


def _parent_gone(parent_pid: int) -> bool:
    """Whether the parent has ended or is ending.

    A parent with several threads that is killed hands its children to one of its other
    threads for a moment, so ``os.getppid()`` still names it; its main thread is then
    already a zombie (state Z in /proc on Linux).
    """
    if os.getppid() != parent_pid:
        return True
    try:
        with open(f"/proc/{parent_pid}/stat", "rb") as f:
            state = f.read().rsplit(b")", 1)[1].split()[0]
    except (OSError, IndexError):
        return False
    return state in (b"Z", b"X")


def _remove_if_orphaned(parent_pid: int, folder: str | None) -> None:
    if folder and _parent_gone(parent_pid):
        shutil.rmtree(folder, ignore_errors=True)


def _on_sigterm(parent_pid: int, folder: str | None, wait: float = 1.0):
    def handler(signum, frame):
        # the signal Linux sends at the parent's end may come before the parent is fully gone
        deadline = time.monotonic() + wait
        while True:
            if _parent_gone(parent_pid):
                _orphaned(parent_pid, folder)
            if time.monotonic() >= deadline:
                break
            time.sleep(0.02)
        # Asked to end by someone else: end as SIGTERM always ends a process.
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        os.kill(os.getpid(), signal.SIGTERM)
    return handler


def _watch(parent_pid: int, folder: str | None, every: float) -> None:
    while True:
        if _parent_gone(parent_pid):
            _orphaned(parent_pid, folder)
        threading.Event().wait(every)


def _ask_for_signal_at_parent_end() -> bool:
    """Linux only: have the kernel send SIGTERM to this process when its parent ends."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGTERM), 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def tie_to_parent(parent_pid: int, folder: str | None = None, every: float = _POLL_SECONDS, *,
                  kernel_signal: bool = True) -> None:
    """Worker initializer: end this process (removing ``folder``) once ``parent_pid`` is gone.

    Parameters
    ----------
    parent_pid : int
        The process that started this worker.
    folder : str, optional
        Its work folder, removed by the first worker that finds the parent gone.
    every : float
        Seconds between checks of the watching thread.
    kernel_signal : bool
        Also ask Linux for SIGTERM when the parent ends. Only for a process started from a
        thread that lives as long as the parent (the signal comes when that thread ends).
    """
    if kernel_signal:
        if threading.current_thread() is threading.main_thread():
            signal.signal(signal.SIGTERM, _on_sigterm(parent_pid, folder))
        _ask_for_signal_at_parent_end()
    if _parent_gone(parent_pid):  # the parent ended before the signal was asked for
        _orphaned(parent_pid, folder)
    # a worker may also end on its own when the parent's end closes its task pipe
    atexit.register(_remove_if_orphaned, parent_pid, folder)
    threading.Thread(target=_watch, args=(parent_pid, folder, every), name="wordspot-parent-watch",
                     daemon=True).start()


def end_with_starter() -> bool:
    """End this process once the process named by ``WORDSPOT_END_WITH`` is gone (if set).

    The recording page starts ``wordspot train`` from a short-lived request thread, so only
    the watching thread is used (no kernel signal). False when the variable is not set or
    does not name this process's parent.
    """
    try:
        pid = int(os.environ.get(PARENT_VARIABLE, ""))
    except ValueError:
        return False
    if pid != os.getppid():
        return False
    tie_to_parent(pid, kernel_signal=False)
    return True
