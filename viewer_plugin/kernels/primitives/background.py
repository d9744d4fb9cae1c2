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

from ..._shared.validation import check_int, check_number, check_stack, depth_first, is_dask

__all__ = ["Background", "background_level", "slice_background", "clipped_rows"]


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


def clipped_rows(
    values: np.ndarray, *, n_sigma: float = 3.0, max_iter: int = 20
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sigma-clipped mean, spread and kept fraction of every row of a 2-D array.

    The vectorised form of the clipping used by :func:`background_level`:
    each row starts from its median and MAD and is clipped symmetrically at
    *n_sigma* standard deviations until the kept set stops changing.
    Non-finite entries (NaN marks excluded voxels) are ignored.

    Parameters
    ----------
    values : ndarray, shape (n_rows, n_values)
        One row per slice (e.g. a lateral sample of each slice).
    n_sigma : float
        Clipping half-width in standard deviations (common practice: 3).
    max_iter : int
        Upper bound on clipping passes.

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
    if values.ndim != 2:
        values = values.reshape(values.shape[0], -1)
    if _clipped_rows_numba is not None and values.dtype in (np.float32, np.float64):
        level, sigma, fraction = _clipped_rows_numba(values, float(n_sigma), int(max_iter))
        return level, sigma, fraction
    rows = [_clipped_stats(np.asarray(row, dtype=np.float64), n_sigma=n_sigma, max_iter=max_iter)
            for row in values]
    return (np.array([r.level for r in rows], dtype=np.float64),
            np.array([r.sigma for r in rows], dtype=np.float64),
            np.array([r.fraction for r in rows], dtype=np.float64))


def _make_clipped_rows_numba() -> Any:
    """Compile the row-wise clipping with numba (None when numba is unavailable)."""
    try:
        import numba
    except Exception:  # noqa: BLE001 - numba is optional at run time
        return None

    @numba.njit(cache=True, nogil=True)
    def clipped(values, n_sigma, max_iter):  # pragma: no cover - compiled
        n_rows, n_cols = values.shape
        level = np.full(n_rows, np.nan)
        sigma = np.full(n_rows, np.nan)
        fraction = np.zeros(n_rows)
        buf = np.empty(n_cols)
        for r in range(n_rows):
            n = 0
            for c in range(n_cols):
                v = values[r, c]
                if np.isfinite(v):
                    buf[n] = v
                    n += 1
            if n == 0:
                continue
            data = buf[:n]
            center = np.median(data)
            spread = 1.4826 * np.median(np.abs(data - center))
            kept = n
            if spread == 0:
                kept = 0
                for v in data:
                    if v == center:
                        kept += 1
                level[r] = center
                sigma[r] = 0.0
                fraction[r] = kept / n
                continue
            previous = -1
            for it in range(max_iter):
                limit = n_sigma * spread
                count = 0
                total = 0.0
                for v in data:
                    if abs(v - center) <= limit:
                        count += 1
                        total += v
                if count == 0 or (it > 0 and count == previous):
                    break
                mean = total / count
                square = 0.0
                for v in data:
                    if abs(v - center) <= limit:
                        square += (v - mean) ** 2
                center = mean
                spread = np.sqrt(square / count)
                previous = count
                kept = count
                if spread == 0:
                    break
            level[r] = center
            sigma[r] = spread
            fraction[r] = kept / n
        return level, sigma, fraction

    return clipped


_clipped_rows_numba = _make_clipped_rows_numba()
