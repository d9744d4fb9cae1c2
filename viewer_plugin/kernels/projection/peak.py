"""Peak projection: the maximum along depth, the slice that holds it and its depth in µm."""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial
from typing import Any

import numpy as np

from ..._shared.progress import Progress
from ..._shared.validation import check_number
from . import _compiled as nb
from ._common import depth_view, index_dtype, initial_values
from .reduction import DepthFold, combine_peak, kernel_dtype, reduce_depth

__all__ = ["PeakProjection", "peak_projection", "fold_peak", "start_peak"]


@dataclass(frozen=True, eq=False)
class PeakProjection:
    """Result of :func:`peak_projection`.

    Attributes
    ----------
    peak : ndarray
        Maximum along the depth axis, in the input dtype (NaN where a ray
        holds only NaN).
    index : ndarray of int16 or int32
        Index of the slice holding the maximum (the first one on ties, as
        :func:`numpy.argmax`; 0 where a ray holds only NaN). int16 for
        stacks of fewer than 32768 slices, int32 above.
    depth_um : ndarray of float32
        ``index * z_step``: depth of the maximum in µm below the first slice
        (NaN where a ray holds only NaN).
    z_step : float
        Slice spacing in µm used for ``depth_um``.
    """

    peak: np.ndarray
    index: np.ndarray
    depth_um: np.ndarray
    z_step: float


def start_peak(shape: tuple, kdtype: np.dtype, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Fresh (maximum, index) state: nothing seen yet (index -1)."""
    return initial_values(shape, kdtype), np.full(shape, -1, index_dtype(n))


def _update_peak(block: np.ndarray, z0: int, state: tuple) -> None:
    nb.peak_update(block, z0, *state)


def fold_peak(v: Any, progress: Progress) -> tuple[np.ndarray, np.ndarray]:
    """(maximum, index) over the depth-first *v*; index -1 on all-NaN rays.

    For integers the index also stays -1 where the ray holds only the
    dtype's minimum (read as 0, as numpy.argmax).
    """
    kdtype = kernel_dtype(v.dtype)
    fold = DepthFold(start=partial(start_peak, kdtype=kdtype, n=int(v.shape[0])),
                     update=_update_peak, combine=combine_peak, dtype=kdtype)
    return reduce_depth(v, fold, progress)


def peak_projection(stack: Any, *, axis: int = 0, z_step: float = 1.0,
                    progress: Progress = None) -> PeakProjection:
    """Maximum-intensity projection, the slice index of each maximum and its depth in µm.

    Parameters
    ----------
    stack : array_like or dask array
        Stack with at least 3 dimensions (e.g. ZYX, TZYX, CZYX), integer,
        boolean or floating point. NaN counts as no signal. Not modified.
        A dask array is computed as one graph on the active dask scheduler.
    axis : int, optional
        The depth axis (default 0). Other axes are kept in order.
    z_step : float, optional
        Slice spacing in µm (> 0), for ``depth_um``.
    progress : callable, optional
        ``progress(done, total)`` as z-chunks (numpy) or groups of blocks
        (dask) are folded; may raise :class:`~viewer_plugin.kernels.Cancelled`,
        which stops the computation.

    Returns
    -------
    PeakProjection
        ``peak`` in the input dtype, ``index`` (int16 below 32768 slices,
        else int32) and ``depth_um`` (float32), all of the stack's shape
        without *axis*. Ties go to the smallest index, as
        :func:`numpy.argmax`; a ray of only NaN gives peak NaN, index 0 and
        depth NaN.

    Raises
    ------
    ParameterError
        For fewer than 3 dimensions, an empty axis, a non-numeric dtype, an
        axis out of range or z_step <= 0.

    References
    ----------
    .. [1] numpy.argmax documentation: the first occurrence of the maximum
       is returned.

    Examples
    --------
    >>> import numpy as np
    >>> stack = np.array([[[1, 5]], [[3, 5]], [[2, 0]]], dtype=np.uint8)
    >>> result = peak_projection(stack, z_step=2.0)
    >>> result.peak
    array([[3, 5]], dtype=uint8)
    >>> result.index
    array([[1, 0]], dtype=int16)
    >>> result.depth_um
    array([[2., 0.]], dtype=float32)
    """
    v, _ = depth_view(stack, axis)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    vals, idx = fold_peak(v, progress)
    empty = idx < 0
    index = np.maximum(idx, 0).astype(idx.dtype, copy=False)
    depth = index.astype(np.float32) * np.float32(z_step)
    if vals.dtype.kind == "f":
        depth[empty & np.isnan(vals)] = np.nan
    peak = vals if vals.dtype == v.dtype else vals.astype(v.dtype)
    return PeakProjection(peak=peak, index=index, depth_um=depth, z_step=z_step)
