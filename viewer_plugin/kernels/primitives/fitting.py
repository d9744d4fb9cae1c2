"""Straight-line least squares: weighted fits with and without intercept, t-intervals, r².

What it is:

* :func:`fit_line` -- ``y = a + b x`` by weighted least squares (closed
  form). The standard error of the slope is scaled by the residual variance,
  ``sqrt(rss / (n - 2) / Sxx)``: with equal weights that of
  :func:`scipy.stats.linregress`, with weights ``1 / sigma**2`` that of
  :func:`scipy.optimize.curve_fit` with ``absolute_sigma=False``;
* :func:`fit_through_origin` -- ``y = b x``, ``n - 1`` degrees of freedom;
* :meth:`LineFit.slope_interval`, :meth:`LineFit.intercept_interval` --
  Student-t intervals of the two coefficients (the intercept's standard error
  as :func:`scipy.stats.linregress` gives it);
* :func:`r_squared` -- centred (total sum of squares about the weighted mean)
  for fits with an intercept, *uncentred* (``sum w y**2``) for fits through
  the origin, where the centred form can be negative and is meaningless;
* :func:`t_interval` -- ``estimate -/+ t(level, dof) * se`` (Student's t);
* :func:`fit_log_profile` -- ``ln s`` against depth for a profile with
  standard errors, weights ``(s / sem)**2`` (the inverse variance of
  ``ln s``), and :func:`decay_length` / :func:`decay_length_interval` for the
  1/e length ``-1 / slope`` of such a fit (Beer-Lambert);
* :data:`POOR_FIT` -- the one r² below which a report calls a fit poor.

Where it is used: the exponential and smooth (local linear) models of the
attenuation estimate, the select-and-fit loop of the per-slice foreground
profile, the log-ratio fit (slope and intercept) and the depth fit of the two-pass
bleaching separation, the r² of the bleaching decay models, and the
poor-fit notes of both features.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

__all__ = [
    "POOR_FIT",
    "LineFit",
    "decay_length",
    "decay_length_interval",
    "fit_line",
    "fit_log_profile",
    "fit_through_origin",
    "log_profile_weights",
    "r_squared",
    "t_interval",
]

#: r² below which a report says the model fits poorly (common practice: a model
#: explaining less than 90 % of the variation is not trusted for its numbers).
POOR_FIT = 0.9

#: Relative floor of ``sem / signal`` in :func:`log_profile_weights` (no slice weighs infinitely).
_MIN_RELATIVE_ERROR = 1e-6


@dataclass(frozen=True)
class LineFit:
    """A fitted straight line ``y = intercept + slope * x`` (NaN where undetermined).

    Attributes
    ----------
    slope, intercept : float
        The line (``intercept`` is 0 for a fit through the origin).
    slope_se : float
        Standard error of the slope from the residual variance (``inf`` with no
        degree of freedom left).
    r_squared : float
        Centred for a fit with intercept, uncentred through the origin.
    n, dof : int
        Points fitted and residual degrees of freedom.
    x_mean, y_mean : float
        Weighted means of the points (the line passes through them when it has an intercept).
    intercept_se : float
        Standard error of the intercept, ``sqrt(rss / (n - 2) * (1 / sum w + x_mean**2 / Sxx))``
        (that of :func:`scipy.stats.linregress`'s ``intercept_stderr`` with equal weights);
        0 for a fit through the origin, whose intercept is fixed.
    """

    slope: float
    intercept: float
    slope_se: float
    r_squared: float
    n: int
    dof: int
    x_mean: float
    y_mean: float
    intercept_se: float = math.nan

    def slope_interval(self, level: float = 0.95) -> tuple[float, float]:
        """Student-t interval of the slope (``(-inf, inf)`` when undetermined)."""
        return t_interval(self.slope, self.slope_se, self.dof, level)

    def intercept_interval(self, level: float = 0.95) -> tuple[float, float]:
        """Student-t interval of the intercept (``(-inf, inf)`` when undetermined)."""
        return t_interval(self.intercept, self.intercept_se, self.dof, level)


def _prepare(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None) -> tuple:
    x = np.asarray(x, dtype=np.float64).ravel()
    y = np.asarray(y, dtype=np.float64).ravel()
    w = np.ones_like(x) if weights is None else np.asarray(weights, dtype=np.float64).ravel()
    return x, y, w


def fit_line(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None = None) -> LineFit:
    """Weighted least-squares line with intercept.

    Parameters
    ----------
    x, y : array_like
        The points (same size).
    weights : array_like, optional
        Non-negative weights (inverse variances); default all 1.

    Returns
    -------
    LineFit
        Slope and intercept NaN when *x* does not vary (or fewer than 2 points).

    Examples
    --------
    >>> fit = fit_line([0.0, 1.0, 2.0, 3.0], [1.0, 3.0, 5.0, 7.0])
    >>> fit.slope, fit.intercept, fit.r_squared
    (2.0, 1.0, 1.0)
    """
    x, y, w = _prepare(x, y, weights)
    n = x.size
    sw = float(w.sum())
    if n < 1 or not sw > 0:
        return LineFit(math.nan, math.nan, math.nan, math.nan, n, 0, math.nan, math.nan)
    x_mean = float(w @ x) / sw
    y_mean = float(w @ y) / sw
    dx = x - x_mean
    sxx = float(w @ dx**2)
    scale = max(1.0, float(np.max(np.abs(x))))
    if n < 2 or not sxx > sw * (1e-12 * scale) ** 2:
        return LineFit(math.nan, math.nan, math.nan, math.nan, n, 0, x_mean, y_mean)
    slope = float(w @ (dx * (y - y_mean))) / sxx
    intercept = y_mean - slope * x_mean
    rss = float(w @ (y - intercept - slope * x) ** 2)
    dof = n - 2
    se = math.sqrt(rss / dof / sxx) if dof > 0 else math.inf
    se_a = math.sqrt(rss / dof * (1.0 / sw + x_mean**2 / sxx)) if dof > 0 else math.inf
    return LineFit(slope, intercept, se, r_squared(y, rss, weights=w), n, dof, x_mean, y_mean,
                   se_a)


def fit_through_origin(x: np.ndarray, y: np.ndarray, weights: np.ndarray | None = None) -> LineFit:
    """Weighted least-squares line through the origin, ``y = slope * x``.

    The r² is uncentred, ``1 - rss / sum(w y**2)``: without an intercept the
    model is compared with ``y = 0``, not with the mean.

    Examples
    --------
    >>> fit = fit_through_origin([1.0, 2.0, 3.0], [2.0, 4.0, 6.0])
    >>> fit.slope, fit.intercept, fit.r_squared, fit.dof
    (2.0, 0.0, 1.0, 2)
    """
    x, y, w = _prepare(x, y, weights)
    n = x.size
    sw = float(w.sum())
    sxx = float(w @ x**2)
    if n < 1 or not sw > 0 or not sxx > 0:
        return LineFit(math.nan, 0.0, math.nan, math.nan, n, 0, math.nan, math.nan)
    slope = float(w @ (x * y)) / sxx
    rss = float(w @ (y - slope * x) ** 2)
    dof = n - 1
    se = math.sqrt(rss / dof / sxx) if dof > 0 else math.inf
    return LineFit(slope, 0.0, se, r_squared(y, rss, weights=w, centred=False), n, dof,
                   float(w @ x) / sw, float(w @ y) / sw, 0.0)


def r_squared(y: np.ndarray, rss: float, *, weights: np.ndarray | None = None,
              centred: bool = True) -> float:
    """Coefficient of determination ``1 - rss / tss`` (NaN when ``tss`` is 0).

    ``tss = sum w (y - ybar_w)**2`` when *centred* (fits with an intercept),
    ``sum w y**2`` otherwise (fits through the origin).

    Examples
    --------
    >>> r_squared(np.array([1.0, 2.0, 3.0]), 0.5)
    0.75
    >>> r_squared(np.array([1.0, 2.0, 3.0]), 0.5, centred=False)
    0.9642857142857143
    """
    y = np.asarray(y, dtype=np.float64)
    w = np.ones_like(y) if weights is None else np.asarray(weights, dtype=np.float64)
    if centred:
        sw = float(w.sum())
        if not sw > 0:
            return math.nan
        y = y - float(w @ y) / sw
    tss = float(w @ y**2)
    return 1.0 - rss / tss if tss > 0 else math.nan


def t_interval(estimate: float, se: float, dof: int, level: float = 0.95) -> tuple[float, float]:
    """Two-sided Student-t interval ``estimate -/+ t * se``; ``(-inf, inf)`` when undetermined.

    Examples
    --------
    >>> low, high = t_interval(1.0, 0.1, 10)
    >>> round(low, 4), round(high, 4)
    (0.7772, 1.2228)
    """
    if dof <= 0 or not (math.isfinite(estimate) and math.isfinite(se)):
        return (-math.inf, math.inf)
    half = float(stats.t.ppf(0.5 + level / 2, dof)) * se
    return (estimate - half, estimate + half)


def log_profile_weights(signal: np.ndarray, sem: np.ndarray) -> np.ndarray:
    """Inverse variance of ``ln s``, ``(s / sem)**2``; 0 where *s* cannot enter a log fit.

    A slice needs a positive, finite signal and a finite standard error; the
    relative error is floored at 1e-6 so that no slice with ``sem`` 0 weighs
    infinitely.
    """
    signal = np.asarray(signal, dtype=np.float64)
    sem = np.asarray(sem, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(signal) & (signal > 0) & np.isfinite(sem) & (sem >= 0)
    rel = np.full(signal.shape, np.inf)
    rel[ok] = sem[ok] / signal[ok]
    rel = np.maximum(rel, _MIN_RELATIVE_ERROR)
    return np.where(ok, 1.0 / rel**2, 0.0)


def fit_log_profile(x: np.ndarray, signal: np.ndarray, sem: np.ndarray) -> LineFit:
    """Weighted line fit of ``ln signal`` on *x* (weights :func:`log_profile_weights`).

    Slices with weight 0 are left out; ``n`` counts the slices used.

    Examples
    --------
    >>> z = np.arange(5.0)
    >>> fit = fit_log_profile(z, 100 * np.exp(-z / 4), np.ones(5))
    >>> round(decay_length(fit.slope), 6)
    4.0
    """
    weights = log_profile_weights(signal, sem)
    ok = weights > 0
    x = np.asarray(x, dtype=np.float64)
    return fit_line(x[ok], np.log(np.asarray(signal, dtype=np.float64)[ok]), weights[ok])


def decay_length(slope: float) -> float:
    """1/e length ``-1 / slope`` of ``ln s = a + slope * x``; ``inf`` unless the signal decays.

    Examples
    --------
    >>> decay_length(-0.02), decay_length(0.01)
    (50.0, inf)
    """
    if not math.isfinite(slope) and slope != -math.inf:
        return math.inf
    return -1.0 / slope if slope < 0 else math.inf


def decay_length_interval(slope_interval: tuple[float, float]) -> tuple[float, float]:
    """The 1/e lengths of the two ends of a slope interval (shorter first; may reach inf).

    Examples
    --------
    >>> decay_length_interval((-0.025, -0.02)), decay_length_interval((-0.02, 0.01))
    ((40.0, 50.0), (50.0, inf))
    """
    low, high = slope_interval
    return (decay_length(low), decay_length(high))
