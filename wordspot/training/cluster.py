"""Where training's parallel work runs: here, in local processes, or on a Dask cluster.

Feature extraction, noisy copies and every re-estimation pass hand their work to an
*executor* as a list of tasks, and take the results back one by one **in task order**,
whatever ran them. Summing results in that order is what makes a model bit-identical
for any ``jobs`` and on a cluster.

- :class:`SerialExecutor`: this process (``jobs == 1``).
- :class:`ProcessExecutor`: local worker processes through joblib (``jobs > 1``), which end
  with this process (:mod:`wordspot.training.workers`).
- :class:`DaskExecutor`: the workers of a running Dask scheduler (``dask.distributed``,
  the optional extra ``wordspot[cluster]``; imported here, and only when used).

**Frames live in files.** ``keep_on_disk`` writes frames (float32, frames x features) to
plain files and hands back memory-mapped views of them; a task that carries such a view
sends only its file name and rows, and the worker maps the file itself. On a cluster the
files go to a folder every worker sees (``shared_dir``), and the frames that feature
tasks return are written there as they arrive (``map(..., frames=True)`` then
``settle``), so the client's memory does not grow with the corpus. Statistics come back
as small arrays. Relative paths in tasks are sent absolute (workers have their own
working folder), so recordings must sit at the same absolute path on every machine.

**Lost workers.** When a Dask worker dies, the scheduler runs its unfinished tasks again
on other workers (a task whose workers died more than ``distributed.scheduler.allowed-failures``
times, 3 by default, is given up). Every task has its own key and its result is taken once,
by its position, so a chunk is never counted twice and never dropped: a task given up ends
training with a :class:`~wordspot.errors.TrainingError` naming it.
"""

from __future__ import annotations

import concurrent.futures
import contextlib
import os
import shutil
import socket
import tempfile
import uuid
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path, PurePath

import numpy as np
from joblib import Parallel, delayed

from wordspot.errors import TrainingError
from wordspot.training.workers import tie_to_parent, work_folder

__all__ = ["INSTALL_HINT", "Executor", "SerialExecutor", "ProcessExecutor", "DaskExecutor",
           "open_executor", "using"]

#: What to run when ``--cluster`` is asked for and Dask is not installed.
INSTALL_HINT = 'pip install "wordspot[cluster]"'


# ------------------------------------------------------------------ frames in files


@dataclass(frozen=True)
class _Rows:
    """Rows ``start:stop`` of the float32 frames file ``path`` (``dim`` values a row)."""

    path: str
    start: int
    stop: int
    dim: int


def _walk(value, leaf):
    """``value`` with ``leaf`` applied to every item of its nested lists and tuples."""
    if isinstance(value, list):
        return [_walk(v, leaf) for v in value]
    if isinstance(value, tuple):
        return tuple(_walk(v, leaf) for v in value)
    return leaf(value)


def _absolute(value):
    """A relative path made absolute (workers do not share the client's working folder)."""
    if isinstance(value, PurePath) and not value.is_absolute():
        return Path(os.path.abspath(value))
    return value


def _is_frames(value) -> bool:
    return isinstance(value, np.ndarray) and value.ndim == 2 and value.dtype == np.float32


@lru_cache(maxsize=16)
def _frames_file(path: str, dim: int) -> np.ndarray:
    """The whole frames file at ``path``, memory-mapped read-only (cached per process)."""
    try:
        if os.path.getsize(path) == 0:
            return np.zeros((0, dim), dtype=np.float32)
        return np.memmap(path, dtype=np.float32, mode="r").reshape(-1, dim)
    except OSError as exc:
        raise TrainingError(
            f"{socket.gethostname()} cannot read the frames file {path} ({exc.strerror or exc}): the "
            "shared folder must be on storage that every worker mounts at the same path (--shared-dir)"
        ) from None


def _resolve(value):
    """A frames reference as the rows it names; anything else as it is."""
    if isinstance(value, _Rows):
        return _frames_file(value.path, value.dim)[value.start:value.stop]
    return value


class _FrameWriter:
    """Appends frame arrays to one new file and returns where each landed."""

    def __init__(self, path: Path):
        self.path = str(path)
        self.file = open(path, "wb")
        self.rows = 0
        self.dim = None

    def add(self, value):
        """Write ``value`` if it is a frames array and return its :class:`_Rows`; else ``value``."""
        if not _is_frames(value):
            return value
        a = np.ascontiguousarray(value)
        if self.dim is None:
            self.dim = a.shape[1]
        a.tofile(self.file)
        rows = _Rows(self.path, self.rows, self.rows + a.shape[0], self.dim)
        self.rows += a.shape[0]
        return rows

    def close(self) -> None:
        self.file.close()


