"""Training progress on the page, read from the trainer's output lines."""

from __future__ import annotations

import io

import pytest

from wordspot.training.adapt import ADAPT_LEGEND, AdaptationConfig
from wordspot.web.training_job import TrainingJob


class _Running:
    """A child process still running whose output is the given lines."""

    def __init__(self, lines):
        self.stdout = io.StringIO("".join(line + "\n" for line in lines))

    def poll(self):
        return None

    def wait(self):
        return None


def _progress(lines):
    job = TrainingJob()
    job._process = _Running(lines)
    job._read(job._process)
    return job.status()["progress"]


def test_progress_counts_both_trainings_of_a_calibrated_adaptation():
    # the most passes an adaptation may take (the strength is chosen as it goes)
    passes = AdaptationConfig().passes + int(AdaptationConfig().mean_transform) + AdaptationConfig().follow_passes
    first = ["confidence calibration: training on 80 recordings, 14 held out"]
    first += [ADAPT_LEGEND] + [f"adapt pass {k}  fit -40.0" for k in range(1, passes + 1)]
    # worked by hand: all passes of the first of two trainings are half the run, one more a
    # further 1 / (2 x passes)
    assert _progress(first) == pytest.approx(0.5)
    again = first + ["confidence calibration: training again on all 94 recordings", "adapt pass 1  ..."]
    assert _progress(again) == pytest.approx(0.5 + 0.5 / passes)
    # calibration skipped (too few takes): one training, the passes over its own count
    assert _progress(["adapt pass 1  ..."]) == pytest.approx(1 / passes)
