"""Depth models of the attenuation estimate (private): fits on a per-slice profile.

All fits work in log space on the measured foreground signal ``s(z)``:

* exponential: weighted least squares of ``ln s = a - z / l`` (Beer-Lambert),
  weights ``(s / sem)**2`` (the inverse variance of ``ln s``), covariance
  scaled by the residual variance as :func:`scipy.optimize.curve_fit` does
  with ``absolute_sigma=False``;
* smooth: a local linear regression of ``ln s`` with a Gaussian depth kernel
  (a LOWESS without robustness passes);
* quantile: per-slice quantiles mapped onto the reference slice's quantiles.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Number of quantile levels kept per slice by the quantile model.
N_QUANTILES = 1025


@dataclass(frozen=True)
class ExponentialFit:
    """Log-linear weighted fit ``ln s = intercept - rate * z``."""

    intercept: float
    rate: float
    rate_se: float
    r_squared: float
    n_used: int
    dof: int


def valid_points(signal: np.ndarray, sem: np.ndarray) -> np.ndarray:
    """Slices whose signal can enter a log fit (positive, finite, known error)."""
    with np.errstate(invalid="ignore"):
        return np.isfinite(signal) & (signal > 0) & np.isfinite(sem) & (sem >= 0)


def log_weights(signal: np.ndarray, sem: np.ndarray) -> np.ndarray:
    """Inverse variance of ``ln s``: ``(s / sem)**2``, capped so no slice has sem 0."""
    ok = valid_points(signal, sem)
    rel = np.full(signal.shape, np.inf)
    rel[ok] = sem[ok] / signal[ok]
    floor = 1e-6
    rel = np.maximum(rel, floor)
    weights = np.where(ok, 1.0 / rel**2, 0.0)
    return weights


def fit_exponential(depth: np.ndarray, signal: np.ndarray, sem: np.ndarray) -> ExponentialFit:
    """Weighted least squares of ``ln(signal)`` on *depth* (closed form)."""
    weights = log_weights(signal, sem)
    ok = weights > 0
    n_used = int(ok.sum())
    if n_used < 2:
        return ExponentialFit(math.nan, math.nan, math.nan, math.nan, n_used, 0)
    z = depth[ok]
    y = np.log(signal[ok])
    w = weights[ok]
    sw = w.sum()
    zbar = (w * z).sum() / sw
    ybar = (w * y).sum() / sw
    szz = (w * (z - zbar) ** 2).sum()
    if szz <= 0:
        return ExponentialFit(math.nan, math.nan, math.nan, math.nan, n_used, 0)
    slope = (w * (z - zbar) * (y - ybar)).sum() / szz
    intercept = ybar - slope * zbar
    resid = y - (intercept + slope * z)
    rss = float((w * resid**2).sum())
    tss = float((w * (y - ybar) ** 2).sum())
    dof = n_used - 2
    if dof > 0:
        rate_se = math.sqrt(rss / dof / szz)
    else:
        rate_se = math.inf
    r_squared = 1.0 - rss / tss if tss > 0 else (1.0 if rss == 0 else 0.0)
    return ExponentialFit(float(intercept), float(-slope), rate_se, float(r_squared), n_used, dof)


def length_from_rate(rate: float) -> float:
    """1/e length from a decay rate per um: inf when the signal does not decay."""
    if not math.isfinite(rate) or rate <= 0:
        return math.inf
    return 1.0 / rate


def length_interval(fit: ExponentialFit, level: float = 0.95) -> tuple[float, float]:
    """Interval on the length from the t-interval on the rate (student's t, n-2 dof)."""
    if fit.dof <= 0 or not math.isfinite(fit.rate_se) or not math.isfinite(fit.rate):
        return (0.0, math.inf)
    from scipy.stats import t as student_t

    half = float(student_t.ppf(0.5 + level / 2, fit.dof)) * fit.rate_se
    low_rate, high_rate = fit.rate - half, fit.rate + half
    return (length_from_rate(high_rate), length_from_rate(low_rate))


def smooth_log_profile(
    depth: np.ndarray, signal: np.ndarray, sem: np.ndarray, *, bandwidth: float
) -> np.ndarray:
    """Smoothing of ``ln s``: local linear fits with a Gaussian kernel of sd *bandwidth*.

    A LOWESS without robustness passes: a genuine feature at the ends of the
    stack (a rise below the tissue surface) must be followed, not treated as
    an outlier. Precision weights are capped at 100 times their median so
    that a few very bright slices do not pin the curve. Evaluated at every depth.
    """
    weights = log_weights(signal, sem)
    ok = weights > 0
    z = depth[ok]
    y = np.log(signal[ok])
    w = np.minimum(weights[ok], 100.0 * np.median(weights[ok]))
    return _local_linear(z, y, w, depth, bandwidth)


def _local_linear(z: np.ndarray, y: np.ndarray, w: np.ndarray, at: np.ndarray,
                  bandwidth: float) -> np.ndarray:
    """Kernel-weighted local linear regression of y(z), evaluated at *at*."""
    out = np.empty(at.shape, dtype=np.float64)
    for i, z0 in enumerate(at):
        k = w * np.exp(-0.5 * ((z - z0) / bandwidth) ** 2)
        sk = k.sum()
        if not sk > 0:
            out[i] = np.nan
            continue
        zbar = (k * z).sum() / sk
        ybar = (k * y).sum() / sk
        szz = (k * (z - zbar) ** 2).sum()
        slope = (k * (z - zbar) * (y - ybar)).sum() / szz if szz > 1e-12 * sk else 0.0
        out[i] = ybar + slope * (z0 - zbar)
    return out


def estimate_offset(background: np.ndarray, model: np.ndarray, floor: float) -> float:
    """Detector offset from the per-slice background and the depth model.

    The background of a slice is taken as ``offset + b * model(z) / model(0)``
    (haze that fades like the signal over a constant offset) and fitted by
    linear least squares. When that cannot separate the two (no decay,
    negative haze), the lowest slice background is used. The result is kept
    between *floor* (the smallest sampled value) and the lowest background.
    """
    ok = np.isfinite(background) & np.isfinite(model)
    lowest = float(np.min(background[ok])) if ok.any() else math.nan
    if ok.sum() < 3 or not math.isfinite(lowest):
        return lowest
    shape = model[ok] / model[ok][0]
    if float(np.ptp(shape)) < 0.05:
        return lowest
    design = np.column_stack([np.ones(shape.size), shape])
    (offset, haze), *_ = np.linalg.lstsq(design, background[ok], rcond=None)
    if not (math.isfinite(offset) and haze >= 0):
        return lowest
    return float(min(max(offset, floor), lowest))


def quantile_maps(sample: np.ndarray, reference: int) -> tuple[np.ndarray, np.ndarray]:
    """Per-slice quantiles (n_slices, N_QUANTILES) and the reference slice's quantiles."""
    levels = np.linspace(0.0, 1.0, N_QUANTILES)
    if np.isnan(sample).any():
        source = np.nanquantile(sample, levels, axis=1).T
    else:
        source = np.quantile(sample, levels, axis=1).T
    return np.ascontiguousarray(source, dtype=np.float64), source[reference].astype(np.float64)


def slice_lookup(source: np.ndarray, reference: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Strictly increasing lookup ``x -> y`` for one slice (ties mapped to their mid level)."""
    levels = np.linspace(0.0, 1.0, source.size)
    values, inverse = np.unique(source, return_inverse=True)
    mid = np.bincount(inverse, weights=levels) / np.bincount(inverse)
    return values, np.interp(mid, levels, reference)


def equivalent_gain(source: np.ndarray, reference: np.ndarray, offset: float) -> np.ndarray:
    """Ratio of the reference's mean above *offset* to each slice's (display only)."""
    ref_mean = float(np.mean(reference)) - offset
    with np.errstate(divide="ignore", invalid="ignore"):
        gain = ref_mean / (source.mean(axis=1) - offset)
    return np.where(np.isfinite(gain) & (gain > 0), gain, np.nan)
