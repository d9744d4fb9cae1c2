"""Background levels shared by the attenuation and bleaching kernels.

A detector offset and the background around sparse structures are estimated
with a sigma-clipped *mean* of the dim voxels. The mean (not a low percentile
or the minimum) is used because shot and read noise spread background voxels
symmetrically enough that their mean stays unbiased, while a percentile sits
below the true level by an amount that grows with the noise.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ._validate import check_int, check_number, check_stack, depth_first, is_dask

__all__ = ["Background", "background_level", "slice_background"]


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


def _clipped_stats(values: np.ndarray, *, n_sigma: float, max_iter: int = 20) -> Background:
    """Iterative upper/lower sigma clipping starting from median and MAD."""
    values = values[np.isfinite(values)]
    if values.size == 0:
        return Background(float("nan"), float("nan"), 0.0)
    total = values.size
    center = float(np.median(values))
    spread = 1.4826 * float(np.median(np.abs(values - center)))
    keep = values
    for _ in range(max_iter):
        if spread == 0:
            keep = values[values == center]
            break
        new_keep = values[np.abs(values - center) <= n_sigma * spread]
        if new_keep.size == keep.size and _ > 0:
            break
        keep = new_keep
        center = float(np.mean(keep, dtype=np.float64))
        spread = float(np.std(keep, dtype=np.float64))
    return Background(center, spread, keep.size / total)


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
    return _clipped_stats(_sample(stack, step), n_sigma=n_sigma)


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
    """
    stack, axis = check_stack(stack, axis=axis)
    n_sigma = check_number(n_sigma, name="n_sigma", low=0, low_open=True)
    step = check_int(step, name="step", low=1)
    moved = depth_first(stack, axis)
    return np.array(
        [_clipped_stats(_sample(moved[i], step), n_sigma=n_sigma).level for i in range(moved.shape[0])]
    )
