"""The calibration's sign bounds and caps: a word that fits unusually well is not rated lower for it."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from wordspot.decoding.confidence import BASE_MEASURE_NAMES, MEASURE_NAMES
from wordspot.errors import TrainingError
from wordspot.evaluation.calibrate import (MEASURE_SIGNS, CalibrationConfig, CalibrationExamples, contrary_caps,
                                           fit_calibration)

APF = BASE_MEASURE_NAMES.index("acoustic_per_frame")
FILLER = BASE_MEASURE_NAMES.index("filler_margin")


def _easy_wrong_words(rng, right=300, wrong=600):
    """Examples where the wrong words come from frames any state fits well (other talk in
    clean speech): ``acoustic_per_frame`` = quality + easiness, ``filler_margin`` = quality
    + a little noise, the wrong words with low quality and high easiness. Given the
    margin, a high acoustic score then points to a wrong word, so a free fit gives it a
    negative weight though a higher score means the word's states fit better."""
    n = right + wrong
    y = np.r_[np.ones(right, bool), np.zeros(wrong, bool)]
    quality = np.where(y, rng.normal(1.0, 1.0, n), rng.normal(-1.0, 1.0, n))
    easiness = np.where(y, rng.normal(0.0, 1.0, n), rng.normal(1.5, 1.0, n))
    x = np.zeros((n, len(MEASURE_NAMES)))  # the other measures constant: no weight (their scale is 1)
    x[:, len(BASE_MEASURE_NAMES):] = np.nan  # no state scorer
    x[:, APF] = -50.0 + 3.0 * (quality + easiness)
    x[:, FILLER] = quality + rng.normal(0.0, 0.3, n)
    return CalibrationExamples(x, y, ~y, recordings=60)


def test_every_signed_measure_is_one_the_decoder_computes():
    assert set(MEASURE_SIGNS) <= set(MEASURE_NAMES)
    assert set(MEASURE_SIGNS.values()) <= {-1, 1}
    assert "frames_per_phone" not in MEASURE_SIGNS  # too short and too long phones are both suspicious


def test_sign_bounds_give_every_weight_its_measures_sign(rng):
    ex = _easy_wrong_words(rng)
    free = fit_calibration(ex, config=CalibrationConfig(cap_quantile=None))
    assert free.coefficients[APF] < 0  # the premise: the free fit turns the score against the word
    signed = fit_calibration(ex, config=CalibrationConfig(weight_signs=True))
    assert signed.names == free.names
    for name, w in zip(signed.names, signed.coefficients):
        assert MEASURE_SIGNS.get(name, 0) * w >= 0, name
    assert signed.coefficients[APF] == 0.0  # held on its bound
    assert signed.coefficients[FILLER] > 0


def test_a_word_beyond_the_cap_is_rated_as_at_the_cap_not_lower(rng):
    ex = _easy_wrong_words(rng)
    free = fit_calibration(ex, config=CalibrationConfig(cap_quantile=None))
    capped = fit_calibration(ex, config=CalibrationConfig(cap_quantile=0.9))
    np.testing.assert_array_equal(capped.coefficients, free.coefficients)  # the same fit, capped afterwards
    assert capped.intercept == free.intercept
    cap = np.quantile(ex.measures[ex.right, APF], 0.9)  # numpy's default (linear) quantile
    assert capped.upper[APF] == pytest.approx(cap, rel=1e-12)
    # only the measure whose weight opposes its sign is capped, and only on its better side
    assert np.isinf(np.delete(capped.upper, APF)).all() and capped.lower is None

    word = ex.measures[ex.right][:, :len(BASE_MEASURE_NAMES)].mean(axis=0)  # a typical right word
    scores = np.linspace(cap - 3.0, cap + 12.0, 31)
    rows = np.tile(word, (scores.size, 1))
    rows[:, APF] = scores
    p_free, p_capped = free.predict(rows), capped.predict(rows)
    at_cap = free.predict(np.where(np.arange(word.size) == APF, cap, word))
    beyond = scores > cap
    assert np.all(np.diff(p_free) < 0)  # without the cap: the better the fit, the lower the confidence
    np.testing.assert_allclose(p_capped[beyond], at_cap, rtol=1e-12)
    assert np.all(p_capped[beyond] > p_free[beyond])
    np.testing.assert_array_equal(p_capped[~beyond], p_free[~beyond])  # inside the range: unchanged


def test_weights_that_agree_with_their_signs_leave_no_cap(rng):
    ex = _easy_wrong_words(rng)
    signed = fit_calibration(ex, config=CalibrationConfig(weight_signs=True, cap_quantile=0.9))
    assert signed.lower is None and signed.upper is None
    # a measure of sign -1 with a positive weight is capped from below at the low quantile
    cal = fit_calibration(ex, config=CalibrationConfig(cap_quantile=None))
    flipped = replace(cal, coefficients=np.where(np.array(cal.names) == "next_to_filler", 0.5, cal.coefficients))
    right = ex.measures[ex.right][:, :len(BASE_MEASURE_NAMES)]
    out = contrary_caps(flipped, right, 0.9)
    j = BASE_MEASURE_NAMES.index("next_to_filler")
    assert out.lower[j] == pytest.approx(np.quantile(right[:, j], 0.1), rel=1e-12)