class _FrameFiles:
    """Frames files in one folder: written once, then read through memory maps.

    Knows the address range of every file it has mapped in this process, so that a view
    of one can be sent as a :class:`_Rows` reference instead of its data.
    """

    def __init__(self, folder: Path):
        self.folder = Path(folder)
        self.mapped: dict[str, tuple[int, int, np.ndarray]] = {}
        self.count = 0

    def writer(self) -> _FrameWriter:
        self.count += 1
        return _FrameWriter(self.folder / f"frames-{self.count:04d}.f32")

    def view(self, value):
        """Rows named by a :class:`_Rows` as a memory-mapped view; anything else as it is."""
        if not isinstance(value, _Rows):
            return value
        if value.path not in self.mapped:
            whole = _frames_file(value.path, value.dim)
            self.mapped[value.path] = (whole.__array_interface__["data"][0], whole.nbytes, whole)
        return self.mapped[value.path][2][value.start:value.stop]

    def locate(self, value):
        """A :class:`_Rows` reference for a view of a mapped file; anything else as it is."""
        if not _is_frames(value) or not value.flags.c_contiguous or value.shape[0] == 0:
            return value
        address = value.__array_interface__["data"][0]
        for path, (base, nbytes, whole) in self.mapped.items():
            if base <= address < base + nbytes and value.shape[1] == whole.shape[1]:
                start = (address - base) // (4 * whole.shape[1])
                return _Rows(path, int(start), int(start + value.shape[0]), int(whole.shape[1]))
        return value

    def keep(self, arrays) -> list:
        """``arrays`` as views of frames files, writing those not in one yet into a new file."""
        arrays = list(arrays)
        refs = [self.locate(a) for a in arrays]
        if any(_is_frames(r) for r in refs):
            writer = self.writer()
            refs = [writer.add(r) for r in refs]
            writer.close()
        return [self.view(r) if isinstance(r, _Rows) else a for r, a in zip(refs, arrays)]


# ------------------------------------------------------------------ executors


class Executor:
    """Runs tasks and hands their results back in task order.

    Subclasses implement :meth:`map`; the frames helpers default to keeping everything
    in memory.
    """

    def map(self, func, tasks, *, common=(), frames=False, label="work"):
        """``func(*task, *common)`` for every task, results yielded in task order.

        Parameters
        ----------
        func : callable
            A module-level function (workers import it by name).
        tasks : sequence of tuple
            Per-task arguments.
        common : tuple
            Arguments shared by all tasks (sent once where the executor can).
        frames : bool
            The results hold frames: an executor that keeps frames on disk yields
            references, which :meth:`settle` turns into arrays.
        label : str
            Names the work in error messages.
        """
        raise NotImplementedError

    def settle(self, results):
        """``results`` of a ``frames=True`` map with every frames reference made an array."""
        return results

    def keep_on_disk(self, arrays) -> list:
        """``arrays`` as the executor's workers read them best (memory-mapped files or as they are)."""
        return list(arrays)

    def close(self) -> None:
        """Release workers and files."""

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class SerialExecutor(Executor):
    """Everything in this process, one task after the other."""

    def map(self, func, tasks, *, common=(), frames=False, label="work"):
        return (func(*task, *common) for task in tasks)


class ProcessExecutor(Executor):
    """Local worker processes (joblib's loky backend); frames shared through temporary files.

    The workers end when this process ends, however it ends, and the work folder goes with
    them (:mod:`wordspot.training.workers`): frames files and joblib's own temporary files
    both live in it.
    """

    def __init__(self, jobs: int):
        self.jobs = int(jobs)
        self._files: _FrameFiles | None = None

    def map(self, func, tasks, *, common=(), frames=False, label="work"):
        folder = str(work_folder())
        run = Parallel(n_jobs=self.jobs, backend="loky", return_as="generator", temp_folder=folder,
                       initializer=tie_to_parent, initargs=(os.getpid(), folder))
        return run(delayed(func)(*task, *common) for task in tasks)

    def keep_on_disk(self, arrays) -> list:
        # joblib sends a view of a memory map as its file name and offset, not its data.
        if self._files is None:
            self._files = _FrameFiles(tempfile.mkdtemp(prefix="frames-", dir=work_folder()))
        return self._files.keep(arrays)

    def close(self) -> None:
        if self._files is not None:
            shutil.rmtree(self._files.folder, ignore_errors=True)
            self._files = None


