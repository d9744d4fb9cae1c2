"""Depth-coded projection: colour tells the depth (µm), brightness the signal.

A depth-coded colour shows *where along the optical axis* the signal was
strongest, in µm from the first slice; it is not a height map of a surface,
and the brightness is relative (display limits), not calibrated intensity.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import partial
from typing import Any, Optional

import numpy as np

from ..._shared.progress import Progress
from ..._shared.validation import check_choice, check_interval, check_number, fail
from . import _compiled as nb
from . import _finish as fin
from ._common import KERNEL_LOCK, depth_view, initial_values, resolve_depth_range, rows
from .colour import DEFAULT_CMAP, depth_colours, resolve_lut
from .limits import resolve_clim, weight_levels
from .peak import fold_peak, start_peak
from .reduction import DepthFold, combine_tinted, combine_weighted, kernel_dtype, reduce_depth

__all__ = ["METHODS", "DepthCodedProjection", "depth_coded_projection"]

#: Ways of choosing the depth of a pixel in :func:`depth_coded_projection`.
METHODS = ("peak", "weighted", "tinted")
#: Methods whose colours can be changed without the stack (:meth:`DepthCodedProjection.recolour`).
RECOLOURABLE = ("peak", "weighted")


@dataclass(frozen=True, eq=False)
class DepthCodedProjection:
    """Result of :func:`depth_coded_projection`.

    Attributes
    ----------
    rgb : ndarray of float32, shape (..., 3)
        Colour = depth through the colour table, scaled by brightness; in
        [0, 1]. C-ordered, except for "tinted" (a view of planar storage).
    depth_um : ndarray of float32
        Depth of each pixel in µm from the first slice. "peak": NaN where
        nothing exceeds ``clim[0]``; "weighted": NaN where nothing exceeds
        the background floor (``weight_floor``); "tinted": the depth of the
        strongest voxel, NaN where nothing exceeds ``clim[0]``.
    brightness : ndarray of float32
        ``clip((max - lo) / (hi - lo), 0, 1) ** gamma``, in [0, 1].
    depth_range : tuple of float
        (d0, d1) in µm mapped to the two ends of the colour table.
    lut : ndarray of float64, shape (N, 3)
        The colour table used (entry ``floor(t * N)`` for position t).
    clim : tuple of float
        (lo, hi) display limits used, in input units.
    method : str
        "peak", "weighted" or "tinted".
    gamma : float
        Exponent applied to the brightness.
    z_step : float
        Slice spacing in µm.
    peak : ndarray or None
        The maximum along each ray, unnormalised, in the dtype the kernels
        read (uint8, uint16, float32 or float64; NaN or the dtype's minimum
        where a ray holds nothing): what :meth:`recolour` needs.
    index : ndarray of int16 or int32, or None
        Slice of each maximum ("peak" and "tinted"; -1 where a ray holds
        nothing); None for "weighted".
    saturated_fraction : float
        Fraction of pixels whose maximum exceeds the upper display limit
        ``clim[1]``: their brightness is clipped at 1.
    weight_floor : float or None
        "weighted": the background floor (background level + 3 SD, from the
        stack) above which the signal weights the depth; None otherwise.
    """

    rgb: np.ndarray
    depth_um: np.ndarray
    brightness: np.ndarray
    depth_range: tuple[float, float]
    lut: np.ndarray
    clim: tuple[float, float]
    method: str
    gamma: float
    z_step: float
    peak: Optional[np.ndarray] = None
    index: Optional[np.ndarray] = None
    saturated_fraction: float = 0.0
    weight_floor: Optional[float] = None

    def recolour(self, *, cmap: Any = None, depth_range: Optional[tuple[float, float]] = None,
                 clim: Optional[tuple[float, float]] = None,
                 gamma: Optional[float] = None) -> "DepthCodedProjection":
        """The same projection with other colours, without the stack.

        Equal, array for array, to :func:`depth_coded_projection` run again
        on the stack with the new options and the others unchanged (methods
        "peak" and "weighted": their depth and maximum per pixel are kept in
        the result). Takes about the time of one pass over the image.

        Parameters
        ----------
        cmap : str, Colormap or (N, 3) array, optional
            New colour table (default: keep ``lut``).
        depth_range : (float, float), optional
            New depths in µm at the two ends of the table (default: keep).
        clim : (float, float), optional
            New display limits (default: keep). For "peak" the lower limit
            also decides which pixels have a depth; for "weighted" it only
            sets brightness.
        gamma : float, optional
            New brightness exponent (> 0; default: keep).

        Returns
        -------
        DepthCodedProjection
            A new result; this one is not changed (unchanged arrays are shared).

        Raises
        ------
        ParameterError
            For "tinted" (its colours mix every slice: it needs the stack),
            a result without its ``peak`` values, or bad options.

        References
        ----------
        .. [1] matplotlib documentation, ``Colormap.__call__`` (entry
           ``floor(t * N)`` for position t).

        Examples
        --------
        >>> import numpy as np
        >>> stack = np.zeros((3, 1, 2), np.uint16)
        >>> stack[2, 0, 0] = 100
        >>> result = depth_coded_projection(stack, z_step=2.0, clim=(0, 100))
        >>> darker = result.recolour(clim=(0, 200))
        >>> float(darker.brightness[0, 0])
        0.5
        """
        return _recolour(self, cmap, depth_range, clim, gamma)


def _finish_colour(vals: np.ndarray, depth: np.ndarray, lo: float, scale: float, gamma: float,
                   d_range: tuple, lut: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(brightness, rgb) float32 from the maximum and the depth of each pixel."""
    bright = np.empty(depth.shape, np.float32)
    rgb = np.empty(depth.shape + (3,), np.float32)
    d0, d1 = d_range
    with KERNEL_LOCK:
        table = brightness_table(vals.dtype, lo, scale, gamma)
        fin.finish_colour(rows(vals), rows(depth), lo, scale, gamma, d0, d1 - d0, lut, table,
                         rows(bright), rows(rgb, 2))
    return bright, rgb


