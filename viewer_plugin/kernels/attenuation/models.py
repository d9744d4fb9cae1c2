"""Depth models of the attenuation estimate (private), built on the shared primitives.

All models work on the measured foreground signal ``s(z)``:

* exponential: the weighted log-linear fit ``ln s = a - z / l`` of
  :func:`..primitives.fitting.fit_log_profile` (Beer-Lambert), its 1/e
  length and the Student-t interval on it;
* smooth: a local linear regression of ``ln s`` with a Gaussian depth kernel
  (a LOWESS without robustness passes), each local fit by
  :func:`..primitives.fitting.fit_line`;
* quantile: per-slice quantiles mapped onto the reference slice's
  quantiles (histogram specification, :mod:`..primitives.matching`).
"""

from __future__ import annotations

import math

import numpy as np

from ..primitives.fitting import LineFit, decay_length_interval, fit_line, log_profile_weights
from ..primitives.foreground import Foreground
from ..primitives.matching import quantile_cdf, quantile_levels, row_quantiles, specification_lookup

#: Number of quantile levels kept per slice by the quantile model.
N_QUANTILES = 1025


def length_interval(fit: LineFit, level: float = 0.95) -> tuple[float, float]:
    """Interval on the 1/e length from the t-interval on the slope of ``ln s`` (n - 2 dof)."""
    return decay_length_interval(fit.slope_interval(level))


def smooth_log_profile(
    depth: np.ndarray, signal: np.ndarray, sem: np.ndarray, *, bandwidth: float
) -> np.ndarray:
    """Smoothing of ``ln s``: local linear fits with a Gaussian kernel of sd *bandwidth*.

    A LOWESS without robustness passes: a genuine feature at the ends of the
    stack (a rise below the tissue surface) must be followed, not treated as
    an outlier. Precision weights are capped at 100 times their median so
    that a few very bright slices do not pin the curve. Evaluated at every depth.
    """
    weights = log_profile_weights(signal, sem)
    ok = weights > 0
    z = depth[ok]
    y = np.log(signal[ok])
    w = np.minimum(weights[ok], 100.0 * np.median(weights[ok]))
    out = np.empty(depth.shape, dtype=np.float64)
    for i, z0 in enumerate(depth):
        local = fit_line(z, y, w * np.exp(-0.5 * ((z - z0) / bandwidth) ** 2))
        slope = local.slope if math.isfinite(local.slope) else 0.0
        out[i] = local.y_mean + slope * (z0 - local.x_mean)
    return out


def smooth_gain(depth: np.ndarray, fg: Foreground, *, bandwidth: float) -> tuple[np.ndarray, np.ndarray]:
    """Gains bringing the smoothed profile to its first slice's level, and the smoothed curve."""
    log_model = smooth_log_profile(depth, fg.signal, fg.sem, bandwidth=bandwidth)
    gain = np.exp(log_model[0] - log_model)
    return np.where(np.isfinite(gain), gain, 1.0), np.exp(log_model)


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
    fit = fit_line(shape, background[ok])
    offset, haze = fit.intercept, fit.slope
    if not (math.isfinite(offset) and haze >= 0):
        return lowest
    return float(min(max(offset, floor), lowest))


def quantile_maps(sample: np.ndarray, reference: int) -> tuple[np.ndarray, np.ndarray]:
    """Per-slice quantiles (n_slices, N_QUANTILES) and the reference slice's quantiles."""
    source = row_quantiles(sample, N_QUANTILES)
    return source, source[reference].copy()


def slice_lookup(source: np.ndarray, reference: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lookup ``x -> y`` taking one slice's quantiles onto the reference's."""
    return specification_lookup(quantile_cdf(source), (reference, quantile_levels(reference.size)))


def equivalent_gain(source: np.ndarray, reference: np.ndarray, offset: float) -> np.ndarray:
    """Ratio of the reference's mean above *offset* to each slice's (display only)."""
    ref_mean = float(np.mean(reference)) - offset
    with np.errstate(divide="ignore", invalid="ignore"):
        gain = ref_mean / (source.mean(axis=1) - offset)
    return np.where(np.isfinite(gain) & (gain > 0), gain, np.nan)


__all__ = [
    "N_QUANTILES",
    "equivalent_gain",
    "estimate_offset",
    "length_interval",
    "quantile_maps",
    "slice_lookup",
    "smooth_gain",
    "smooth_log_profile",
]