_ALLOCATOR_SET = False


def _keep_freed_memory() -> None:
    """On a worker, once: let glibc keep freed memory for reuse, as it does by default.

    Dask starts worker processes with ``MALLOC_TRIM_THRESHOLD_=65536``, which turns off
    glibc's adaptive thresholds: every large temporary array of a pass is then fresh pages
    from the kernel. One process passing over 300 demo recordings (8 Gaussians) took
    0.38 s a pass with that setting and 0.23 s with the thresholds set here (mmap 32 MiB,
    trim 64 MiB: the values glibc's adaptive rule moves towards); other C libraries are
    left alone.
    """
    global _ALLOCATOR_SET
    _ALLOCATOR_SET = True
    if "MALLOC_TRIM_THRESHOLD_" not in os.environ or not hasattr(os, "confstr"):
        return
    with contextlib.suppress(OSError, ValueError, AttributeError):
        if os.confstr("CS_GNU_LIBC_VERSION"):
            import ctypes

            libc = ctypes.CDLL("libc.so.6")
            libc.mallopt(-3, 32 << 20)  # M_MMAP_THRESHOLD
            libc.mallopt(-1, 64 << 20)  # M_TRIM_THRESHOLD


def _run_task(func, task, *common):
    """On a worker: map the frames a task refers to, then run it."""
    if not _ALLOCATOR_SET:
        _keep_freed_memory()
    return func(*_walk(task, _resolve), *common)


def _check_worker(probe: str, token: str, paths) -> list[str]:
    """On a worker: what of the shared folder and ``paths`` it cannot see."""
    host = socket.gethostname()
    try:
        seen = Path(probe).read_text(encoding="utf-8")
    except OSError:
        seen = None
    problems = []
    if seen != token:
        problems.append(f"{host} cannot see the shared folder {Path(probe).parent}: give --shared-dir a folder "
                        "on storage that every worker mounts at the same path")
    problems += [f"{host} cannot see the recording {p}: the recordings must be on storage that every "
                 "worker mounts at the same path" for p in paths if not os.path.exists(p)]
    return problems


def _forget_frames() -> None:
    """On a worker: close the memory maps of frames files (the training is over)."""
    _frames_file.cache_clear()