def _finish_peak(vals: np.ndarray, idx: np.ndarray, lo: float, scale: float, gamma: float,
                 z_step: float, d_range: tuple, lut: np.ndarray) -> tuple:
    """(depth_um, brightness, rgb) of "peak" from the maximum and its slice, in one pass."""
    depth = np.empty(vals.shape, np.float32)
    bright = np.empty(vals.shape, np.float32)
    rgb = np.empty(vals.shape + (3,), np.float32)
    d0, d1 = d_range
    n = max(1, int(idx.max()) + 1) if idx.size else 1  # the slices that hold a maximum
    slice_row, slice_depth = np.empty(n, np.int64), np.empty(n + 1, np.float32)
    with KERNEL_LOCK:
        fin.slice_rows(z_step, d0, d1 - d0, lut.shape[0], slice_row, slice_depth)
        table = brightness_table(vals.dtype, lo, scale, gamma)
        fin.finish_peak_colour(rows(vals), rows(idx), lo, scale, gamma, slice_row, slice_depth,
                              lut, table, rows(depth), rows(bright), rows(rgb, 2))
    return depth, bright, rgb


def brightness_table(dtype: np.dtype, lo: float, scale: float, gamma: float) -> np.ndarray:
    """The brightness of every 8/16-bit value (one power per value, not per pixel), else empty."""
    table = np.empty(0, np.float32)
    if np.dtype(dtype) in (np.dtype(np.uint8), np.dtype(np.uint16)):
        table = np.empty(np.iinfo(dtype).max + 1, np.float32)
        fin.brightness_table(lo, scale, gamma, table)
    return table


def _index_depth(vals: np.ndarray, idx: np.ndarray, lo: float, z_step: float) -> np.ndarray:
    """Depth in µm of each maximum above *lo* (NaN elsewhere), float32."""
    depth = np.empty(vals.shape, np.float32)
    with KERNEL_LOCK:
        fin.finish_depth_index(rows(vals), rows(idx), lo, z_step, rows(depth))
    return depth


