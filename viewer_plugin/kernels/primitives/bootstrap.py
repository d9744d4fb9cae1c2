"""Bootstrap intervals over resampled units (lateral tiles): percentile and BCa.

What it is: the pieces of a nonparametric bootstrap whose resampling unit is
a block of data rather than a single value, as the block bootstrap for
dependent data does (Künsch 1989): the caller divides its data into units
larger than the correlation length of what it measures (here lateral tiles
of a stack), recomputes its statistic with each unit counted as often as a
resample drew it, and hands the replicates to :func:`bootstrap_interval`.

* :func:`resample_counts` -- how often each unit is drawn in each resample
  (``n`` draws with replacement from ``n`` units: a multinomial count);
* :func:`block_counts` -- the same for an ordered axis (slices along depth):
  how often each position is covered by moving blocks of consecutive
  positions drawn with replacement (the moving-block bootstrap, Künsch 1989);
* :func:`jackknife_counts` -- the ``n`` delete-one-unit weightings;
* :func:`percentile_interval` -- the quantiles of the replicates;
* :func:`bca_interval` -- bias-corrected and accelerated limits (Efron 1987):
  the bias correction ``z0`` from the share of replicates below the
  estimate, the acceleration ``a`` from the skewness of the jackknife
  estimates, limits at the adjusted quantiles of the replicates;
* :func:`bootstrap_interval` -- BCa when it can be formed, the percentile
  interval otherwise, with the method used named in the result.

The formulas follow :func:`scipy.stats.bootstrap` (same quantile
interpolation and jackknife acceleration), which is the reference in the
tests.

Where it is used: the interval of the attenuation length
(:mod:`viewer_plugin.kernels.attenuation.uncertainty`), which resamples
lateral tiles and re-runs the whole foreground selection and fit for every
resample.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr, ndtri

__all__ = [
    "BootstrapInterval",
    "bca_interval",
    "block_counts",
    "bootstrap_interval",
    "jackknife_counts",
    "percentile_interval",
    "resample_counts",
]


@dataclass(frozen=True)
class BootstrapInterval:
    """A bootstrap confidence interval.

    Attributes
    ----------
    low, high : float
        The limits (NaN when fewer than two replicates were finite).
    method : str
        "BCa" or "percentile".
    n_resamples : int
        Replicates drawn; *n_failed* of them gave no finite statistic and were left out.
    n_failed : int
    """

    low: float
    high: float
    method: str
    n_resamples: int
    n_failed: int


def resample_counts(rng: np.random.Generator, n_units: int, n_resamples: int) -> np.ndarray:
    """How often each of *n_units* is drawn in each of *n_resamples* resamples (int64).

    Each row is a multinomial count of ``n_units`` draws with replacement,
    i.e. one ordinary bootstrap resample of the units.

    Examples
    --------
    >>> counts = resample_counts(np.random.default_rng(0), 5, 3)
    >>> counts.shape, counts.sum(axis=1).tolist()
    ((3, 5), [5, 5, 5])
    """
    return rng.multinomial(n_units, np.full(n_units, 1.0 / n_units), size=n_resamples)


def block_counts(rng: np.random.Generator, n: int, length: int, n_resamples: int) -> np.ndarray:
    """Moving-block bootstrap: how often each of *n* ordered positions is drawn (float64).

    Each resample draws ``ceil(n / length)`` blocks of *length* consecutive
    positions, each starting anywhere from 0 to ``n - length``, and counts how
    often every position is covered; the counts are scaled to sum to *n*.
    Correlation within a block is kept (Künsch 1989).

    Examples
    --------
    >>> counts = block_counts(np.random.default_rng(0), 10, 3, 2)
    >>> counts.shape, counts.sum(axis=1).round(6).tolist()
    ((2, 10), [10.0, 10.0])
    """
    length = max(1, min(int(length), n))
    n_blocks = -(-n // length)
    starts = rng.integers(0, n - length + 1, size=(n_resamples, n_blocks))
    counts = np.zeros((n_resamples, n + 1))
    rows = np.repeat(np.arange(n_resamples), n_blocks)
    np.add.at(counts, (rows, starts.ravel()), 1.0)
    np.add.at(counts, (rows, starts.ravel() + length), -1.0)
    counts = np.cumsum(counts, axis=1)[:, :n]
    return counts * (n / counts.sum(axis=1, keepdims=True))


def jackknife_counts(n_units: int) -> np.ndarray:
    """The delete-one-unit weightings: row *i* counts every unit once except unit *i*.

    Examples
    --------
    >>> jackknife_counts(3).tolist()
    [[0, 1, 1], [1, 0, 1], [1, 1, 0]]
    """
    return 1 - np.eye(n_units, dtype=np.int64)


def percentile_interval(replicates: np.ndarray, level: float = 0.95) -> tuple[float, float]:
    """The ``(1 - level) / 2`` and ``(1 + level) / 2`` quantiles of the finite replicates.

    Examples
    --------
    >>> [round(v, 6) for v in percentile_interval(np.arange(101.0), 0.9)]
    [5.0, 95.0]
    """
    values = np.asarray(replicates, dtype=np.float64)
    values = values[np.isfinite(values)]
    if values.size < 2:
        return (math.nan, math.nan)
    alpha = (1.0 - level) / 2.0
    low, high = np.quantile(values, [alpha, 1.0 - alpha])
    return (float(low), float(high))


def bca_interval(estimate: float, replicates: np.ndarray, jackknife: np.ndarray,
                 level: float = 0.95) -> tuple[float, float]:
    """Bias-corrected and accelerated bootstrap interval (Efron 1987).

    ``z0 = Phi^-1(share of replicates below the estimate)`` (ties count
    half); ``a = sum(d**3) / (6 * sum(d**2)**1.5)`` with ``d`` the jackknife
    estimates' deviations from their mean; the limits are the replicate
    quantiles at ``Phi(z0 + (z0 + z) / (1 - a (z0 + z)))`` for
    ``z = Phi^-1((1 -/+ level) / 2)``. ``(nan, nan)`` when it cannot be formed
    (no replicate on one side of the estimate, or constant jackknife estimates).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> reps = rng.normal(10.0, 1.0, 4000)
    >>> low, high = bca_interval(10.0, reps, np.linspace(9.9, 10.1, 20))
    >>> round(low, 1), round(high, 1)
    (8.1, 12.0)
    """
    values = np.asarray(replicates, dtype=np.float64)
    values = values[np.isfinite(values)]
    jack = np.asarray(jackknife, dtype=np.float64)
    jack = jack[np.isfinite(jack)]
    if values.size < 2 or jack.size < 2 or not math.isfinite(estimate):
        return (math.nan, math.nan)
    below = (np.sum(values < estimate) + 0.5 * np.sum(values == estimate)) / values.size
    if not 0.0 < below < 1.0:
        return (math.nan, math.nan)
    z0 = float(ndtri(below))
    deviation = jack.mean() - jack
    spread = float(np.sum(deviation**2))
    if not spread > 0:
        return (math.nan, math.nan)
    accel = float(np.sum(deviation**3)) / (6.0 * spread**1.5)
    alpha = (1.0 - level) / 2.0
    limits = []
    for z in (ndtri(alpha), ndtri(1.0 - alpha)):
        shifted = z0 + z
        limits.append(float(ndtr(z0 + shifted / (1.0 - accel * shifted))))
    if not all(0.0 < p < 1.0 for p in limits):
        return (math.nan, math.nan)
    low, high = np.quantile(values, limits)
    return (float(low), float(high))


def bootstrap_interval(estimate: float, replicates: np.ndarray, jackknife: np.ndarray | None = None,
                       *, level: float = 0.95) -> BootstrapInterval:
    """BCa interval when it can be formed (with *jackknife* estimates), else the percentile interval.

    Parameters
    ----------
    estimate : float
        The statistic on the full data.
    replicates : array_like of float
        The statistic on each resample; non-finite ones are left out and counted.
    jackknife : array_like of float, optional
        The statistic with each unit left out once (needed for BCa).
    level : float
        Confidence level.

    Returns
    -------
    BootstrapInterval

    References
    ----------
    .. [1] B. Efron, "Better bootstrap confidence intervals", J Am Stat Assoc
       82:171-185, 1987.
    .. [2] B. Efron & R. J. Tibshirani, An Introduction to the Bootstrap,
       Chapman & Hall, 1993 (percentile and BCa intervals).
    .. [3] H. R. Künsch, "The jackknife and the bootstrap for general
       stationary observations", Ann Stat 17:1217-1241, 1989 (resampling blocks).

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> data = rng.normal(size=40)
    >>> counts = resample_counts(rng, 40, 2000)
    >>> result = bootstrap_interval(data.mean(), counts @ data / 40,
    ...                             jackknife_counts(40) @ data / 39)
    >>> result.method, bool(result.low < data.mean() < result.high)
    ('BCa', True)
    """
    values = np.asarray(replicates, dtype=np.float64)
    failed = int(np.sum(~np.isfinite(values)))
    if jackknife is not None:
        low, high = bca_interval(estimate, values, jackknife, level)
        if math.isfinite(low) and math.isfinite(high):
            return BootstrapInterval(low, high, "BCa", int(values.size), failed)
    low, high = percentile_interval(values, level)
    return BootstrapInterval(low, high, "percentile", int(values.size), failed)
