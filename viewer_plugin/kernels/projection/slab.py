"""Slabs: a projection of the slices around one slice, with depths counted in the whole stack.

:func:`slab_bounds` picks the slices of a slab of given thickness centred on
one slice; :func:`offset_depths` turns a projection of those slices into one
whose slice indices, depths and depth range count from the first slice of the
whole stack, so that a slab's colours and depths mean the same wherever the
slab lies.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from ..._shared.validation import check_int, check_number, fail
from ._common import resolve_depth_range
from .depth_colour import DepthCodedProjection
from .peak import PeakProjection

__all__ = ["offset_depths", "slab_bounds", "slab_depth_range"]


def slab_bounds(n: int, *, centre: int, thickness_um: float, z_step: float) -> tuple[int, int]:
    """The slices ``[start, stop)`` of a slab *thickness_um* thick centred on slice *centre*.

    A slice belongs to the slab when its depth lies within half the thickness
    of the centre slice's depth, so the slab holds ``2 * floor(thickness /
    (2 * z_step)) + 1`` slices (at least the centre slice itself), fewer where
    it meets the first or last slice of the stack.

    Parameters
    ----------
    n : int
        Number of slices in the stack (>= 1).
    centre : int
        Index of the slice at the slab's centre, 0 to n - 1.
    thickness_um : float
        Thickness of the slab in µm (> 0).
    z_step : float
        Slice spacing in µm (> 0).

    Returns
    -------
    (int, int)
        ``start`` (first slice) and ``stop`` (one past the last slice).

    Raises
    ------
    ParameterError
        For a centre outside the stack or a thickness or step that is not
        positive.

    References
    ----------
    .. [1] numpy documentation, "Indexing on ndarrays" (basic slicing,
       ``start:stop`` with *stop* excluded).

    Examples
    --------
    >>> slab_bounds(100, centre=50, thickness_um=10.0, z_step=2.0)
    (48, 53)
    >>> slab_bounds(100, centre=1, thickness_um=10.0, z_step=2.0)
    (0, 4)
    """
    n = check_int(n, name="slices", low=1)
    centre = check_int(centre, name="slab centre", low=0)
    if centre > n - 1:
        fail("slab centre", f"a slice index from 0 to {n - 1}", centre)
    thickness_um = check_number(thickness_um, name="slab thickness (\u00b5m)", low=0.0,
                                low_open=True)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    half = int(math.floor(thickness_um / (2.0 * z_step) * (1.0 + 1e-12)))
    return max(0, centre - half), min(n, centre + half + 1)


def slab_depth_range(depth_range: Any, *, n: int, z_step: float,
                     first_slice: int) -> tuple[float, float]:
    """The colour range of a slab starting at *first_slice*, in the slab's own depths.

    A projection of the slab counts depths from its own first slice; giving
    it this range (the whole stack's, ``(0, (n - 1) * z_step)``, or
    *depth_range*, moved by ``first_slice * z_step``) gives every depth the
    colour it has in a projection of the whole stack.

    Parameters
    ----------
    depth_range : (float, float) or None
        Depths in µm, counted from the stack's first slice, at the two ends of
        the colour table; None for the whole stack.
    n : int
        Number of slices in the whole stack.
    z_step : float
        Slice spacing in µm.
    first_slice : int
        Index of the slab's first slice in the stack.

    Returns
    -------
    (float, float)
        The range in µm below the slab's first slice.

    Raises
    ------
    ParameterError
        For a range that is not an increasing pair of finite numbers.

    References
    ----------
    .. [1] The colour position ``(depth - d0) / (d1 - d0)`` does not change
       when depth and range move together (a translation of the depth axis).

    Examples
    --------
    >>> slab_depth_range(None, n=11, z_step=2.0, first_slice=3)
    (-6.0, 14.0)
    """
    d0, d1 = resolve_depth_range(depth_range, int(n), float(z_step))
    shift = int(first_slice) * float(z_step)
    return d0 - shift, d1 - shift


def offset_depths(result: Any, first_slice: int) -> Any:
    """A projection of slices ``first_slice, ...`` with depths counted from the stack's first slice.

    Slice indices grow by *first_slice* (``-1``, "no signal", stays), depths
    in µm by ``first_slice * z_step``, and a depth-coded result's depth range
    likewise, so that its colours stay the same and :meth:`recolour
    <viewer_plugin.kernels.projection.DepthCodedProjection.recolour>` takes
    depths of the whole stack. The images (maximum, brightness, RGB) are
    shared with *result*, which is not changed.

    Parameters
    ----------
    result : PeakProjection or DepthCodedProjection
        A projection of a slab that starts at slice *first_slice*.
    first_slice : int
        Index, in the whole stack, of the slab's first slice (>= 0).

    Returns
    -------
    PeakProjection or DepthCodedProjection
        A new result of the same type; ``index`` int16 or int32 as in
        *result*, ``depth_um`` float32.

    Raises
    ------
    ParameterError
        For another kind of result, a negative *first_slice*, or an index
        that would not fit its integer type.

    References
    ----------
    .. [1] Python documentation, ``dataclasses.replace`` (a copy with some
       fields changed).

    Examples
    --------
    >>> import numpy as np
    >>> from viewer_plugin.kernels import peak_projection
    >>> slab = np.zeros((3, 1, 2), np.uint8)
    >>> slab[1, 0, 0] = 9
    >>> whole = offset_depths(peak_projection(slab, z_step=2.0), 10)
    >>> int(whole.index[0, 0]), float(whole.depth_um[0, 0])
    (11, 22.0)
    """
    first = check_int(first_slice, name="first_slice", low=0)
    if not isinstance(result, (PeakProjection, DepthCodedProjection)):
        fail("result", "a PeakProjection or DepthCodedProjection", f"<{type(result).__name__}>")
    shift = np.float32(first * result.z_step)
    changes: dict[str, Any] = {"depth_um": np.asarray(result.depth_um, np.float32) + shift}
    if result.index is not None:
        index = np.asarray(result.index)
        if index.size and int(index.max()) + first > np.iinfo(index.dtype).max:
            fail("first_slice", f"an offset that keeps slice indices within {index.dtype}", first)
        changes["index"] = np.where(index >= 0, index + index.dtype.type(first), index)
    if isinstance(result, DepthCodedProjection):
        d0, d1 = result.depth_range
        offset = first * float(result.z_step)
        changes["depth_range"] = (d0 + offset, d1 + offset)
    return dataclasses.replace(result, **changes)
