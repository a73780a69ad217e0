"""Penalised logistic regression: against scikit-learn, a worked example, the stored form."""

import json

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import expit

from wordspot.util.logistic import Calibration, fit_logistic, sigmoid


def _data(rng, n=400):
    x = np.column_stack([rng.normal(-3.0, 2.0, n), rng.normal(10.0, 0.5, n), rng.uniform(0.0, 4.0, n)])
    t = 0.8 * x[:, 0] - 1.5 * (x[:, 1] - 10.0) + 0.1 * x[:, 2] + 1.0
    y = (rng.uniform(size=n) < expit(t)).astype(int)
    return x, y


@pytest.mark.parametrize("penalty", [1.0, 10.0])
def test_matches_scikit_learn(rng, penalty):
    # scikit-learn's LogisticRegression minimises 0.5 ||w||^2 + C * sum(log-loss) with an
    # unpenalised intercept (its user guide, "Logistic regression"): our objective with
    # C = 1 / penalty, on the same standardised inputs.
    from sklearn.linear_model import LogisticRegression

    x, y = _data(rng)
    ours = fit_logistic(x, y, ("a", "b", "c"), penalty=penalty)
    z = (x - x.mean(axis=0)) / x.std(axis=0)
    ref = LogisticRegression(C=1.0 / penalty, tol=1e-12, max_iter=10_000).fit(z, y)
    np.testing.assert_allclose(ours.coefficients, ref.coef_[0], rtol=1e-5, atol=1e-7)
    assert ours.intercept == pytest.approx(ref.intercept_[0], rel=1e-5, abs=1e-7)
    np.testing.assert_allclose(ours.predict(x), ref.predict_proba(z)[:, 1], rtol=1e-6, atol=1e-9)


def test_probabilities_lie_strictly_between_0_and_1_and_rise_with_a_positive_measure(rng):
    x, y = _data(rng)
    cal = fit_logistic(x, y, ("a", "b", "c"))
    p = cal.predict(x)
    assert p.shape == (x.shape[0],)
    assert np.all((p > 0) & (p < 1))
    assert cal.coefficients[0] > 0  # the data were drawn with a positive weight on "a"
    grid = np.tile(x[0], (50, 1))
    grid[:, 0] = np.linspace(-10.0, 4.0, 50)
    assert np.all(np.diff(cal.predict(grid)) > 0)  # the sigmoid of a rising line (definition)


def test_sigmoid_is_the_logistic_function_even_far_out():
    t = np.array([-800.0, -30.0, -1.0, 0.0, 2.5, 40.0, 800.0])
    np.testing.assert_allclose(sigmoid(t), expit(t), rtol=1e-15, atol=0)  # scipy.special.expit


def test_separable_data_stay_finite_at_the_first_order_condition():
    # Worked example: x = -2, -1, 1, 2 with labels 0, 0, 1, 1 are perfectly separable, so
    # without a penalty the weight runs off to infinity. Standardised, z = +-a, +-c with
    # a = 2 / sqrt(2.5), c = 1 / sqrt(2.5); by symmetry b = 0, and setting the derivative of
    # the objective to zero gives  penalty * w = 2a sigma(-a w) + 2c sigma(-c w)  (first-order
    # condition of the penalised log-likelihood, worked by hand), solved here with brentq.
    x = np.array([[-2.0], [-1.0], [1.0], [2.0]])
    y = np.array([0, 0, 1, 1])
    a, c = 2 / np.sqrt(2.5), 1 / np.sqrt(2.5)
    for penalty in (1.0, 0.01):
        w = brentq(lambda w: penalty * w - 2 * a * expit(-a * w) - 2 * c * expit(-c * w), 0.0, 1e4)
        cal = fit_logistic(x, y, ("margin",), penalty=penalty)
        assert cal.coefficients[0] == pytest.approx(w, rel=1e-6)
        assert cal.intercept == pytest.approx(0.0, abs=1e-8)
    assert w > 5.0  # a smaller penalty lets the weight grow, still finite


def test_a_constant_measure_gets_no_weight(rng):
    x, y = _data(rng, n=200)
    x[:, 2] = 7.0
    cal = fit_logistic(x, y, ("a", "b", "c"))
    assert cal.coefficients[2] == 0.0 and cal.scales[2] == 1.0  # its standardised column is all zeros