def _saturated(vals: np.ndarray, hi: float) -> float:
    """Fraction of pixels whose maximum exceeds *hi* (NaN never does)."""
    return float(np.count_nonzero(vals > hi)) / max(1, vals.size)


def _start_weighted(shape: tuple, kdtype: np.dtype) -> tuple:
    """Fresh (maximum, sum of w, sum of w * z) state."""
    return initial_values(shape, kdtype), np.zeros(shape, np.float64), np.zeros(shape, np.float64)


def _update_weighted(block: np.ndarray, z0: int, state: tuple, *, floor: float,
                     scale: float) -> None:
    nb.weighted_update(block, z0, floor, scale, *state)


def _coded_weighted(v: Any, floor: float, w_scale: float, z_step: float,
                    progress: Progress) -> tuple:
    """(maximum, None, depth_um) of "weighted": the mean depth of the signal above *floor*.

    The float64 sums die on return, before the colour image is allocated.
    """
    kdtype = kernel_dtype(v.dtype)
    fold = DepthFold(start=partial(_start_weighted, kdtype=kdtype),
                     update=partial(_update_weighted, floor=floor, scale=w_scale),
                     combine=combine_weighted, dtype=kdtype)
    vals, sum_w, sum_wz = reduce_depth(v, fold, progress)
    depth = np.empty(vals.shape, np.float32)
    with KERNEL_LOCK:
        fin.finish_depth_sums(rows(sum_w), rows(sum_wz), z_step, rows(depth))
    return vals, None, depth


def _start_tinted(shape: tuple, kdtype: np.dtype, n: int) -> tuple:
    """Fresh (maximum, index, planar tint) state; tint is (..., 3, rows, cols) float32."""
    tint = np.zeros(shape[:-2] + (3,) + shape[-2:], np.float32)
    return (*start_peak(shape, kdtype, n), tint)


def _update_tinted(block: np.ndarray, z0: int, state: tuple, *, lo: float, scale: float,
                   colours: np.ndarray) -> None:
    nb.tinted_update(block, z0, lo, scale, colours, *state)


def _coded_tinted(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                  colours: np.ndarray, progress: Progress) -> tuple:
    """(maximum, index, depth_um, brightness, rgb) of the tinted method.

    ``rgb = min(max_z colour_z * u_z**gamma / max(1, u_max)**gamma, 1)`` with
    u the signal above lo in units of the display range, not clipped at 1:
    the upper display limit scales a pixel as a whole after the maximum, so
    saturation cannot shift its hue towards one end of the table. Without
    saturation this is ``max_z colour_z * u_z**gamma``. rgb is a (..., rows,
    cols, 3) view of the channel-planar state: no copy.
    """
    kdtype = kernel_dtype(v.dtype)
    # colour * u**g == (colour**(1/g) * u)**g, so gamma is applied once at the end
    pre = np.ascontiguousarray(colours ** (1.0 / gamma))
    fold = DepthFold(start=partial(_start_tinted, kdtype=kdtype, n=int(v.shape[0])),
                     update=partial(_update_tinted, lo=lo, scale=scale, colours=pre),
                     combine=combine_tinted, dtype=kdtype)
    vals, idx, tint = reduce_depth(v, fold, progress)
    depth = _index_depth(vals, idx, lo, z_step)
    bright = np.empty(vals.shape, np.float32)
    with KERNEL_LOCK:
        fin.finish_brightness(rows(vals), lo, scale, gamma, rows(bright))
        for lead in np.ndindex(*vals.shape[:-2]):
            fin.finish_tint(vals[lead], lo, scale, gamma, tint[lead])
    return vals, idx, depth, bright, np.moveaxis(tint, -3, -1)


