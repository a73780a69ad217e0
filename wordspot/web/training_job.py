"""Training started from the page: ``wordspot train`` in a child process, its output kept.

The page polls :meth:`TrainingJob.status`; progress is the number of the last ``pass N``
line the trainer printed over the number of passes its configuration runs (twice as many
when the confidence calibration trains first without its held-out takes and then again
on all of them, as adapting does).
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import threading
from collections import deque
from pathlib import Path

from wordspot.training.adapt import AdaptationConfig
from wordspot.training.trainer import TrainingConfig
from wordspot.training.workers import PARENT_VARIABLE

__all__ = ["TrainingJob", "train_command"]

_PASS_RE = re.compile(r"^\s*(?:adapt\s+)?pass\s+(\d+)\b")
# what wordspot.evaluation.calibrate reports before its first and its second training
_FIRST_OF_TWO = "confidence calibration: training on "
_SECOND = "confidence calibration: training again"
_KEEP_LINES = 200


def train_command(manifest, lexicon, model, *, jobs: int = 1, sample_rate: int = 16000,
                  from_scratch: bool = False) -> list[str]:
    """The ``wordspot train`` command line for these files (as a list of arguments).

    By default it adapts the starter of the takes' rate; ``from_scratch`` trains every phone
    from the takes alone.
    """
    args = ["wordspot", "train", str(manifest), "--lexicon", str(lexicon), "--out", str(model),
            "--jobs", str(jobs)]
    if from_scratch:
        return args + ["--from-scratch", "--sample-rate", str(sample_rate)]
    return args + (["--start", "starter-8k"] if sample_rate == 8000 else [])


def _total_passes(from_scratch: bool) -> int:
    if from_scratch:
        return TrainingConfig().total_passes
    config = AdaptationConfig()  # the strength is chosen as it goes: count the most passes it may take
    return config.passes + int(config.mean_transform) + config.follow_passes


class TrainingJob:
    """At most one training run at a time, with its output lines and progress."""

    def __init__(self):
        self._lock = threading.Lock()
        self._process: subprocess.Popen | None = None
        self._lines: deque[str] = deque(maxlen=_KEEP_LINES)
        self._pass = 0
        self._total = _total_passes(False)
        self._from_scratch = False
        self._rounds = 1  # trainings this run makes
        self._round = 0  # trainings finished

    def start(self, manifest, lexicon, model, *, jobs: int = 1, sample_rate: int = 16000,
              from_scratch: bool = False) -> bool:
        """Start training unless a run is going on; False when one is."""
        with self._lock:
            if self._process is not None and self._process.poll() is None:
                return False
            args = train_command(manifest, lexicon, model, jobs=jobs, sample_rate=sample_rate,
                                 from_scratch=from_scratch)
            self._lines.clear()
            self._pass = 0
            self._total = _total_passes(from_scratch)
            self._from_scratch = from_scratch
            self._rounds, self._round = 1, 0
            self._lines.append("$ " + " ".join(args))
            self._process = subprocess.Popen(
                [sys.executable, "-m", "wordspot.cli"] + args[1:],
                stdout=subprocess.PIPE, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                cwd=Path(model).parent, text=True, encoding="utf-8", errors="replace",
                env={**os.environ, PARENT_VARIABLE: str(os.getpid())},  # ends when this process ends
            )
            threading.Thread(target=self._read, args=(self._process,), daemon=True).start()
            return True

    def _read(self, process: subprocess.Popen) -> None:
        for raw in process.stdout:
            for line in raw.replace("\r", "\n").splitlines():
                if not line.strip():
                    continue
                with self._lock:
                    self._lines.append(line)
                    m = _PASS_RE.match(line)
                    if m:
                        self._pass = int(m.group(1))
                    elif line.startswith(_FIRST_OF_TWO) and not self._from_scratch:
                        self._rounds = 2  # adapting trains again on every take (--refit)
                    elif line.startswith(_SECOND):
                        self._round, self._pass = self._round + 1, 0
        process.wait()

    def status(self) -> dict:
        """``state`` (idle, running, done, failed), progress in [0, 1], the last lines."""
        with self._lock:
            if self._process is None:
                state, code = "idle", None
            else:
                code = self._process.poll()
                state = "running" if code is None else ("done" if code == 0 else "failed")
            return {
                "state": state,
                "exit_status": code,
                "progress": (min(1.0, (self._round * self._total + self._pass) / (self._rounds * self._total))
                             if state != "done" else 1.0),
                "lines": list(self._lines)[-30:],
            }

    def stop(self) -> None:
        """End a run that is going on (when the server stops)."""
        with self._lock:
            if self._process is not None and self._process.poll() is None:
                self._process.terminate()