def test_round_trip_through_json(rng):
    x, y = _data(rng, n=100)
    cal = fit_logistic(x, y, ("a", "b", "c"))
    back = Calibration.from_dict(json.loads(json.dumps(cal.to_dict())))
    assert back.names == cal.names
    np.testing.assert_array_equal(back.predict(x), cal.predict(x))


@pytest.mark.parametrize("data, match", [
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0]}, "expected the keys"),
    ({"names": ["a"], "means": [0.0], "scales": [0.0], "coefficients": [1.0], "intercept": 0.0}, "scales must be > 0"),
    ({"names": ["a", "a"], "means": [0, 0], "scales": [1, 1], "coefficients": [1, 1], "intercept": 0}, "distinct"),
    ({"names": ["a"], "means": [0.0, 1.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0}, "means must be 1"),
    ({"names": ["a"], "means": ["x"], "scales": [1.0], "coefficients": [1.0], "intercept": 0}, "means must hold numbers"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": None}, "intercept"),
    ([1, 2], "expected the keys"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0, "upper": 3.0},
     "upper must be a list"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0, "upper": [1, 2]},
     "upper must be 1 numbers"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0, "lower": ["x"]},
     "lower must be a list of numbers or nulls"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0, "lower": [2.0],
      "upper": [1.0]}, "lower limits above upper ones"),
    ({"names": ["a"], "means": [0.0], "scales": [1.0], "coefficients": [1.0], "intercept": 0, "caps": [1.0]},
     "expected the keys"),
])
def test_malformed_stored_form_is_refused(data, match):
    with pytest.raises(ValueError, match=match):
        Calibration.from_dict(data)


def test_bad_training_input_is_refused(rng):
    x, y = _data(rng, n=50)
    with pytest.raises(ValueError, match="only the class 1"):
        fit_logistic(x, np.ones(50, dtype=int), ("a", "b", "c"))
    with pytest.raises(ValueError, match="only 0 and 1"):
        fit_logistic(x, y * 2, ("a", "b", "c"))
    with pytest.raises(ValueError, match=r"X must be \(n, 2\)"):
        fit_logistic(x, y, ("a", "b"))
    x[3, 1] = np.nan
    with pytest.raises(ValueError, match="NaN"):
        fit_logistic(x, y, ("a", "b", "c"))
    with pytest.raises(ValueError, match=r"rows of 3 measures"):
        Calibration(("a", "b", "c"), np.zeros(3), np.ones(3), np.ones(3), 0.0).predict(np.zeros((2, 2)))


def _objective_gradient(cal, x, y, penalty):
    """The gradient of the penalised negative log-likelihood (module docstring) at ``cal``'s
    weights, worked out here again: sum_i (p_i - y_i) z_i + penalty * w, and for the
    intercept sum_i (p_i - y_i)."""
    z = (x - cal.means) / cal.scales
    r = cal.predict(x) - y
    return z.T @ r + penalty * cal.coefficients, float(r.sum())


def test_signs_that_bind_nowhere_leave_the_fit_of_scikit_learn(rng):
    # The free optimum already has w_a > 0, w_b < 0: bounds that allow those signs bind
    # nowhere, so the constrained optimum is the free one (a convex problem's optimum inside
    # the feasible set is its constrained optimum), scikit-learn's as in the test above.
    from sklearn.linear_model import LogisticRegression

    x, y = _data(rng)
    z = (x - x.mean(axis=0)) / x.std(axis=0)
    ref = LogisticRegression(C=1.0, tol=1e-12, max_iter=10_000).fit(z, y)
    assert ref.coef_[0][0] > 0 and ref.coef_[0][1] < 0
    for signs in ([1, -1, 0], [1, 0, 0], [0, -1, 0]):
        ours = fit_logistic(x, y, ("a", "b", "c"), signs=signs)
        np.testing.assert_allclose(ours.coefficients, ref.coef_[0], rtol=1e-5, atol=1e-7)
        assert ours.intercept == pytest.approx(ref.intercept_[0], rel=1e-5, abs=1e-7)