def _recolour(result: DepthCodedProjection, cmap: Any, depth_range: Any, clim: Any,
              gamma: Any) -> DepthCodedProjection:
    """:meth:`DepthCodedProjection.recolour`: the finishing steps again, on the kept arrays."""
    if result.method not in RECOLOURABLE:
        fail("method", "'peak' or 'weighted' to recolour without the stack",
             result.method, hint=f"'{result.method}' mixes the colours of every slice: "
             "run depth_coded_projection on the stack again")
    if result.peak is None:
        fail("result", "a depth_coded_projection result that kept its peak values",
             "<a result without peak>")
    lut = result.lut if cmap is None else resolve_lut(cmap)
    d_range = result.depth_range if depth_range is None else check_interval(
        depth_range, name="depth_range", allow_none=False)
    lo, hi = result.clim if clim is None else check_interval(clim, name="clim", allow_none=False)
    gamma = result.gamma if gamma is None else check_number(gamma, name="gamma", low=0.0,
                                                            low_open=True)
    scale = 1.0 / (hi - lo)
    if result.method == "peak":  # the lower limit decides which pixels have a depth
        depth, brightness, rgb = _finish_peak(result.peak, result.index, lo, scale, gamma,
                                              result.z_step, d_range, lut)
    else:
        depth = result.depth_um
        brightness, rgb = _finish_colour(result.peak, depth, lo, scale, gamma, d_range, lut)
    return replace(result, rgb=rgb, depth_um=depth, brightness=brightness, depth_range=d_range,
                   lut=lut, clim=(lo, hi), gamma=gamma,
                   saturated_fraction=_saturated(result.peak, hi))


