"""Display limits of the projections: percentiles of a strided subsample, background floor."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..._shared.validation import check_interval, is_dask
from ..primitives.background import background_level
from ._common import depth_view

__all__ = [
    "CLIM_PERCENTILES",
    "background_floor",
    "display_limits",
    "estimate_clim",
    "percentiles_from_sample",
    "resolve_clim",
    "strided_samples",
    "weight_levels",
    "weighted_clim",
]

#: Percentiles of the stack used as display limits when ``clim=None``.
CLIM_PERCENTILES = (0.1, 99.9)
#: Samples used to estimate percentiles (integers / floating point).
SAMPLE_INT = 2**20
SAMPLE_FLOAT = 2**18
#: Samples for the background floor of weighted depths: the sigma-clipped level from 65536
#: values is within about 0.01 of its value from four times as many, at a quarter of the time.
SAMPLE_FLOOR = 2**16


def _strided(v: Any, budget: int) -> Any:
    """A strided subsample of about *budget* values (whole rows of pixels), not computed."""
    n, rows = int(v.shape[0]), int(v.shape[-2])
    need = max(1, math.ceil(int(np.prod(v.shape, dtype=np.int64)) / budget))
    step_rows = min(rows, need)
    step_z = min(n, max(1, math.ceil(need / step_rows)))
    return v[step_z // 2 :: step_z, ..., step_rows // 2 :: step_rows, :]


def strided_samples(v: Any, *budgets: int) -> list[np.ndarray]:
    """Flat strided subsamples of about each of *budgets* values from the depth-first *v*.

    For a dask stack all samples come from one graph computed once (blocks
    that several samples touch are read once).
    """
    parts = [_strided(v, budget) for budget in budgets]
    if is_dask(v):
        import dask

        parts = dask.compute(*parts)
    return [np.asarray(part).ravel() for part in parts]


def percentiles_from_sample(sample: np.ndarray, q: tuple[float, float]) -> tuple[float, float]:
    """Percentiles *q* of *sample* (numpy's "linear" rule), NaN/inf ignored.

    8/16-bit integers go through a histogram (exact, fast); an empty sample
    gives (0, 1).
    """
    sample = np.asarray(sample)
    if sample.dtype == np.bool_:
        sample = sample.view(np.uint8)
    if sample.dtype.kind == "u" and sample.dtype.itemsize <= 2 and sample.size:
        cum = np.cumsum(np.bincount(sample.ravel()))
        m = int(cum[-1])
        out = []
        for p in q:
            pos = p / 100.0 * (m - 1)
            i = int(math.floor(pos))
            lo = int(np.searchsorted(cum, i, side="right"))
            hi = int(np.searchsorted(cum, min(i + 1, m - 1), side="right"))
            out.append(lo + (pos - i) * (hi - lo))
        return float(out[0]), float(out[1])
    values = sample.astype(np.float64, copy=False).ravel()
    values = values[np.isfinite(values)]
    if values.size == 0:
        return 0.0, 1.0
    low, high = np.percentile(values, q)
    return float(low), float(high)


def _clim_budget(v: Any) -> int:
    return SAMPLE_INT if np.dtype(v.dtype).kind in "uib" else SAMPLE_FLOAT


def estimate_clim(v: Any, q: tuple[float, float] = (0.1, 99.9), *,
                  sample: Any = None) -> tuple[float, float]:
    """Display limits from percentiles of a strided subsample of the stack.

    A constant stack (``high <= low``) gets ``high = low + 1`` for integer
    data (``low + 1e-6 * max(1, |low|)`` for floats): nothing in it then
    counts as signal. *sample* replaces the subsample (from
    :func:`strided_samples` with the budget of the dtype).
    """
    kind = np.dtype(v.dtype).kind
    if sample is None:
        (sample,) = strided_samples(v, _clim_budget(v))
    low, high = percentiles_from_sample(sample, q)
    if high <= low:
        high = low + (1.0 if kind in "uib" else 1e-6 * max(1.0, abs(low)))
    return low, high


def background_floor(v: Any, n_sigma: float = 3.0, *, sample: Any = None) -> float:
    """Background level + *n_sigma* spreads, from a strided subsample.

    Uses :func:`..primitives.background.background_level` (sigma-clipped mean) on about
    65536 values: what the weights of weighted depth codes are measured from,
    and the default lower limit of their display. *sample* replaces the
    subsample.
    """
    if sample is None:
        (sample,) = strided_samples(v, SAMPLE_FLOOR)
    sample = np.asarray(sample).astype(np.float64)
    sample = sample[np.isfinite(sample)]
    if sample.size == 0:
        return 0.0
    bg = background_level(sample[None, :], step=1, n_sigma=n_sigma)
    return float(bg.level + n_sigma * bg.sigma)


def weight_levels(v: Any, clim: Any = None) -> tuple[tuple[float, float], float, float]:
    """Display limits, background floor and weight scale of a weighted depth code.

    The weights of "weighted" are the signal above the background floor
    (:func:`background_floor`), whatever the display limits; the scale
    ``1 / (top - floor)``, *top* the largest finite sampled value, only keeps
    the sums near 1 (it cancels in the mean depth). Everything comes from one
    strided sample pass (one graph for a dask stack), so numpy and dask stacks
    get the same numbers.

    Returns
    -------
    ((float, float), float, float)
        The user's *clim* (checked) or the default limits (percentiles, lo
        raised to the floor), the floor, and the weight scale.
    """
    pair = check_interval(clim, name="clim")
    budgets = (SAMPLE_FLOOR,) if pair is not None else (_clim_budget(v), SAMPLE_FLOOR)
    samples = strided_samples(v, *budgets)
    for_floor = samples[-1]
    floor = background_floor(v, sample=for_floor)
    finite = for_floor[np.isfinite(for_floor)] if for_floor.dtype.kind == "f" else for_floor
    top = float(finite.max()) if finite.size else floor
    scale = 1.0 / (top - floor) if top > floor else 1.0
    if pair is None:
        lo, hi = estimate_clim(v, CLIM_PERCENTILES, sample=samples[0])
        lo = max(lo, floor)
        pair = lo, (hi if hi > lo else lo + max(1.0, abs(lo)) * 1e-6)
    return pair, floor, scale


def weighted_clim(v: Any) -> tuple[float, float]:
    """Default limits of weighted depth codes: percentiles, lo raised to the background floor.

    The lower limit only sets brightness; the weights use the floor itself
    (:func:`weight_levels`). Both subsamples are taken in one pass.
    """
    return weight_levels(v)[0]


def display_limits(stack: Any, *, axis: int = 0) -> tuple[float, float]:
    """Default display limits of the projections: the 0.1 and 99.9 percentiles.

    The same limits ``clim=None`` gives in :func:`depth_coded_projection`
    (methods "peak" and "tinted") and :func:`occlusion_projection`; pass
    them explicitly to render several views of one stack on one scale.

    Parameters
    ----------
    stack : array_like or dask array
        Stack with at least 3 dimensions. Not modified.
    axis : int, optional
        The depth axis (default 0).

    Returns
    -------
    (float, float)
        (lo, hi) in input units, estimated from whole pixel rows taken at a
        stride (about 10**6 values for integers, 2.6e5 for floats); hi > lo.

    Raises
    ------
    ParameterError
        For a stack that is not a numeric array of >= 3 dimensions or a bad axis.

    References
    ----------
    .. [1] numpy documentation, ``numpy.percentile`` (method "linear").

    Examples
    --------
    >>> stack = np.arange(1000, dtype=np.uint16).reshape(10, 10, 10)
    >>> lo, hi = display_limits(stack)
    >>> bool(0 <= lo < hi <= 999)
    True
    """
    v, _ = depth_view(stack, axis)
    return estimate_clim(v, CLIM_PERCENTILES)


def resolve_clim(clim: Any, v: Any) -> tuple[float, float]:
    """User display limits (checked) or, on the depth-first *v*, those of :func:`display_limits`."""
    pair = check_interval(clim, name="clim")
    return pair if pair is not None else estimate_clim(v, CLIM_PERCENTILES)
