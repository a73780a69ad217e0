"""The starter's calibration: drawn vocabularies, their examples and the fit."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from wordspot.corpus import read_manifest
from wordspot.decoding.confidence import BASE_MEASURE_NAMES, POSTERIOR_MEASURE_NAMES, MEASURE_NAMES
from wordspot.errors import TrainingError
from wordspot.evaluation.calibrate import calibration_measures
from wordspot.evaluation.starter_calibration import (StarterCalibrationConfig, fit_starter_calibration,
                                                     starter_calibration_examples)
from wordspot.language.lexicon import read_lexicon
from wordspot.model import load_model

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def starter_and_takes():
    model = load_model("starter")
    model.lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")  # words the demo takes say
    utts = [u for u in read_manifest(REPO / "recordings" / "train.csv") if u.speaker in ("flite-kal16", "flite-slt")]
    return model, utts


def test_examples_label_only_the_vocabularys_own_recordings_right(starter_and_takes):
    model, utts = starter_and_takes
    config = StarterCalibrationConfig(vocabularies=2, words=(3, 4), other_talk=0, other_words=4, jumbled=1,
                                      noise=2, speeds=(1.0,))
    lines = []
    ex = starter_calibration_examples(model, utts, config, report=lines.append)
    assert ex.measures.shape == (ex.right.size, len(MEASURE_NAMES))
    assert len(lines) == 2 and "vocabulary 2/2" in lines[1]
    # every right word comes from a recording of the vocabulary; other words, jumbled speech
    # and noise give wrong words only (marked as such)
    assert ex.right.sum() >= 4
    assert not (ex.right & ex.own_words_removed).any()
    assert not ex.right[ex.jumbled].any()
    # the posterior measures are NaN without a state scorer in the starter, finite with one;
    # a starter has no second network
    post = ex.measures[:, len(BASE_MEASURE_NAMES):len(BASE_MEASURE_NAMES) + len(POSTERIOR_MEASURE_NAMES)]
    assert np.isnan(post).all() if model.scorer is None else np.isfinite(post).all()
    assert np.isnan(ex.measures[:, len(BASE_MEASURE_NAMES) + len(POSTERIOR_MEASURE_NAMES):]).all()
    # the same seed gives the same examples
    again = starter_calibration_examples(model, utts, config)
    np.testing.assert_array_equal(again.measures, ex.measures)


def test_fit_gives_a_calibration_over_the_measures_the_starter_computes(starter_and_takes):
    model, utts = starter_and_takes
    config = StarterCalibrationConfig(vocabularies=2, words=(4, 5), other_talk=0, other_words=6, jumbled=2,
                                      noise=3, speeds=(1.0,))
    cal, ex = fit_starter_calibration(model, utts, config)
    assert cal is not None and cal.names == calibration_measures(ex.measures)
    assert (cal.names == BASE_MEASURE_NAMES) == (model.scorer is None)
    # right words get a higher probability than wrong ones on average
    cols = [MEASURE_NAMES.index(n) for n in cal.names]
    p = cal.predict(ex.measures[:, cols])
    assert p[ex.right].mean() > p[~ex.right].mean()


def test_too_few_words_and_bad_settings_are_refused(starter_and_takes):
    model, utts = starter_and_takes
    with pytest.raises(TrainingError, match="distinct words alone, fewer than the 30"):
        starter_calibration_examples(model, utts[:40], StarterCalibrationConfig(words=(8, 30)))
    with pytest.raises(TrainingError, match="words must be two whole numbers"):
        StarterCalibrationConfig(words=(5, 3))
    with pytest.raises(TrainingError, match="vocabularies must be a whole number >= 1"):
        StarterCalibrationConfig(vocabularies=0)


def test_noisy_copies_and_phrases_add_words_and_leave_the_others_as_they_were(starter_and_takes):
    # Our own labelling rule, checked by counting: with the two options on, words heard in
    # noisy copies of the commands and in phrases joined from them come in (some right,
    # labelled by the alignment); every example of the other kinds stays as it was.
    model, utts = starter_and_takes
    config = StarterCalibrationConfig(vocabularies=2, words=(3, 4), other_talk=0, other_words=2, jumbled=1,
                                      noise=1, speeds=(1.0,))
    plain = starter_calibration_examples(model, utts, config)
    assert set(plain.source) <= {"held-out", "held-out, own words removed", "jumbled", "noise only"}
    more = starter_calibration_examples(model, utts, replace(config, noisy=1, phrases=3))
    old = ~np.isin(more.source, ("noisy", "phrase"))
    np.testing.assert_array_equal(more.measures[old], plain.measures)
    np.testing.assert_array_equal(more.right[old], plain.right)
    assert more.right[more.source == "noisy"].any() and more.right[more.source == "phrase"].any()
    again = starter_calibration_examples(model, utts, replace(config, noisy=1, phrases=3))
    np.testing.assert_array_equal(again.measures, more.measures)


@pytest.mark.parametrize("field, value, match", [("noisy", -1, "noisy must be a whole number"),
                                                 ("phrases", 2.5, "phrases must be a whole number"),
                                                 ("noise_snr_db", (20.0, 5.0), "noise_snr_db must be two finite"),
                                                 ("noise_snr_db", None, "noise_snr_db must be two finite")])
def test_bad_noisy_and_phrase_settings_are_refused(field, value, match):
    with pytest.raises(TrainingError, match=match):
        StarterCalibrationConfig(**{field: value})


def test_impacts_and_more_words_alone_add_wrong_words_and_leave_the_others_as_they_were(starter_and_takes):
    # Our own labelling rule: every word heard in a clip of impacts or in a one-word recording
    # of a word outside the vocabulary is wrong; the examples of the other kinds stay as they were.
    model, utts = starter_and_takes
    config = StarterCalibrationConfig(vocabularies=2, words=(3, 4), other_talk=0, other_words=2, jumbled=1,
                                      noise=1, speeds=(1.0,))
    plain = starter_calibration_examples(model, utts, config)
    more = starter_calibration_examples(model, utts, replace(config, impacts=4, more_words=8))
    old = ~np.isin(more.source, ("impacts", "other word alone"))
    np.testing.assert_array_equal(more.measures[old], plain.measures)
    np.testing.assert_array_equal(more.right[old], plain.right)
    new = ~old
    assert (more.source == "other word alone").sum() >= 4  # 16 recordings of other words: most give a word
    assert not more.right[new].any() and more.own_words_removed[new].all()
    again = starter_calibration_examples(model, utts, replace(config, impacts=4, more_words=8))
    np.testing.assert_array_equal(again.measures, more.measures)
    with pytest.raises(TrainingError, match="impacts must be a whole number"):
        StarterCalibrationConfig(impacts=-2)
    with pytest.raises(TrainingError, match="more_words must be a whole number"):
        StarterCalibrationConfig(more_words=1.5)


def test_the_cap_is_that_of_every_calibration_and_none_leaves_the_fit_uncapped(starter_and_takes):
    # Our own rule (calibrate.contrary_caps; common practice, no source): a measure whose
    # weight opposes its meaning is capped at the right words' quantile. The starter's fit
    # applies it as every calibration does, on the same weights; None stores no cap.
    from wordspot.evaluation.calibrate import DEFAULT_CAP_QUANTILE, MEASURE_SIGNS, contrary_caps

    model, utts = starter_and_takes
    config = StarterCalibrationConfig(vocabularies=2, words=(4, 5), other_talk=0, other_words=6, jumbled=2,
                                      noise=3, speeds=(1.0,))
    assert config.cap_quantile == DEFAULT_CAP_QUANTILE
    plain, ex = fit_starter_calibration(model, utts, replace(config, cap_quantile=None))
    assert plain.lower is None and plain.upper is None
    sign = np.array([MEASURE_SIGNS.get(n, 0) for n in plain.names])
    assert (sign * plain.coefficients < 0).any()  # so that there is something to cap here
    cols = [MEASURE_NAMES.index(n) for n in plain.names]
    for q in (DEFAULT_CAP_QUANTILE, 0.9):
        cal, _ = fit_starter_calibration(model, utts, replace(config, cap_quantile=q))
        np.testing.assert_array_equal(cal.coefficients, plain.coefficients)
        assert cal.to_dict() == contrary_caps(plain, ex.measures[ex.right][:, cols], q).to_dict()
        assert cal.to_dict() != plain.to_dict()
    with pytest.raises(TrainingError, match="cap quantile must be a number in"):
        StarterCalibrationConfig(cap_quantile=1.5)