class DaskExecutor(Executor):
    """The workers of a running Dask scheduler.

    Parameters
    ----------
    address : str
        The scheduler's address (``tcp://host:8786``) or the JSON file that
        ``dask scheduler --scheduler-file FILE`` writes.
    shared_dir : str or path, optional
        A folder that every worker sees at the same path; frames files go into a new
        folder inside it, removed at :meth:`close`. Default: the temporary folder of
        this machine (enough when the workers run here).
    check_paths : sequence of path
        Files every worker must see (a recording or two): checked on connecting.
    """

    def __init__(self, address, shared_dir=None, *, check_paths=()):
        try:
            import dask
            import distributed
        except ImportError:
            raise TrainingError(f"--cluster needs Dask's distributed scheduler, which is not installed: "
                                f"{INSTALL_HINT}") from None
        self._distributed = distributed
        self.address = os.fspath(address)
        wait = dask.config.get("distributed.comm.timeouts.connect")
        from_file = Path(self.address).is_file()
        try:
            if from_file:
                self.client = distributed.Client(scheduler_file=self.address, set_as_default=False)
            else:
                self.client = distributed.Client(self.address, set_as_default=False)
        except (OSError, ValueError, TimeoutError) as exc:
            raise TrainingError(
                f"could not reach the Dask scheduler at {self.address} ({exc}); start one with "
                "`dask scheduler` and workers with `dask worker ADDRESS`, then give its address "
                "(tcp://host:8786) or its --scheduler-file"
            ) from None
        try:
            self.client.wait_for_workers(1, timeout=wait)
        except (TimeoutError, OSError):
            self.client.close()
            start = f"--scheduler-file {self.address}" if from_file else self.address
            raise TrainingError(f"the Dask scheduler at {self.address} has no workers; start some with "
                                f"`dask worker {start}`") from None
        try:
            folder = Path(tempfile.mkdtemp(prefix="wordspot-cluster-", dir=shared_dir))
        except OSError as exc:
            self.client.close()
            raise TrainingError(f"--shared-dir {shared_dir}: cannot create a folder there ({exc.strerror}); "
                                "give an existing, writable folder that every worker sees") from None
        self._files = _FrameFiles(folder)
        token = uuid.uuid4().hex
        probe = folder / "probe.txt"
        probe.write_text(token, encoding="utf-8")
        answers = self.client.run(_check_worker, str(probe), token, [os.path.abspath(p) for p in check_paths])
        problems = [p for found in answers.values() for p in found]
        if problems:
            self.close()
            raise TrainingError(f"{problems[0]} ({len(problems)} problem(s) on {len(answers)} worker(s))")

    def map(self, func, tasks, *, common=(), frames=False, label="work"):
        client = self.client
        token = uuid.uuid4().hex[:8]
        name = func.__name__.strip("_")
        shared = [client.scatter([_walk(c, _absolute)], broadcast=True, hash=False)[0] for c in common]

        def outgoing(value):  # frames as file rows, paths absolute
            return self._files.locate(_absolute(value))

        sent = [_walk(task, outgoing) for task in tasks]
        keys = [f"wordspot-{name}-{token}-{k}" for k in range(len(sent))]
        futures = client.map(_run_task, [func] * len(sent), sent, *[[f] * len(sent) for f in shared],
                             key=keys, pure=False)
        return self._in_order(futures, frames, label)

    def _in_order(self, futures, frames, label):
        """Results as they finish, handed on in task order (frames written on arrival)."""
        writer = self._files.writer() if frames else None
        n = len(futures)
        index = {f.key: k for k, f in enumerate(futures)}
        ready: dict[int, object] = {}
        done = 0
        try:
            for fut, result in self._distributed.as_completed(futures, loop=self.client.loop, with_results=True,
                                                              raise_errors=False):
                k = index[fut.key]
                if fut.status != "finished":
                    self._fail(fut, k, n, label)
                futures[k] = None  # its result is taken: nothing can count it again
                ready[k] = _walk(result, writer.add) if frames else result
                while done in ready:
                    yield ready.pop(done)
                    done += 1
            if done != n:
                raise TrainingError(f"{label}: only {done} of {n} parts came back from the Dask workers; "
                                    "train again")
        finally:
            if writer is not None:
                writer.close()
            left = [f for f in futures if f is not None]
            if left and self.client.status == "running":
                self.client.cancel(left)

    def _fail(self, fut, k: int, n: int, label: str):
        """Raise the error of a task that did not finish, in words."""
        try:
            fut.result()
        except self._distributed.KilledWorker as exc:
            raise TrainingError(
                f"{label}: part {k + 1} of {n} was given up after the workers running it died "
                f"({exc}); see the workers' logs (a worker out of memory?) and train again"
            ) from None
        except concurrent.futures.CancelledError:
            raise TrainingError(f"{label}: part {k + 1} of {n} was lost with the connection to the "
                                f"Dask scheduler at {self.address}; train again") from None
        raise TrainingError(f"{label}: part {k + 1} of {n} ended as {fut.status!r} on the Dask workers")

    def settle(self, results):
        return _walk(results, self._files.view)

    def keep_on_disk(self, arrays) -> list:
        return self._files.keep(arrays)

    def close(self) -> None:
        with contextlib.suppress(Exception):  # closing after the scheduler went away
            self.client.run(_forget_frames)
        with contextlib.suppress(Exception):
            self.client.close()
        shutil.rmtree(self._files.folder, ignore_errors=True)


def open_executor(jobs: int = 1, cluster=None, shared_dir=None, *, check_paths=()) -> Executor:
    """The executor for ``jobs`` local processes, or for the Dask scheduler at ``cluster``."""
    if cluster is not None:
        return DaskExecutor(cluster, shared_dir, check_paths=check_paths)
    return SerialExecutor() if jobs == 1 else ProcessExecutor(jobs)


@contextlib.contextmanager
def using(executor: Executor | None, jobs: int = 1, cluster=None, shared_dir=None):
    """``executor`` if given (left open), else :func:`open_executor` (closed afterwards)."""
    if executor is not None:
        yield executor
        return
    with open_executor(jobs, cluster, shared_dir) as own:
        yield own
