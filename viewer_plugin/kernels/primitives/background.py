"""Sigma-clipped background level: the one background estimate of every kernel.

What it is: the mean and standard deviation of the dim voxels, found by
sigma clipping. The clipping starts from the median and the normalised
median absolute deviation (MAD, ``1.4826 * median|v - median|``): one pass
keeps the values within ``n_sigma`` of the median, then
:func:`scipy.stats.sigmaclip` iterates on what is left (mean and standard
deviation of the kept values, clip at ``n_sigma`` of them, until nothing more
is removed). The robust start matters where structure covers a large part of
the field: a start from the mean and standard deviation of all values (what
``sigmaclip`` alone does) keeps everything when a quarter or more of the
voxels are bright, and reports the average of structure and background.

Why a mean: shot and read noise spread background voxels symmetrically
enough that their mean stays unbiased, while a low percentile sits below the
true level by an amount that grows with the noise.

Where it is used: :func:`background_level` and :func:`slice_background`
(public), the display limits of the projections, the per-frame backgrounds
of the bleaching check and the two-pass separation (:func:`clipped_stats`,
:func:`frames_background`), and the per-slice backgrounds of the attenuation
estimate (:func:`rows_background`, the compiled row-wise form
:func:`clipped_rows` of the same clipping).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numba
import numpy as np
from scipy.stats import sigmaclip

from ..._shared.validation import check_int, check_number, check_stack, depth_first, is_dask

__all__ = [
    "Background",
    "SliceBackground",
    "background_level",
    "clipped_rows",
    "clipped_stats",
    "frames_background",
    "rows_background",
    "slice_background",
]

#: Scale of the MAD to the standard deviation of a normal distribution.
MAD_TO_SIGMA = 1.4826

#: Frames sampled along the acquisition axis by :func:`frames_background`.
BACKGROUND_FRAMES = 16


@dataclass(frozen=True)
class SliceBackground:
    """Background level and spread of every slice (float64 arrays, one value per slice)."""

    level: np.ndarray
    sigma: np.ndarray


@dataclass(frozen=True)
class Background:
    """Level and spread of the background voxels.

    Attributes
    ----------
    level : float
        Sigma-clipped mean of the background voxels (same units as the data).
    sigma : float
        Standard deviation of the background voxels after clipping.
    fraction : float
        Fraction of the sampled voxels counted as background.
    """

    level: float
    sigma: float
    fraction: float


def clipped_stats(values: np.ndarray, *, n_sigma: float = 3.0) -> Background:
    """Sigma-clipped mean and spread of *values* (non-finite values are ignored).

    One clip around the median at *n_sigma* normalised MADs, then
    :func:`scipy.stats.sigmaclip` with *n_sigma* on both sides. When more
    than half of the values are equal (MAD 0) the level is that value and
    the spread 0.

    Examples
    --------
    >>> stats = clipped_stats(np.array([1.0, 2.0, 3.0, 2.0, 100.0]))
    >>> stats.level, stats.fraction
    (2.0, 0.8)
    """
    values = np.asarray(values, dtype=np.float64).ravel()
    values = values[np.isfinite(values)]
    if values.size == 0:
        return Background(float("nan"), float("nan"), 0.0)
    center = float(np.median(values))
    spread = MAD_TO_SIGMA * float(np.median(np.abs(values - center)))
    limit = n_sigma * spread
    start = values[(values >= center - limit) & (values <= center + limit)]
    kept = sigmaclip(start, n_sigma, n_sigma).clipped
    return Background(float(np.mean(kept)), float(np.std(kept)), kept.size / values.size)


def clipped_rows(values: np.ndarray, *, n_sigma: float = 3.0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The clipping of :func:`clipped_stats` for every row of a 2-D array, compiled.

    For row-wise data such as a lateral sample of every slice, where a
    Python loop over :func:`clipped_stats` would cost more than the clipping.
    Non-finite entries (NaN marks excluded voxels) are ignored.

    Parameters
    ----------
    values : ndarray, shape (n_rows, n_values)
        One row per slice; other shapes are flattened after the first axis.
    n_sigma : float
        Clipping half-width in standard deviations (common practice: 3).

    Returns
    -------
    level, sigma, fraction : ndarray of float64, shape (n_rows,)
        NaN level and sigma (fraction 0) for a row without finite values.

    Examples
    --------
    >>> rows = np.array([[1.0, 2.0, 3.0, 2.0, 100.0], [5.0, 5.0, 5.0, 5.0, 5.0]])
    >>> level, sigma, fraction = clipped_rows(rows)
    >>> level.round(3).tolist(), fraction.tolist()
    ([2.0, 5.0], [0.8, 1.0])
    """
    values = np.asarray(values)
    values = values.reshape(values.shape[0], -1)
    if values.dtype not in (np.float32, np.float64):
        values = values.astype(np.float64)
    return _clipped_rows(values, float(n_sigma))


@numba.njit(cache=True, nogil=True)
def _clip_once(data, n, center, limit):  # pragma: no cover - compiled
    """Move the values of data[:n] within *limit* of *center* to the front; return their count."""
    kept = 0
    for i in range(n):
        v = data[i]
        if v >= center - limit and v <= center + limit:
            data[kept] = v
            kept += 1
    return kept