def test_the_cap_is_deterministic_and_stored_with_the_calibration(rng):
    ex = _easy_wrong_words(rng)
    a = fit_calibration(ex, config=CalibrationConfig(cap_quantile=0.9, weight_signs=False))
    b = fit_calibration(ex, config=CalibrationConfig(cap_quantile=0.9, weight_signs=False))
    assert a.to_dict() == b.to_dict() and "upper" in a.to_dict() and "lower" not in a.to_dict()


@pytest.mark.parametrize("q", [0.0, 1.5, -0.1, True, "0.9"])
def test_a_bad_cap_quantile_is_refused(q):
    with pytest.raises(TrainingError, match="cap quantile must be a number in"):
        CalibrationConfig(cap_quantile=q)


def test_training_stores_the_capped_calibration_and_names_the_capped_measures(rng, monkeypatch):
    from pathlib import Path

    from decoding_helpers import tiny_model
    from wordspot.corpus import Utterance
    from wordspot.evaluation import calibrate

    takes = [(w, s, t) for w in ("oven", "stop") for s in range(5) for t in range(20)]  # 15 of each held out: one part
    utts = [Utterance(Path(f"{w}-{s}-{t}.wav"), (w,), f"baker-{s}", row) for row, (w, s, t) in enumerate(takes, 2)]
    model = tiny_model(rng, {w: [["AA", "B"]] for w in ("oven", "stop")})
    examples = _easy_wrong_words(rng)
    monkeypatch.setattr(calibrate, "calibration_examples", lambda m, held, **_: examples)
    out, _ = calibrate.train_calibrated(lambda part: (model, "summary"), utts,
                                        config=CalibrationConfig(refit=False, cap_quantile=0.9))
    assert out.info["calibration"]["capped_measures"] == ["acoustic_per_frame"]
    assert out.calibration.to_dict() == fit_calibration(examples, config=CalibrationConfig(cap_quantile=0.9)).to_dict()
    out, _ = calibrate.train_calibrated(lambda part: (model, "summary"), utts,
                                        config=CalibrationConfig(refit=False, cap_quantile=None))
    assert "capped_measures" not in out.info["calibration"] and out.calibration.upper is None


def test_the_default_caps_and_a_model_file_from_before_scores_as_before(tmp_path):
    import json

    from wordspot.evaluation.calibrate import DEFAULT_CAP_QUANTILE
    from wordspot.model import load_model, save_model
    from wordspot.starters import starter_path
    from wordspot.util.logistic import Calibration

    assert CalibrationConfig().cap_quantile == DEFAULT_CAP_QUANTILE and CalibrationConfig().weight_signs is False
    # the shipped starter's calibration is capped (refitted 2026-12-04): a limit on the
    # better side of exactly the measures whose weight opposes their sign, none elsewhere
    starter = load_model(starter_path("starter"))
    cal = starter.calibration
    sign = np.array([MEASURE_SIGNS.get(n, 0) for n in cal.names])
    contrary = sign * cal.coefficients < 0
    assert contrary.any()
    upper = cal.upper if cal.upper is not None else np.full(len(sign), np.inf)
    lower = cal.lower if cal.lower is not None else np.full(len(sign), -np.inf)
    np.testing.assert_array_equal(np.isfinite(upper), contrary & (sign > 0))
    np.testing.assert_array_equal(np.isfinite(lower), contrary & (sign < 0))
    # a file from before the caps holds no limits in its header; it loads with none, and
    # its probabilities are the logistic formula of its stored numbers (module docstring)
    plain = Calibration(cal.names, cal.means, cal.scales, cal.coefficients, cal.intercept)
    path = save_model(replace(starter, calibration=plain), tmp_path / "before-caps.model")
    with np.load(path, allow_pickle=False) as data:
        header = json.loads(data["header"].astype(np.uint8).tobytes().decode("utf-8"))
    assert not {"lower", "upper"} & set(header["calibration"])
    old = load_model(path).calibration
    assert old.lower is None and old.upper is None
    rows = old.means + old.scales * np.linspace(-3.0, 3.0, 7)[:, None]
    t = old.intercept + ((rows - old.means) / old.scales) @ old.coefficients
    np.testing.assert_allclose(old.predict(rows), 1.0 / (1.0 + np.exp(-t)), rtol=1e-12)
    # the capped one differs from it only beyond a cap
    beyond = rows.copy()
    j = int(np.flatnonzero(contrary)[0])
    beyond[:, j] = upper[j] + 5.0 if sign[j] > 0 else lower[j] - 5.0
    assert not np.allclose(cal.predict(beyond), old.predict(beyond))
    inside = np.clip(rows, lower, upper)
    np.testing.assert_allclose(cal.predict(inside), old.predict(inside), rtol=1e-12)