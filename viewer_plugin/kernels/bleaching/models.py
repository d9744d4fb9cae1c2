"""Decay models of the bleaching kernels and the choice between them.

Models of the foreground signal ``y[t]`` (background already subtracted) over
the frame index ``t = 0 .. N-1``, with ``lam = -ln(1 - k)`` for a per-frame
rate ``k``:

``single``          y = A exp(-lam t)                      (first-order bleaching)
``single+plateau``  y = A exp(-lam t) + C                  (a part that does not fade)
``double``          y = A1 exp(-lam1 t) + A2 exp(-lam2 t)  (two populations)

A richer model is kept only when it fits significantly better than the single
exponential by the extra-sum-of-squares F-test (p < 0.01). Berglund (2004)
shows why bleaching is not always mono-exponential (non-uniform illumination
gives a sum of exponentials). The F-test assumes that the frames scatter
independently around the model; with correlated frame noise it admits the
richer model more often than its nominal 1 %, which every model-choice text
says.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize, stats

from ..primitives.fitting import t_interval
from .text import F_TEST_ASSUMPTION

__all__ = ["ModelFit", "fit_models", "select_model", "effective_rate", "half_life_frames"]

#: Significance level of the F-test that admits a richer model.
F_TEST_ALPHA = 0.01
_MAX_LAM = 50.0


@dataclass(frozen=True)
class ModelFit:
    """One fitted decay model (parameters in the profile's units)."""

    name: str
    params: np.ndarray
    cov: np.ndarray
    rss: float
    function: Callable[[np.ndarray, np.ndarray], np.ndarray]

    @property
    def n_params(self) -> int:
        return int(self.params.size)

    def predict(self, t: np.ndarray) -> np.ndarray:
        return self.function(np.asarray(t, dtype=np.float64), self.params)


def _single(t: np.ndarray, p: np.ndarray) -> np.ndarray:
    return p[0] * np.exp(-p[1] * t)


def _plateau(t: np.ndarray, p: np.ndarray) -> np.ndarray:
    return p[0] * np.exp(-p[1] * t) + p[2]


def _double(t: np.ndarray, p: np.ndarray) -> np.ndarray:
    return p[0] * np.exp(-p[1] * t) + p[2] * np.exp(-(p[1] + p[3]) * t)


def _covariance(jac: np.ndarray, rss: float, n: int) -> np.ndarray:
    """Parameter covariance from the Jacobian, as scipy.optimize.curve_fit does."""
    p = jac.shape[1]
    dof = n - p
    if dof <= 0:
        return np.full((p, p), np.nan)
    _, s, vt = np.linalg.svd(jac, full_matrices=False)
    threshold = np.finfo(float).eps * max(jac.shape) * (s[0] if s.size else 0.0)
    s = s[s > threshold]
    vt = vt[: s.size]
    cov = (vt.T / s**2) @ vt
    return cov * (rss / dof)


def _least_squares(function, start, t, y, *, bounds=None) -> ModelFit | None:
    def residual(p: np.ndarray) -> np.ndarray:
        return function(t, p) - y

    try:
        if bounds is None:
            result = optimize.least_squares(residual, start, method="lm")
        else:
            start = np.clip(start, bounds[0], bounds[1])
            result = optimize.least_squares(residual, start, bounds=bounds, method="trf")
    except (ValueError, np.linalg.LinAlgError):
        return None
    if not np.all(np.isfinite(result.x)):
        return None
    rss = float(np.sum(result.fun**2))
    return ModelFit("", result.x, _covariance(result.jac, rss, y.size), rss, function)


def _log_linear_start(t: np.ndarray, y: np.ndarray) -> np.ndarray:
    positive = y > 0
    if np.count_nonzero(positive) >= 2 and np.ptp(t[positive]) > 0:
        slope, intercept = np.polyfit(t[positive], np.log(y[positive]), 1)
        return np.array([math.exp(intercept), -slope])
    return np.array([float(y[0]) if y[0] != 0 else 1.0, 0.0])


def _best(candidates: list[ModelFit | None], name: str) -> ModelFit | None:
    valid = [c for c in candidates if c is not None and math.isfinite(c.rss)]
    if not valid:
        return None
    best = min(valid, key=lambda c: c.rss)
    return ModelFit(name, best.params, best.cov, best.rss, best.function)


def fit_models(t: np.ndarray, y: np.ndarray) -> dict[str, ModelFit]:
    """Fit the models that *y* has enough points for (profile scaled to ~1 inside)."""
    t = np.asarray(t, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    scale = float(np.max(np.abs(y))) or 1.0
    ys = y / scale
    fits: dict[str, ModelFit] = {}
    start = _log_linear_start(t, ys)
    single = _best([_least_squares(_single, start, t, ys),
                    _least_squares(_single, np.array([ys[0], 0.0]), t, ys)], "single")
    if single is None:
        return fits
    fits["single"] = single
    a, lam = float(single.params[0]), max(float(single.params[1]), 1e-6)
    n = y.size
    inf = np.inf
    if n >= 5:
        bounds = (np.array([0.0, 0.0, -inf]), np.array([inf, _MAX_LAM, inf]))
        starts = [np.array([abs(a) * f, lam / f, abs(a) * (1 - f)]) for f in (0.9, 0.5, 0.2)]
        plateau = _best([_least_squares(_plateau, s, t, ys, bounds=bounds) for s in starts],
                        "single+plateau")
        if plateau is not None:
            fits["single+plateau"] = plateau
    if n >= 6:
        bounds = (np.zeros(4), np.array([inf, _MAX_LAM, inf, _MAX_LAM]))
        starts = [np.array([abs(a) * f, lam / 3, abs(a) * (1 - f), lam * 3]) for f in (0.8, 0.5, 0.2)]
        double = _best([_least_squares(_double, s, t, ys, bounds=bounds) for s in starts], "double")
        if double is not None:
            fits["double"] = double
    return {name: _rescale(fit, scale) for name, fit in fits.items()}


def _rescale(fit: ModelFit, scale: float) -> ModelFit:
    """Undo the profile scaling: amplitudes and the plateau carry the data's units."""
    factor = np.ones(fit.n_params)
    amplitude_slots = {"single": [0], "single+plateau": [0, 2], "double": [0, 2]}[fit.name]
    factor[amplitude_slots] = scale
    params = fit.params * factor
    cov = fit.cov * np.outer(factor, factor)
    return ModelFit(fit.name, params, cov, fit.rss * scale**2, fit.function)


def f_test_p(simple: ModelFit, rich: ModelFit, n: int) -> float:
    """p-value of the extra-sum-of-squares F-test of *rich* against nested *simple*."""
    extra = rich.n_params - simple.n_params
    dof = n - rich.n_params
    if dof < 2 or extra <= 0:
        return 1.0
    if rich.rss >= simple.rss:
        return 1.0
    if rich.rss <= 0:
        return 0.0
    f_value = ((simple.rss - rich.rss) / extra) / (rich.rss / dof)
    return float(stats.f.sf(f_value, extra, dof))


def select_model(fits: dict[str, ModelFit], n: int) -> tuple[ModelFit, str]:
    """The single model unless a richer one is significantly better; and why (with the
    F-test's assumption of independent frames)."""
    single = fits["single"]
    best, best_p = single, 1.0
    for name in ("single+plateau", "double"):
        if name not in fits:
            continue
        p = f_test_p(single, fits[name], n)
        if p < F_TEST_ALPHA and (best is single or fits[name].rss < best.rss):
            best, best_p = fits[name], p
    if best is single:
        tried = [name for name in ("single+plateau", "double") if name in fits]
        if not tried:
            return single, "single exponential (too few frames to test richer models)"
        return single, ("single exponential (no richer model fitted significantly better, F-test "
                        f"p >= 0.01; {F_TEST_ASSUMPTION})")
    what = {"double": "two exponential components", "single+plateau": "an exponential and a "
            "part that does not fade"}[best.name]
    return best, (f"{best.name}: {what}, chosen because it fitted better than a single "
                  f"exponential by the F-test (p = {best_p:.2g}); {F_TEST_ASSUMPTION}")


def effective_rate(fit: ModelFit, n: int) -> float:
    """Per-frame rate k that loses, compounded, what the model loses over the series.

    Equal to ``1 - exp(-lam)`` for the single model; for the richer models the
    average loss per frame between the first and the last frame.
    """
    if fit.name == "single" or n < 2:
        return float(-math.expm1(-fit.params[1]))
    first, last = fit.predict(np.array([0.0, n - 1.0]))
    if first <= 0:
        return float("nan")
    ratio = max(last / first, 1e-300)
    return float(1.0 - ratio ** (1.0 / (n - 1)))


def rate_interval(fit: ModelFit, n: int, *, n_points: int | None = None,
                  level: float = 0.95) -> tuple[float, float]:
    """Confidence interval of :func:`effective_rate` over *n* frames (delta method, Student t
    with ``n_points - n_params`` degrees of freedom; *n_points* frames were fitted)."""
    dof = (n if n_points is None else n_points) - fit.n_params
    if dof <= 0 or not np.all(np.isfinite(fit.cov)):
        return (float("nan"), float("nan"))
    rate = effective_rate(fit, n)
    grad = np.zeros(fit.n_params)
    for j in range(fit.n_params):
        h = 1e-6 * max(1.0, abs(float(fit.params[j])))
        shifted = fit.params.copy()
        shifted[j] += h
        moved = ModelFit(fit.name, shifted, fit.cov, fit.rss, fit.function)
        grad[j] = (effective_rate(moved, n) - rate) / h
    variance = float(grad @ fit.cov @ grad)
    if not math.isfinite(variance) or variance < 0:
        return (float("nan"), float("nan"))
    low, high = t_interval(rate, math.sqrt(variance), dof, level)
    return (low, min(high, 1.0))


def half_life_frames(fit: ModelFit) -> float:
    """Frames until the model falls to half of its first value (inf if never; >= 0)."""
    if fit.name == "single":
        lam = float(fit.params[1])
        return math.log(2.0) / lam if lam > 0 else math.inf
    first = float(fit.predict(np.array([0.0]))[0])
    if first <= 0:
        return math.inf
    p = fit.params
    if fit.name == "single+plateau":
        limit = float(p[2]) if p[1] > 0 else first
    else:
        limit = (float(p[0]) if p[1] <= 0 else 0.0) + (float(p[2]) if p[1] + p[3] <= 0 else 0.0)
    if limit >= first / 2:
        return math.inf

    def excess(t: float) -> float:
        return float(fit.predict(np.array([t]))[0]) - first / 2

    high = 1.0
    while excess(high) > 0:
        high *= 2.0
        if high > 1e12:
            return math.inf
    return float(optimize.brentq(excess, 0.0, high))