def test_a_bound_that_binds_holds_the_weight_at_zero_with_the_gradient_pointing_out(rng):
    # "b" is drawn with a negative weight and allowed only >= 0: the Karush-Kuhn-Tucker
    # conditions of a convex problem with the bound w_b >= 0 (Boyd & Vandenberghe, Convex
    # Optimization, 5.5.3): w_b = 0 with dL/dw_b >= 0 (its multiplier), every other
    # gradient 0.
    x, y = _data(rng)
    cal = fit_logistic(x, y, ("a", "b", "c"), signs=[0, 1, 0])
    g, g0 = _objective_gradient(cal, x, y, 1.0)
    assert cal.coefficients[1] == 0.0
    assert g[1] > 1.0  # clearly outward: the free fit wants w_b < 0
    assert np.max(np.abs(g[[0, 2]])) < 1e-6 * len(y) and abs(g0) < 1e-6 * len(y)
    # On the face w_b = 0 the problem is the free one without "b" (same standardisation):
    # scikit-learn on the other two standardised columns gives the other weights.
    from sklearn.linear_model import LogisticRegression

    z = (x - x.mean(axis=0)) / x.std(axis=0)
    ref = LogisticRegression(C=1.0, tol=1e-12, max_iter=10_000).fit(z[:, [0, 2]], y)
    np.testing.assert_allclose(cal.coefficients[[0, 2]], ref.coef_[0], rtol=1e-5, atol=1e-7)
    assert cal.intercept == pytest.approx(ref.intercept_[0], rel=1e-5, abs=1e-7)


def test_a_weight_held_at_zero_from_below_and_the_fit_is_deterministic(rng):
    x, y = _data(rng)
    x[:, 2] = x[:, 0] + rng.normal(0.0, 0.3, x.shape[0])  # a measure moving with "a"
    free = fit_logistic(x, y, ("a", "b", "c"))
    cal = fit_logistic(x, y, ("a", "b", "c"), signs=[-1, 0, 1])  # "a" may only lower the odds
    assert free.coefficients[0] > 0 and cal.coefficients[0] == 0.0
    g, _ = _objective_gradient(cal, x, y, 1.0)
    assert g[0] < -1.0  # dL/dw_a <= 0 at the upper bound w_a <= 0 (KKT)
    assert cal.coefficients[2] > 0 and abs(g[2]) < 1e-6 * len(y)
    again = fit_logistic(x, y, ("a", "b", "c"), signs=[-1, 0, 1])
    assert again.to_dict() == cal.to_dict()


@pytest.mark.parametrize("signs", [[1, 0], [2, 0, 0], [True, 0, 0], ["+", 0, 0]])
def test_malformed_signs_are_refused(rng, signs):
    x, y = _data(rng, n=50)
    with pytest.raises(ValueError, match="signs must be 3 values"):
        fit_logistic(x, y, ("a", "b", "c"), signs=signs)


def test_limits_clip_the_measures_before_the_standardisation_and_round_trip(rng):
    x, y = _data(rng, n=200)
    cal = fit_logistic(x, y, ("a", "b", "c"))
    assert cal.lower is None and cal.upper is None
    assert set(cal.to_dict()) == {"names", "means", "scales", "coefficients", "intercept"}  # stored as before
    limited = Calibration(cal.names, cal.means, cal.scales, cal.coefficients, cal.intercept,
                          lower=np.array([-np.inf, 9.8, -np.inf]), upper=np.array([-2.0, np.inf, np.inf]))
    rows = np.array([[-5.0, 9.0, 1.0], [0.0, 10.5, 2.0], [-2.0, 9.8, 3.0]])
    by_hand = np.column_stack([np.minimum(rows[:, 0], -2.0), np.maximum(rows[:, 1], 9.8), rows[:, 2]])
    np.testing.assert_array_equal(limited.decision(rows), cal.decision(by_hand))
    data = json.loads(json.dumps(limited.to_dict()))
    assert data["lower"] == [None, 9.8, None] and data["upper"] == [-2.0, None, None]  # JSON has no infinity
    back = Calibration.from_dict(data)
    np.testing.assert_array_equal(back.decision(rows), limited.decision(rows))
    # a stored form without limits (every file written before them) scores as the fit does
    old = {k: v for k, v in cal.to_dict().items()}
    np.testing.assert_array_equal(Calibration.from_dict(old).predict(x), cal.predict(x))
