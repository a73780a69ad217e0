"""End to end: adapt the starter with calibration on a few demo voices, check it on another voice.

The check voice (flite-awb) is held out of adaptation. Its recordings are recognised as at
training time: with the bakery lexicon, and with each recording's own word removed (every
word heard then is wrong), so both kinds of word occur.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from wordspot.cli import main
from wordspot.corpus import read_manifest
from wordspot.decoding.confidence import BASE_MEASURE_NAMES, MEASURE_NAMES
from wordspot.evaluation.calibrate import (CALIBRATION_POSTERIOR_MEASURES, CalibrationConfig, held_out_recognitions,
                                           train_calibrated)
from wordspot.evaluation.reliability import expected_calibration_error, reliability_table, word_hits
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model, save_model
from wordspot.starters import starter_path
from wordspot.training.adapt import adapt

REPO = Path(__file__).resolve().parents[2]
RECORDINGS = REPO / "recordings"
VOICES = ("flite-slt", "festival-kal", "espeak-en-us-f1", "espeak-en-gb-f3")
CHECK_VOICE = "flite-awb"

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not (RECORDINGS / "train.csv").is_file() or not starter_path("starter").is_file(),
                       reason="demo recordings or the starter model not present"),
]


@pytest.fixture(scope="module")
def calibrated(tmp_path_factory):
    utts = read_manifest(RECORDINGS / "train.csv")
    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    start = load_model("starter")
    model, _ = train_calibrated(lambda part: adapt(part, lexicon, start), [u for u in utts if u.speaker in VOICES],
                                config=CalibrationConfig().decided(adapting=True))
    path = save_model(model, tmp_path_factory.mktemp("model") / "calibrated.model")
    return model, path, [u for u in utts if u.speaker == CHECK_VOICE]


def test_calibration_is_stored_with_its_measures(calibrated):
    model, path, _ = calibrated
    assert load_model(path).calibration.to_dict() == model.calibration.to_dict()
    # the base measures, and the posterior ones when the model has a state scorer
    want = BASE_MEASURE_NAMES + (CALIBRATION_POSTERIOR_MEASURES if model.scorer is not None else ())
    assert model.calibration.names == want and set(want) <= set(MEASURE_NAMES)
    info = model.info["calibration"]
    assert info["held_out_recordings"] >= 20 and info["right_words"] >= 5 and info["wrong_words"] >= 5
    assert info["refit_on_all"] is True


def test_confidences_on_an_unheard_voice_rank_and_match_the_share_right(calibrated):
    from sklearn.metrics import roc_auc_score

    model, _, check = calibrated
    conf, right = [], []
    for u, whole, without in held_out_recognitions(model, check):
        conf += [s.confidence for s in whole.segments]
        right += word_hits(u.words, whole.words)
        if without is not None:
            conf += [s.confidence for s in without.segments]
            right += [False] * len(without.segments)
    conf, right = np.array(conf), np.array(right)
    # Area under the ROC curve (scikit-learn): 0.5 is chance; right words must rank above wrong ones.
    assert roc_auc_score(right, conf) > 0.85
    # Calibration in the large and per bin (reliability diagram, DeGroot and Fienberg 1983):
    # the mean confidence is near the share right, and the weighted gap per bin is small.
    assert abs(conf.mean() - right.mean()) < 0.1
    assert expected_calibration_error(reliability_table(conf, right)) < 0.15


def test_command_line_threshold_and_reliability(calibrated, tmp_path, capsys):
    _, path, check = calibrated
    files = [str(u.path) for u in check[:6]]
    assert main(["recognize", "--model", str(path), "--format", "jsonl", "--min-confidence", "1", *files]) == 0
    records = [json.loads(line) for line in capsys.readouterr().out.splitlines()]
    assert all(r["words"] == [] and r["below_threshold"] for r in records)  # no probability reaches 1
    manifest = tmp_path / "check.csv"
    manifest.write_text("path,transcript,speaker\n" + "".join(f"{u.path},{' '.join(u.words)},{u.speaker}\n"
                                                               for u in check[:30]), encoding="utf-8")
    assert main(["evaluate", "--model", str(path), str(manifest), "--min-confidence", "0"]) == 0
    out = capsys.readouterr().out
    assert "Confidence reliability (every word heard" in out
    assert main(["evaluate", "--model", str(path), str(manifest), "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    rows = record["confidence_reliability"]
    assert len(rows) == 10 and sum(r["words"] for r in rows) >= 30  # dropped words count too
    assert 0.0 <= record["expected_calibration_error"] <= 1.0
