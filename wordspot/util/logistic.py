"""Logistic regression with an L2 penalty, fitted on standardised inputs, and its stored form.

The model: P(y = 1 | x) = 1 / (1 + exp(-(b + sum_k w_k z_k))), with ``z_k = (x_k - m_k) / s_k``
the inputs standardised by their training means ``m`` and standard deviations ``s``.
:func:`fit_logistic` minimises the penalised negative log-likelihood

    L(w, b) = sum_i [log(1 + exp(t_i)) - y_i t_i] + penalty / 2 * ||w||^2,   t_i = b + z_i . w

(the intercept ``b`` is not penalised) with scipy's Newton-CG, given the analytic
gradient and Hessian. It is the objective of scikit-learn's ``LogisticRegression`` with
``C = 1 / penalty``. The penalty keeps the coefficients finite on separable data.

With ``signs`` some weights may only be >= 0 (sign +1) or <= 0 (sign -1): the same
objective minimised under those bounds (scipy's L-BFGS-B, then Newton-CG again on the
weights off their bounds, for the same precision as the free fit). The optimum then meets
the Karush-Kuhn-Tucker conditions: a weight strictly inside its bound has a zero
gradient, a weight held at 0 has a gradient pointing out of its allowed side.

:class:`Calibration` is the fitted result: it names its inputs, may clip them to limits
set after the fit (:mod:`wordspot.evaluation.calibrate` caps a measure there), predicts probabilities
with numpy alone (scipy is imported only to fit), and turns into plain JSON data and back.
Errors are ``ValueError`` (callers add the file or option they concern).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["DEFAULT_PENALTY", "Calibration", "fit_logistic", "sigmoid"]

#: L2 penalty on the standardised coefficients (scikit-learn's C = 1): small beside the
#: hundreds of examples a calibration is fitted on.
DEFAULT_PENALTY = 1.0


def sigmoid(t) -> np.ndarray:
    """1 / (1 + exp(-t)) without overflow for large |t|."""
    t = np.asarray(t, dtype=np.float64)
    e = np.exp(-np.abs(t))
    return np.where(t >= 0, 1.0 / (1.0 + e), e / (1.0 + e))


@dataclass(frozen=True)
class Calibration:
    """A fitted logistic regression over named measures.

    Attributes
    ----------
    names : tuple of str
        The measures, in the order of the columns of ``X``.
    means, scales : ndarray, shape (k,)
        Standardisation: column ``j`` is used as ``(X[:, j] - means[j]) / scales[j]``.
    coefficients : ndarray, shape (k,)
        Weights of the standardised measures.
    intercept : float
    lower, upper : ndarray, shape (k,), or None
        Each measure is clipped to ``[lower[j], upper[j]]`` before the standardisation
        (-inf / +inf: no limit on that side; None: no limits at all).
    """

    names: tuple[str, ...]
    means: np.ndarray
    scales: np.ndarray
    coefficients: np.ndarray
    intercept: float
    lower: np.ndarray | None = None
    upper: np.ndarray | None = None

    def __post_init__(self) -> None:
        names = tuple(self.names)
        if not names or not all(isinstance(n, str) and n for n in names) or len(set(names)) != len(names):
            raise ValueError(f"measure names must be distinct non-empty strings, got {list(self.names)!r}")
        object.__setattr__(self, "names", names)
        for field_name in ("means", "scales", "coefficients"):
            a = np.asarray(getattr(self, field_name), dtype=np.float64)
            if a.shape != (len(names),) or not np.isfinite(a).all():
                raise ValueError(f"{field_name} must be {len(names)} finite numbers, got {getattr(self, field_name)!r}")
            object.__setattr__(self, field_name, a)
        if not (self.scales > 0).all():
            raise ValueError(f"scales must be > 0, got {self.scales.tolist()}")
        if isinstance(self.intercept, bool) or not isinstance(self.intercept, (int, float)) \
                or not math.isfinite(self.intercept):
            raise ValueError(f"intercept must be a finite number, got {self.intercept!r}")
        object.__setattr__(self, "intercept", float(self.intercept))
        for field_name, unbounded in (("lower", -np.inf), ("upper", np.inf)):
            value = getattr(self, field_name)
            if value is None:
                continue
            a = np.asarray(value, dtype=np.float64)
            if a.shape != (len(names),) or np.isnan(a).any() or (a == -unbounded).any():
                raise ValueError(f"{field_name} must be {len(names)} numbers (or {unbounded:g} for no limit), "
                                 f"got {value!r}")
            object.__setattr__(self, field_name, a)
        if self.lower is not None and self.upper is not None and (self.lower > self.upper).any():
            raise ValueError(f"lower limits above upper ones: {self.lower.tolist()} > {self.upper.tolist()}")

    def decision(self, X) -> np.ndarray:
        """The log-odds ``b + z . w`` of each row of ``X`` (shape (n, k), or (k,) for one row)."""
        x = np.asarray(X, dtype=np.float64)
        if x.shape[-1:] != (len(self.names),) or x.ndim > 2:
            raise ValueError(f"expected rows of {len(self.names)} measures ({', '.join(self.names)}), got shape {x.shape}")
        if self.lower is not None or self.upper is not None:
            x = np.clip(x, self.lower if self.lower is not None else -np.inf,
                        self.upper if self.upper is not None else np.inf)
        return self.intercept + ((x - self.means) / self.scales) @ self.coefficients

    def predict(self, X) -> np.ndarray:
        """P(y = 1) of each row of ``X``; a float array of shape (n,) (or a 0-d array for one row)."""
        return sigmoid(self.decision(X))

    def to_dict(self) -> dict:
        """Plain JSON data: names, means, scales, coefficients, intercept, and the limits
        (``lower`` / ``upper``, null where a side is open) only when there are any."""
        out = {
            "names": list(self.names),
            "means": self.means.tolist(),
            "scales": self.scales.tolist(),
            "coefficients": self.coefficients.tolist(),
            "intercept": self.intercept,
        }
        for key in ("lower", "upper"):
            a = getattr(self, key)
            if a is not None and np.isfinite(a).any():
                out[key] = [float(v) if np.isfinite(v) else None for v in a]
        return out

    @classmethod
    def from_dict(cls, data) -> "Calibration":
        """The inverse of :meth:`to_dict`; ``ValueError`` on anything malformed."""
        keys = ("names", "means", "scales", "coefficients", "intercept")
        if not isinstance(data, dict) or not set(keys) <= set(data) <= set(keys) | {"lower", "upper"}:
            found = sorted(data) if isinstance(data, dict) else type(data).__name__
            raise ValueError(f"expected the keys {', '.join(keys)} (and optionally lower, upper), found {found}")
        limits = {}
        for key, open_side in (("lower", -np.inf), ("upper", np.inf)):
            if key in data:
                value = data[key]
                if not isinstance(value, list) or not all(
                        v is None or (isinstance(v, (int, float)) and not isinstance(v, bool)) for v in value):
                    raise ValueError(f"{key} must be a list of numbers or nulls, got {value!r}")
                limits[key] = np.array([open_side if v is None else v for v in value], dtype=np.float64)
        lists = {}
        for key in keys[:4]:
            value = data[key]
            if not isinstance(value, list):
                raise ValueError(f"{key} must be a list, got {type(value).__name__}")
            if key != "names" and not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
                raise ValueError(f"{key} must hold numbers, got {value!r}")
            lists[key] = value
        return cls(tuple(lists["names"]), np.array(lists["means"], dtype=np.float64),
                   np.array(lists["scales"], dtype=np.float64),
                   np.array(lists["coefficients"], dtype=np.float64), data["intercept"], **limits)


def _design(z: np.ndarray) -> np.ndarray:
    return np.hstack([z, np.ones((z.shape[0], 1))])


def fit_logistic(X, y, names, *, penalty: float = DEFAULT_PENALTY, tol: float = 1e-10,
                 signs=None) -> Calibration:
    """Fit P(y = 1 | x) by penalised maximum likelihood (see the module docstring).

    Parameters
    ----------
    X : array_like, shape (n, k)
        Finite measures, one row per example.
    y : array_like of 0 / 1 (or bool), shape (n,)
        Both classes must occur.
    names : sequence of str, length k
    penalty : float > 0
        L2 weight on the standardised coefficients (scikit-learn's ``C = 1 / penalty``).
    tol : float
        Newton-CG's tolerance on the step (``xtol``).
    signs : sequence of -1, 0, +1, length k, or None
        Per measure, the only sign its weight may take (+1: >= 0, -1: <= 0, 0: any).
        None or all 0: the free fit.

    Returns
    -------
    Calibration

    Raises
    ------
    ValueError
        Shapes disagree, values are not finite, a label is not 0 / 1, one class is absent,
        a sign is not -1, 0 or +1, or the optimiser did not converge.
    """
    from scipy.optimize import minimize

    x = np.asarray(X, dtype=np.float64)
    labels = np.asarray(y)
    names = tuple(names)
    if x.ndim != 2 or x.shape[1] != len(names) or labels.shape != (x.shape[0],):
        raise ValueError(f"X must be (n, {len(names)}) and y (n,), got {x.shape} and {labels.shape}")
    if not np.isfinite(x).all():
        raise ValueError("X holds NaN or infinite values")
    if not np.isin(labels, (0, 1)).all():
        raise ValueError("y must hold only 0 and 1")
    labels = labels.astype(np.float64)
    if labels.min() == labels.max():
        raise ValueError(f"y holds only the class {int(labels[0])}; both classes are needed")
    if not (isinstance(penalty, (int, float)) and penalty > 0 and math.isfinite(penalty)):
        raise ValueError(f"penalty must be a finite number > 0, got {penalty!r}")
    means = x.mean(axis=0)
    scales = x.std(axis=0)
    scales[scales == 0] = 1.0  # a constant column: its standardised values are all 0
    a = _design((x - means) / scales)
    ridge = np.full(a.shape[1], float(penalty))
    ridge[-1] = 0.0  # the intercept is not penalised

    bound = _signs(signs, len(names))

    def loss(theta):
        t = a @ theta
        # log(1 + exp(t)) = logaddexp(0, t), stable for any t
        return float(np.sum(np.logaddexp(0.0, t) - labels * t) + 0.5 * np.dot(ridge * theta, theta))

    def gradient(theta):
        return a.T @ (sigmoid(a @ theta) - labels) + ridge * theta

    def hessian(theta):
        p = sigmoid(a @ theta)
        return (a * (p * (1.0 - p))[:, None]).T @ a + np.diag(ridge)

    limit = 1e-6 * max(1.0, labels.size)
    if not bound.any():
        out = minimize(loss, np.zeros(a.shape[1]), jac=gradient, hess=hessian, method="Newton-CG",
                       options={"xtol": tol, "maxiter": 200})
        theta, message = out.x, out.message
        # The penalised loss is strictly convex, so a point where the gradient vanishes is the
        # optimum: Newton-CG may stop there with "precision loss" (its line search cannot
        # improve on rounding), which is a success for us; the gradient decides.
        at_optimum = np.isfinite(theta).all() and np.max(np.abs(gradient(theta))) <= limit
    else:
        theta, message = _bounded(loss, gradient, hessian, np.append(bound, 0), tol)
        at_optimum = np.isfinite(theta).all() and np.max(np.abs(_projected(gradient(theta), theta,
                                                                           np.append(bound, 0)))) <= limit
    if not at_optimum:
        raise ValueError(f"the logistic regression did not converge ({message})")
    return Calibration(names, means, scales, theta[:-1].copy(), float(theta[-1]))


def _signs(signs, k: int) -> np.ndarray:
    """``signs`` as an int array of length ``k`` (zeros for None); ``ValueError`` if malformed."""
    if signs is None:
        return np.zeros(k, dtype=np.int64)
    values = list(signs)
    if len(values) != k or not all(not isinstance(v, bool) and v in (-1, 0, 1) for v in values):
        raise ValueError(f"signs must be {k} values of -1, 0 or +1, got {values!r}")
    return np.array(values, dtype=np.int64)


def _projected(g: np.ndarray, theta: np.ndarray, bound: np.ndarray) -> np.ndarray:
    """The gradient ``g`` with the parts removed that push a weight held at 0 out of its
    allowed side (those are the Karush-Kuhn-Tucker multipliers of the bounds, not a lack of
    convergence)."""
    held = (bound != 0) & (theta == 0.0)
    return np.where(held & (bound * g >= 0), 0.0, g)


def _bounded(loss, gradient, hessian, bound: np.ndarray, tol: float):
    """The minimum of the convex ``loss`` with ``theta[j] * bound[j] >= 0``, and a message.

    L-BFGS-B finds which weights sit on their bound; Newton-CG then minimises over the
    others with those held at exactly 0 (the optimum of a strictly convex function on
    that face is unique), kept when it stays on the allowed side.
    """
    from scipy.optimize import minimize

    bounds = [(0.0, None) if b > 0 else (None, 0.0) if b < 0 else (None, None) for b in bound]
    out = minimize(loss, np.zeros(bound.size), jac=gradient, method="L-BFGS-B", bounds=bounds,
                   options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 15000, "maxcor": 30})
    near = (bound != 0) & (bound * out.x <= 1e-7 * (1.0 + np.abs(out.x).max()))
    theta = np.where(near, 0.0, out.x)
    held = near & (bound * gradient(theta) >= 0)
    free = ~held

    def on_face(f):
        full = np.zeros(bound.size)
        full[free] = f
        return full

    polish = minimize(lambda f: loss(on_face(f)), theta[free], jac=lambda f: gradient(on_face(f))[free],
                      hess=lambda f: hessian(on_face(f))[np.ix_(free, free)], method="Newton-CG",
                      options={"xtol": tol, "maxiter": 200})
    better = on_face(polish.x)
    if np.isfinite(better).all() and np.all(bound * better >= 0) and loss(better) <= loss(theta) + 1e-9:
        return better, polish.message
    return theta, out.message