def depth_coded_projection(
    stack: Any,
    *,
    z_step: float = 1.0,
    method: str = "peak",
    cmap: Any = DEFAULT_CMAP,
    depth_range: Optional[tuple[float, float]] = None,
    clim: Optional[tuple[float, float]] = None,
    gamma: float = 1.0,
    axis: int = 0,
    progress: Progress = None,
) -> DepthCodedProjection:
    """Colour-code depth, and show intensity as brightness, in one RGB image.

    Parameters
    ----------
    stack : array_like or dask array
        Stack with at least 3 dimensions; integer, boolean or floating point.
        NaN counts as no signal. Not modified.
        A dask array is computed as one graph on the active dask scheduler.
    z_step : float, optional
        Slice spacing in µm (> 0). Depths are ``index * z_step`` from the
        first slice along *axis*.
    method : {"peak", "weighted", "tinted"}, optional
        How each pixel's depth and colour are chosen:

        * "peak": the depth of the strongest voxel on the ray;
        * "weighted": the mean depth of the signal along the ray, weighted
          by the signal above the background floor (background level + 3
          SD, sigma-clipped, estimated from the stack: ``weight_floor``),
          whatever the display limits; smoother on thick fibres, but a pixel
          where two fibres at different depths cross gets a colour between
          theirs;
        * "tinted": every slice coloured by its own depth and scaled by its
          own signal above ``lo`` (to the power gamma), then the
          channel-wise maximum over slices: fibres crossing at different
          depths both stay visible. The upper display limit is applied to
          the pixel as a whole after the maximum, so saturation does not
          shift colours. ``depth_um`` is the depth of the strongest voxel.

        For "peak" and "weighted", ``rgb = colour(depth) * brightness``
        with ``colour(depth) = cmap((depth - d0) / (d1 - d0))`` (position
        clipped to [0, 1]) and ``brightness = clip((max - lo) / (hi - lo),
        0, 1) ** gamma``.
    cmap : str, matplotlib Colormap or array of shape (N, 3), optional
        Colour table from the first to the last depth of *depth_range*.
        Default "CET-I1" (Kovesi's isoluminant cyan-green-orange map, CIELAB
        L* 70 along its whole length): colour then carries depth only and
        brightness the signal only. A table whose lightness varies (e.g.
        matplotlib's "viridis") mixes depth into brightness. Names:
        "CET-I1", "CET-I3", "CET-I2" or any matplotlib name.
    depth_range : (float, float), optional
        (d0, d1) in µm mapped to the ends of the colour table; default the
        first to the last slice, ``(0, (n - 1) * z_step)`` (``(0, z_step)``
        for a single slice).
    clim : (float, float), optional
        (lo, hi) display limits in input units: they set brightness (and,
        for "peak" and "tinted", which pixels count as signal). Default: the
        0.1 and 99.9 percentiles of the stack, **estimated from a strided
        subsample** (whole pixel rows, about a million values) for speed;
        pass the viewer's contrast limits to match the display. For
        "weighted" the default lo is raised to the background floor, so the
        background is drawn black; its depths never depend on clim.
    gamma : float, optional
        Exponent (> 0) applied to the normalised brightness.
    axis : int, optional
        The depth axis (default 0); other axes are kept.
    progress : callable, optional
        ``progress(done, total)`` as z-chunks (numpy) or groups of blocks
        (dask) are folded; may raise Cancelled, which stops the computation.

    Returns
    -------
    DepthCodedProjection
        ``rgb`` float32 (..., 3) in [0, 1]; ``depth_um`` float32;
        ``brightness`` float32 in [0, 1]; ``depth_range``; ``lut`` ((N, 3)
        float64); ``clim``; ``method``; ``gamma``; ``z_step``; ``peak`` and
        ``index`` (what :meth:`~DepthCodedProjection.recolour` needs);
        ``saturated_fraction``; ``weight_floor``. For "tinted", ``rgb`` is a
        strided view of channel-planar storage (saves a copy of the image);
        call :func:`numpy.ascontiguousarray` if a consumer needs C order.

    Raises
    ------
    ParameterError
        For a stack that is not a numeric array of >= 3 dimensions, an
        unknown method or colour table, z_step or gamma <= 0, or a clim or
        depth_range whose high end is not above the low end.

    Notes
    -----
    Colours are relative: they encode position within *depth_range* and the
    brightness is scaled by *clim*; neither is a calibrated quantity. The
    key of the image (:func:`depth_legend` with ``brightness_steps``) shows
    both: depth along one axis, brightness along the other.

    References
    ----------
    .. [1] P. Kovesi, "Good colour maps: how to design them",
       arXiv:1509.03700, 2015 (isoluminant maps when lightness encodes
       another quantity; the CET maps).
    .. [2] F. Crameri, G. E. Shephard, P. J. Heron, "The misuse of colour in
       science communication", Nat Commun 11:5444, 2020,
       doi:10.1038/s41467-020-19160-7 (why not a rainbow colour table).

    Examples
    --------
    >>> import numpy as np
    >>> stack = np.zeros((3, 1, 2), np.uint16)
    >>> stack[2, 0, 0] = 100          # deep spot
    >>> stack[0, 0, 1] = 100          # shallow spot
    >>> result = depth_coded_projection(stack, z_step=2.0, clim=(0, 100))
    >>> result.depth_um
    array([[4., 0.]], dtype=float32)
    >>> result.depth_range
    (0.0, 4.0)
    >>> result.rgb.shape, result.rgb.dtype
    ((1, 2, 3), dtype('float32'))
    """
    v, n = depth_view(stack, axis)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    method = check_choice(method, name="method", choices=METHODS)
    lut = resolve_lut(cmap)
    gamma = check_number(gamma, name="gamma", low=0.0, low_open=True)
    d_range = resolve_depth_range(depth_range, n, z_step)
    floor = None
    if method == "weighted":
        (lo, hi), floor, w_scale = weight_levels(v, clim)
        vals, idx, depth = _coded_weighted(v, floor, w_scale, z_step, progress)
    else:
        lo, hi = resolve_clim(clim, v)
    scale = 1.0 / (hi - lo)
    if method == "tinted":
        colours = depth_colours(n, z_step=z_step, cmap=lut, depth_range=d_range)
        vals, idx, depth, brightness, rgb = _coded_tinted(v, lo, scale, gamma, z_step, colours,
                                                          progress)
    elif method == "peak":
        vals, idx = fold_peak(v, progress)
        depth, brightness, rgb = _finish_peak(vals, idx, lo, scale, gamma, z_step, d_range, lut)
    else:
        brightness, rgb = _finish_colour(vals, depth, lo, scale, gamma, d_range, lut)
    return DepthCodedProjection(
        rgb=rgb, depth_um=depth, brightness=brightness, depth_range=d_range, lut=lut,
        clim=(lo, hi), method=method, gamma=gamma, z_step=z_step, peak=vals, index=idx,
        saturated_fraction=_saturated(vals, hi), weight_floor=floor,
    )
