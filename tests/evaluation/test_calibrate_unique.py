"""End to end: one take of every word by one voice (no transcript repeats) still gives a calibration."""

from __future__ import annotations

from pathlib import Path

import pytest

from wordspot.corpus import read_manifest
from wordspot.evaluation.calibrate import CALIBRATION_FOLDS, CalibrationConfig, calibration_note, train_calibrated
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


def test_one_take_per_word_gets_its_own_calibration():
    seen, utts = set(), []
    for u in read_manifest(RECORDINGS / "train.csv"):
        if u.speaker == "flite-kal16" and u.words not in seen:
            seen.add(u.words)
            utts.append(u)
    assert len({u.words for u in utts}) == len(utts) >= 20  # every transcript once
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model("starter")
    fit = adapting(start, lexicon, config=AdaptationConfig(strength=0))
    model, summary = train_calibrated(fit, utts, config=CalibrationConfig().decided(adapting=True))
    info = model.info["calibration"]
    assert model.calibration is not None and not info.get("kept_from_start")
    assert info["held_out"] == "folds" and info["folds"] == CALIBRATION_FOLDS
    assert info["held_out_recordings"] == len(utts)  # every recording held out once
    assert info["right_words"] >= 5 and info["wrong_words"] >= 5
    assert calibration_note(model).startswith("word confidences: calibrated on your own recordings")
