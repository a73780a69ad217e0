"""The mixtures alone: the scorer taken out, and a starter's calibration fitted again without it."""

from __future__ import annotations

import csv
import hashlib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

import wordspot.evaluation.mixtures_only as mixtures_only
from wordspot.corpus import read_manifest
from wordspot.decoding.confidence import BASE_MEASURE_NAMES, MEASURE_NAMES, POSTERIOR_MEASURE_NAMES
from wordspot.errors import WordspotError
from wordspot.evaluation.mixtures_only import cached_starter_mixtures_only, starter_mixtures_only, without_scorer
from wordspot.evaluation.starter_calibration import StarterCalibrationConfig
from wordspot.model import load_model, save_model
from wordspot.util.logistic import Calibration

REPO = Path(__file__).resolve().parents[2]
# A few seconds of work: two vocabularies of 4-5 words, no other talk, few clips (as
# test_starter_calibration.py's fit, which gives enough wrong words to fit on).
TINY = StarterCalibrationConfig(vocabularies=2, words=(4, 5), other_talk=0, other_words=6, jumbled=2, noise=3,
                                speeds=(1.0,))


@pytest.fixture(scope="module")
def tiny_dev(tmp_path_factory):
    """A dev manifest of two demo voices' takes of words the starter's own lexicon holds."""
    starter = load_model("starter")
    rows = []
    with open(REPO / "recordings" / "train.csv", newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            if row["speaker"] in ("flite-kal16", "flite-slt") and row["transcript"] in starter.lexicon.words:
                rows.append([str(REPO / "recordings" / row["path"]), row["transcript"], row["speaker"]])
    path = tmp_path_factory.mktemp("dev") / "dev.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows([["path", "transcript", "speaker"]] + rows)
    return path


def test_without_scorer_takes_out_the_scorer_and_a_calibration_that_reads_it(tmp_path):
    starter = load_model("starter")
    assert starter.scorer is not None and set(starter.calibration.names) & set(POSTERIOR_MEASURE_NAMES)
    bare = without_scorer(starter)
    assert bare.scorer is None and bare.calibration is None
    assert "scorer" not in bare.info and "calibration" not in bare.info
    assert bare.info["scorer_taken_out"] == {"had_scorer": True, "calibration_dropped": True}
    assert bare.mixtures is starter.mixtures  # the same Gaussian mixtures
    assert starter.scorer is not None and starter.calibration is not None  # the model given is unchanged
    # saved and loaded, it stays without a scorer
    assert load_model(save_model(bare, tmp_path / "bare.model")).scorer is None
    # a calibration over the base measures alone is kept
    k = len(BASE_MEASURE_NAMES)
    base = Calibration(BASE_MEASURE_NAMES, np.zeros(k), np.ones(k), np.ones(k), 0.0)
    kept = without_scorer(replace(starter, calibration=base))
    assert kept.calibration is base and kept.info["scorer_taken_out"]["calibration_dropped"] is False


def test_starter_mixtures_only_fits_on_the_base_measures(tiny_dev):
    starter = load_model("starter")
    model, ex = starter_mixtures_only(starter, read_manifest(tiny_dev), TINY, made_from="tiny")
    assert model.scorer is None
    assert model.calibration.names == BASE_MEASURE_NAMES
    assert not set(model.calibration.names) & set(POSTERIOR_MEASURE_NAMES)
    # without the scorer the posterior measures are not there (NaN); with it they were
    post = [MEASURE_NAMES.index(n) for n in POSTERIOR_MEASURE_NAMES]
    assert np.isnan(ex.measures[:, post]).all()
    assert model.info["calibration"]["measures"] == list(BASE_MEASURE_NAMES)
    assert model.info["calibration"]["made_from"] == "tiny"
    assert model.info["calibration"]["right_words"] == int(ex.right.sum()) > 0
    # right words get a higher probability than wrong ones on average (the fit learned something)
    p = model.calibration.predict(ex.measures[:, :len(BASE_MEASURE_NAMES)])
    assert p[ex.right].mean() > p[~ex.right].mean()


def test_the_cached_starter_is_fitted_on_the_dev_manifest_with_the_shipped_settings(tiny_dev, tmp_path, monkeypatch):
    calls = []
    real = mixtures_only.fit_starter_calibration

    def spy(model, utterances, config, *, report=None):
        calls.append((model, list(utterances), config))
        return real(model, utterances, TINY, report=report)

    monkeypatch.setattr(mixtures_only, "fit_starter_calibration", spy)
    cache = tmp_path / "starter-no-scorer.model"
    model, reused, seconds = cached_starter_mixtures_only(cache, tiny_dev)
    assert not reused and seconds > 0 and cache.is_file()
    (fitted_on, utts, config), = calls
    # the recordings of the dev manifest, the settings of the shipped starter's calibration
    assert [u.path for u in utts] == [u.path for u in read_manifest(tiny_dev)]
    assert config == StarterCalibrationConfig()
    assert fitted_on.scorer is None
    assert model.scorer is None and model.calibration.names == BASE_MEASURE_NAMES
    key = model.info["made_without_scorer"]
    assert key["dev_manifest_sha256"] == hashlib.sha256(tiny_dev.read_bytes()).hexdigest()
    # the second time it is read back, not fitted
    again, reused, seconds = cached_starter_mixtures_only(cache, tiny_dev)
    assert reused and seconds == 0.0 and len(calls) == 1
    assert again.calibration.names == model.calibration.names
    np.testing.assert_array_equal(again.calibration.coefficients, model.calibration.coefficients)
    # another manifest: fitted again
    other = tmp_path / "other.csv"
    lines = tiny_dev.read_text(encoding="utf-8").splitlines()
    other.write_text("\n".join(lines[:1] + lines[2:]) + "\n", encoding="utf-8")
    _, reused, _ = cached_starter_mixtures_only(cache, other)
    assert not reused and len(calls) == 2


def test_a_missing_dev_manifest_gets_one_clear_error(tmp_path):
    with pytest.raises(WordspotError, match=r"nowhere\.csv: the starter corpus's dev split is not there"):
        cached_starter_mixtures_only(tmp_path / "x.model", tmp_path / "nowhere.csv")


def test_the_demo_fits_it_where_the_shipped_calibration_was_fitted():
    # The shipped starter's calibration names its dev manifest (recordings/build_starters.py
    # add_calibration); the demo's starter without its scorer is fitted on the same file.
    from wordspot.demo import starter_dev_manifest

    made_from = load_model("starter").info["calibration"]["made_from"]
    assert starter_dev_manifest(REPO / "recordings") == REPO / made_from


@pytest.mark.slow
def test_adapting_the_starter_without_its_scorer_fits_a_calibration_on_the_base_measures():
    # As the demo's adapted-no-scorer: the starter without its scorer (and its calibration
    # over the base measures as the fallback), adapted and calibrated as `wordspot train` does,
    # here on two demo voices.
    from wordspot.evaluation.calibrate import CalibrationConfig, train_calibrated
    from wordspot.language.lexicon import read_lexicon
    from wordspot.training.adapt import AdaptationConfig, adapting

    utts = [u for u in read_manifest(REPO / "recordings" / "train.csv") if u.speaker in ("flite-slt", "festival-kal")]
    start = without_scorer(load_model("starter"))
    fit = adapting(start, read_lexicon(REPO / "lexicon" / "bakery.txt"), config=AdaptationConfig(follow_passes=1))
    model, _ = train_calibrated(fit, utts, config=CalibrationConfig().decided(adapting=True),
                                fallback=fit.start_calibration)
    assert model.scorer is None and "scorer_adaptation" not in model.info
    assert model.calibration is not None and model.calibration.names == BASE_MEASURE_NAMES
    assert model.info["calibration"]["measures"] == list(BASE_MEASURE_NAMES)
