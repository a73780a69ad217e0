"""The adapting training on every recording run beside the calibration's recognition: the
same model, calibration and report lines as one after the other."""

from __future__ import annotations

import threading
from pathlib import Path

import numpy as np
import pytest

from wordspot.corpus import read_manifest
from wordspot.evaluation import calibrate
from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model
from wordspot.starters import starter_path
from wordspot.training.adapt import AdaptationConfig, adapting

REPO = Path(__file__).resolve().parents[2]
RECORDINGS = REPO / "recordings"

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not (RECORDINGS / "train.csv").is_file() or not starter_path("starter").is_file(),
                       reason="demo recordings or the starter model not present"),
]


def _one_after_the_other(fit):
    """``fit`` without ``runs_beside``: the training on everything waits for the recognition."""
    def plain(utterances, held_out=None, again=True):
        return fit(utterances, held_out=held_out, again=again)

    plain.takes_held_out = True
    plain.start_calibration = fit.start_calibration
    return plain


def test_training_again_beside_the_recognition_changes_nothing(monkeypatch):
    utts = read_manifest(RECORDINGS / "train.csv")
    voices = sorted({u.speaker for u in utts})[:4]
    utts = [u for u in utts if u.speaker in voices][::2]
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model("starter")
    config = CalibrationConfig(speeds=(1.0,), jumbled=10).decided(adapting=True)
    adapt_config = AdaptationConfig(jobs=2, follow_noise_copies=1, follow_speeds=(0.9,))

    in_main = []
    real_examples = calibrate.calibration_examples

    def watching(*args, **kwargs):
        in_main.append(threading.current_thread() is threading.main_thread())
        return real_examples(*args, **kwargs)

    monkeypatch.setattr(calibrate, "calibration_examples", watching)
    runs, overlapping = {}, []
    for name, beside in (("after", False), ("beside", True)):
        lines: list[str] = []
        fit = adapting(start, lexicon, config=adapt_config, report=lines.append)
        assert fit.runs_beside

        def seeing(utterances, held_out=None, again=True, say=None, fit=fit):
            if held_out is None:  # the training on everything: is the recognition running meanwhile?
                overlapping.append(any(t.name == "wordspot-calibration" and t.is_alive()
                                       for t in threading.enumerate()))
            return fit(utterances, held_out=held_out, again=again, say=say)

        seeing.takes_held_out, seeing.runs_beside, seeing.start_calibration = True, True, fit.start_calibration
        model, summary = train_calibrated(seeing if beside else _one_after_the_other(fit), utts, config=config,
                                          report=lines.append, jobs=2)
        runs[name] = (model, summary, lines)
    assert in_main == [True, False]  # recognised in a thread the second time
    assert overlapping == [True]  # while the training on everything ran
    (a, sa, la), (b, sb, lb) = runs["after"], runs["beside"]
    assert a.info["utterances"] == b.info["utterances"] == len(utts)
    for part in ("weights", "means", "variances"):
        np.testing.assert_array_equal(getattr(a.mixtures, part), getattr(b.mixtures, part))
    for x, y in zip(a.scorer.weights, b.scorer.weights):
        np.testing.assert_array_equal(x, y)
    np.testing.assert_array_equal(a.bigrams.counts, b.bigrams.counts)
    assert a.calibration.to_dict() == b.calibration.to_dict()
    assert a.info["calibration"] == b.info["calibration"]
    assert a.info["strength"] == b.info["strength"] and sa.lines()[:-1] == sb.lines()[:-1]  # but the seconds

    def same(line):  # the scorer's line says its own seconds
        return line.split(" epoch")[0] if line.startswith("sound scorer") else line
    assert [same(x) for x in la] == [same(x) for x in lb]  # the same lines in the same order