@numba.njit(cache=True, nogil=True)
def _gather_finite(row, data):  # pragma: no cover - compiled
    """Copy the finite values of *row* to the front of *data*; return their count."""
    n = 0
    for v in row:
        if np.isfinite(v):
            data[n] = v
            n += 1
    return n


@numba.njit(cache=True, nogil=True)
def _clipped_rows(values, n_sigma):  # pragma: no cover - compiled
    level = np.full(values.shape[0], np.nan)
    sigma = np.full(values.shape[0], np.nan)
    fraction = np.zeros(values.shape[0])
    data = np.empty(values.shape[1])
    for r in range(values.shape[0]):
        n = _gather_finite(values[r], data)
        if n == 0:
            continue
        center = np.median(data[:n])
        spread = 1.4826 * np.median(np.abs(data[:n] - center))
        kept = _clip_once(data, n, center, n_sigma * spread)
        while True:  # scipy.stats.sigmaclip: clip the kept values until none is removed
            mean = data[:kept].mean()
            std = data[:kept].std()
            now = _clip_once(data, kept, mean, n_sigma * std)
            if now == kept:
                break
            kept = now
        level[r] = mean
        sigma[r] = std
        fraction[r] = kept / n
    return level, sigma, fraction


def _sample(plane_or_stack: Any, step: int) -> np.ndarray:
    """Strided subsample of the last two axes as float64 (a small copy)."""
    sample = plane_or_stack[..., ::step, ::step]
    if is_dask(sample):
        sample = sample.compute()
    return np.asarray(sample, dtype=np.float64).ravel()


def background_level(
    stack: Any, *, n_sigma: float = 3.0, step: int = 4
) -> Background:
    """Estimate the background level (detector offset plus haze) of a stack.

    Parameters
    ----------
    stack : array_like, at least 2-D
        Image data; NaN voxels are ignored.
    n_sigma : float
        Clipping half-width in standard deviations (common practice: 3).
    step : int
        Lateral subsampling step of the last two axes.

    Returns
    -------
    Background
        ``level`` in the data's units, ``sigma`` and the background fraction.

    Raises
    ------
    ParameterError
        For a non-numeric or empty array, or bad *n_sigma* / *step*.

    References
    ----------
    .. [1] ``scipy.stats.sigmaclip`` (the iteration), started from the median
       and the normalised median absolute deviation.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> data = 100 + rng.poisson(4, size=(4, 64, 64)).astype(float)
    >>> data[:, 10:12, :] += 500            # a bright structure
    >>> round(background_level(data, step=1).level)
    104
    """
    stack, _ = check_stack(stack, min_ndim=2)
    n_sigma = check_number(n_sigma, name="n_sigma", low=0, low_open=True)
    step = check_int(step, name="step", low=1)
    return clipped_stats(_sample(stack, step), n_sigma=n_sigma)


def slice_background(
    stack: Any, *, axis: int = 0, n_sigma: float = 3.0, step: int = 2
) -> np.ndarray:
    """Background level of every slice along *axis* (float64, one per slice).

    Parameters
    ----------
    stack : array_like, at least 3-D
        Image data.
    axis : int
        The axis whose slices are measured.
    n_sigma, step
        As for :func:`background_level`.

    Returns
    -------
    ndarray of float64, shape (stack.shape[axis],)
        NaN for a slice with no finite voxel.

    Raises
    ------
    ParameterError
        For bad input, as :func:`background_level`.

    Examples
    --------
    >>> data = np.stack([np.full((8, 8), 10.0), np.full((8, 8), 20.0)])
    >>> slice_background(data, step=1).tolist()
    [10.0, 20.0]
    """
    stack, axis = check_stack(stack, axis=axis)
    n_sigma = check_number(n_sigma, name="n_sigma", low=0, low_open=True)
    step = check_int(step, name="step", low=1)
    moved = depth_first(stack, axis)
    return np.array(
        [clipped_stats(_sample(moved[i], step), n_sigma=n_sigma).level for i in range(moved.shape[0])],
        dtype=np.float64,
    )


def frames_background(moved: Any, *, n_frames: int = BACKGROUND_FRAMES, step: int = 4) -> Background:
    """Background of up to *n_frames* evenly spaced frames of a depth-first array.

    The lateral stride is taken first (a view) and the frames picked from it,
    so only the small sample is copied or computed for dask input.
    """
    n = int(moved.shape[0])
    picks = np.unique(np.linspace(0, n - 1, min(n, n_frames)).round().astype(int))
    return clipped_stats(_sample(moved[..., ::step, ::step][picks], 1))


def rows_background(sample: np.ndarray, *, n_sigma: float = 3.0, max_values: int = 4096) -> SliceBackground:
    """Sigma-clipped background of every row of a lateral sample (about *max_values* a row)."""
    thin = sample[:, :: max(1, sample.shape[1] // max_values)]
    level, sigma, _ = clipped_rows(thin, n_sigma=n_sigma)
    return SliceBackground(level=level, sigma=sigma)
