"""Local workers end with the process that started them, and take its work folder along.

The processes are real: a parent is killed with SIGKILL (which runs no clean-up of its own)
and its children are watched through /proc (Linux).
"""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from tone_corpus import make_corpus
from wordspot.training.workers import FOLDER_PREFIX, remove_stale_folders, work_folder

REPO = Path(__file__).resolve().parents[2]
linux_proc = pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc (Linux)")


def _stat(pid: int):
    """(state, parent pid) of a process from /proc/<pid>/stat, or None once it is gone."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    fields = text[text.rindex(")") + 2:].split()
    return fields[0], int(fields[1])


def running(pid: int) -> bool:
    """Alive and not a zombie waiting for its new parent to collect it."""
    s = _stat(pid)
    return s is not None and s[0] not in ("Z", "X")


def children(pid: int) -> list[int]:
    """Processes whose parent is ``pid`` (scanning /proc/*/stat: psutil is not a dependency)."""
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            s = _stat(int(entry.name))
            if s is not None and s[1] == pid and s[0] not in ("Z", "X"):
                found.append(int(entry.name))
    return found


def command_line(pid: int) -> str:
    try:
        return Path(f"/proc/{pid}/cmdline").read_bytes().replace(b"\0", b" ").decode(errors="replace")
    except OSError:
        return ""


def wait_until(condition, seconds: float) -> bool:
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        if condition():
            return True
        time.sleep(0.1)
    return condition()


def env(tmp: Path) -> dict:
    return {**os.environ, "PYTHONPATH": str(REPO), "TMPDIR": str(tmp)}


def test_stale_folders_of_ended_processes_are_removed(tmp_path):
    ended = subprocess.Popen([sys.executable, "-c", "pass"])
    ended.wait()
    stale = tmp_path / f"{FOLDER_PREFIX}{ended.pid}-abc"
    (stale / "frames-x").mkdir(parents=True)
    (stale / "frames-x" / "frames-0001.f32").write_bytes(b"\0" * 16)
    live = tmp_path / f"{FOLDER_PREFIX}{os.getppid()}-abc"  # our parent (pytest's shell) is alive
    live.mkdir()
    other = tmp_path / "someone-elses-12-folder"
    other.mkdir()
    assert remove_stale_folders(tmp_path) == [stale]
    assert not stale.exists() and live.is_dir() and other.is_dir()


def test_work_folder_is_named_after_this_process():
    folder = work_folder()
    assert folder.is_dir() and folder.name.startswith(f"{FOLDER_PREFIX}{os.getpid()}-")
    assert work_folder() == folder


# A parent that starts one worker the way loky does (its own process, our initializer first)
# and then waits; the worker writes a file into the parent's work folder and waits too. The
# parent has a second thread, as a training run has: killed, it hands its children to that
# thread for a moment, so the worker still sees the same parent process id.
PARENT = textwrap.dedent("""
    import subprocess, sys, threading, time
    from wordspot.training.workers import work_folder
    threading.Thread(target=time.sleep, args=(600,), daemon=True).start()
    folder = work_folder()
    (folder / "frames.f32").write_bytes(b"0" * 64)
    subprocess.Popen([sys.executable, "-c", sys.argv[1], str(folder)])
    time.sleep(600)
""")
WORKER = textwrap.dedent("""
    import os, sys, time
    import wordspot.training.workers as w
    if os.environ.get("NO_SIGNAL"):
        w._ask_for_signal_at_parent_end = lambda: False  # only the watching thread is left
    w.tie_to_parent(os.getppid(), sys.argv[1])
    print("ready", flush=True)
    time.sleep(600)
""")


@linux_proc
@pytest.mark.parametrize("signal_too", [True, False], ids=["signal-and-watch", "watch-only"])
def test_worker_ends_when_its_parent_is_killed(tmp_path, signal_too):
    extra = {} if signal_too else {"NO_SIGNAL": "1"}
    parent = subprocess.Popen([sys.executable, "-c", PARENT, WORKER], env={**env(tmp_path), **extra})
    try:
        assert wait_until(lambda: len(children(parent.pid)) == 1, 30)
        (worker,) = children(parent.pid)
        folder = next(tmp_path.glob(f"{FOLDER_PREFIX}{parent.pid}-*"))
        time.sleep(1.0)  # the worker has run its initializer
        assert running(worker)
        parent.send_signal(signal.SIGKILL)
        parent.wait()
        # the signal ends it at once; the watching thread within its one-second round
        assert wait_until(lambda: not running(worker), 2.0 if signal_too else 4.0)
        assert not folder.exists()
    finally:
        parent.kill()
        parent.wait()


@linux_proc
def test_worker_stays_while_its_parent_lives(tmp_path):
    parent = subprocess.Popen([sys.executable, "-c", PARENT, WORKER], env=env(tmp_path))
    try:
        assert wait_until(lambda: len(children(parent.pid)) == 1, 30)
        (worker,) = children(parent.pid)
        time.sleep(2.5)
        assert running(worker)
        assert next(tmp_path.glob(f"{FOLDER_PREFIX}{parent.pid}-*")).is_dir()
    finally:
        parent.kill()
        parent.wait()


# A parent that starts a process the way the recording page starts training: the variable
# names the parent, the child calls end_with_starter() and then works quietly (no output that
# could fail on a closed pipe and end it anyway).
STARTER = textwrap.dedent("""
    import os, subprocess, sys, time
    from wordspot.training.workers import PARENT_VARIABLE
    env = {**os.environ, PARENT_VARIABLE: str(os.getpid())}
    subprocess.Popen([sys.executable, "-c", sys.argv[1]], env=env, stdout=subprocess.DEVNULL)
    time.sleep(600)
""")
STARTED = textwrap.dedent("""
    import time
    from wordspot.training.workers import end_with_starter
    assert end_with_starter()
    time.sleep(600)
""")


@linux_proc
def test_a_process_started_with_the_variable_ends_with_its_starter(tmp_path):
    parent = subprocess.Popen([sys.executable, "-c", STARTER, STARTED], env=env(tmp_path))
    try:
        assert wait_until(lambda: len(children(parent.pid)) == 1, 30)
        (child,) = children(parent.pid)
        time.sleep(1.5)
        assert running(child)
        parent.send_signal(signal.SIGKILL)
        parent.wait()
        assert wait_until(lambda: not running(child), 4.0)
    finally:
        parent.kill()
        parent.wait()


def test_the_variable_is_ignored_unless_it_names_the_parent(monkeypatch):
    from wordspot.training.workers import PARENT_VARIABLE, end_with_starter

    monkeypatch.delenv(PARENT_VARIABLE, raising=False)
    assert not end_with_starter()
    monkeypatch.setenv(PARENT_VARIABLE, "not a number")
    assert not end_with_starter()
    monkeypatch.setenv(PARENT_VARIABLE, str(os.getpid()))  # this process, not its parent
    assert not end_with_starter()


def test_training_job_names_the_server_to_the_training(tmp_path, monkeypatch):
    import wordspot.web.training_job as training_job
    from wordspot.training.workers import PARENT_VARIABLE

    seen = {}

    class Recorded:  # stands in for the child process: records how it was started
        stdout = iter(())

        def __init__(self, args, **kwargs):
            seen.update(kwargs, args=args)

        def poll(self):
            return 0

        def wait(self):
            return 0

    monkeypatch.setattr(training_job.subprocess, "Popen", Recorded)
    assert training_job.TrainingJob().start(tmp_path / "train.csv", tmp_path / "words.txt", tmp_path / "m.model")
    assert seen["env"][PARENT_VARIABLE] == str(os.getpid()) and "train" in seen["args"]


@linux_proc
def test_sigterm_from_anyone_else_still_ends_a_worker(tmp_path):
    parent = subprocess.Popen([sys.executable, "-c", PARENT, WORKER], env=env(tmp_path))
    try:
        assert wait_until(lambda: len(children(parent.pid)) == 1, 30)
        (worker,) = children(parent.pid)
        time.sleep(1.0)
        os.kill(worker, signal.SIGTERM)
        assert wait_until(lambda: not running(worker), 3.0)
        assert next(tmp_path.glob(f"{FOLDER_PREFIX}{parent.pid}-*")).is_dir()  # the parent still uses it
    finally:
        parent.kill()
        parent.wait()


def _is_loky_worker(pid: int) -> bool:
    return "loky" in command_line(pid) and "resource_tracker" not in command_line(pid)


@linux_proc
@pytest.mark.slow
def test_killed_training_leaves_no_workers_or_folders(tmp_path):
    manifest, lexicon = make_corpus(tmp_path / "tones", np.random.default_rng(5), n_utterances=60)
    scratch = tmp_path / "tmp"
    scratch.mkdir()
    train = subprocess.Popen(
        [sys.executable, "-m", "wordspot.cli", "--quiet", "train", str(manifest), "--lexicon", str(lexicon),
         "--out", str(tmp_path / "tones.model"), "--from-scratch", "--jobs", "2", "--mixtures", "4",
         "--passes", "20", "--no-calibration"],
        env=env(scratch), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    started = []
    try:
        assert wait_until(lambda: sum(map(_is_loky_worker, children(train.pid))) == 2, 120), \
            "training never started its two workers"
        time.sleep(2.0)  # a pass or two with the workers busy
        assert train.poll() is None, "training ended before it could be killed: give it more work"
        started = children(train.pid)  # the workers and joblib's resource trackers
        train.send_signal(signal.SIGKILL)
        train.wait()
        assert wait_until(lambda: not any(map(running, started)), 5.0), \
            [command_line(p)[:80] for p in started if running(p)]
        # its work folder (frames, joblib's files) and loky's semaphores in /dev/shm
        assert wait_until(lambda: not list(scratch.glob(f"{FOLDER_PREFIX}{train.pid}-*")), 2.0), \
            [str(p.relative_to(scratch)) for p in scratch.rglob("*")]
        shm = Path("/dev/shm")
        if shm.is_dir():
            assert wait_until(lambda: not [p for p in shm.iterdir() if f"-{train.pid}-" in p.name
                                           or f"_{train.pid}_" in p.name], 2.0)
    finally:
        train.kill()
        train.wait()
        for pid in filter(running, started):  # left over when the test fails
            os.kill(pid, signal.SIGKILL)


# The recording page's training: ``wordspot train`` started from a request thread that ends at
# once (so no kernel signal may be tied to that thread); the page's server is then killed.
SERVER = textwrap.dedent("""
    import sys, threading, time
    from wordspot.web.training_job import TrainingJob
    job = TrainingJob()
    request = threading.Thread(target=job.start, args=tuple(sys.argv[1:4]), kwargs={"jobs": 2, "from_scratch": True})
    request.start()
    request.join()
    time.sleep(600)
""")


@linux_proc
@pytest.mark.slow
def test_training_started_by_the_page_ends_with_its_server(tmp_path):
    manifest, lexicon = make_corpus(tmp_path / "tones", np.random.default_rng(6), n_utterances=60)
    scratch = tmp_path / "tmp"
    scratch.mkdir()
    server = subprocess.Popen([sys.executable, "-c", SERVER, str(manifest), str(lexicon), str(tmp_path / "t.model")],
                              env=env(scratch), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    started = []
    try:
        assert wait_until(lambda: any("wordspot.cli" in command_line(p) for p in children(server.pid)), 30)
        (training,) = [p for p in children(server.pid) if "wordspot.cli" in command_line(p)]
        assert wait_until(lambda: sum(map(_is_loky_worker, children(training))) == 2, 120)
        time.sleep(2.0)  # the request thread that started it ended long ago: it goes on
        assert running(training)
        started = [training] + children(training)
        server.send_signal(signal.SIGKILL)
        server.wait()
        assert wait_until(lambda: not any(map(running, started)), 6.0), \
            [command_line(p)[:80] for p in started if running(p)]
        assert wait_until(lambda: not list(scratch.glob(f"{FOLDER_PREFIX}*")), 2.0)
    finally:
        server.kill()
        server.wait()
        for pid in filter(running, started):  # left over when the test fails
            os.kill(pid, signal.SIGKILL)
