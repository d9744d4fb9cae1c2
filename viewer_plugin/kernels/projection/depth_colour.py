"""Depth-coded projection: colour tells the depth (µm), brightness the signal.

A depth-coded colour shows *where along the optical axis* the signal was
strongest, in µm from the first slice; it is not a height map of a surface,
and the brightness is relative (display limits), not calibrated intensity.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial
from typing import Any, Optional

import numpy as np

from ..._shared.progress import Progress
from ..._shared.validation import check_choice, check_number
from . import _compiled as nb
from ._common import KERNEL_LOCK, depth_view, initial_values, resolve_depth_range, rows
from .colour import depth_colours, resolve_lut
from .limits import resolve_clim, weighted_clim
from .peak import fold_peak, start_peak
from .reduction import DepthFold, combine_tinted, combine_weighted, kernel_dtype, reduce_depth

__all__ = ["METHODS", "DepthCodedProjection", "depth_coded_projection"]

#: Ways of choosing the depth of a pixel in :func:`depth_coded_projection`.
METHODS = ("peak", "weighted", "tinted")


@dataclass(frozen=True, eq=False)
class DepthCodedProjection:
    """Result of :func:`depth_coded_projection`.

    Attributes
    ----------
    rgb : ndarray of float32, shape (..., 3)
        Colour = depth through the colour table, scaled by brightness; in
        [0, 1]. C-ordered, except for "tinted" (a view of planar storage).
    depth_um : ndarray of float32
        Depth of each pixel in µm from the first slice; NaN where nothing
        exceeds ``clim[0]``.
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


def _finish_colour(vals: np.ndarray, depth: np.ndarray, lo: float, scale: float, gamma: float,
                   d_range: tuple, lut: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(brightness, rgb) float32 from the maximum and the depth of each pixel."""
    bright = np.empty(depth.shape, np.float32)
    rgb = np.empty(depth.shape + (3,), np.float32)
    d0, d1 = d_range
    with KERNEL_LOCK:
        nb.finish_colour(rows(vals), rows(depth), lo, scale, gamma, d0, d1 - d0, lut,
                         rows(bright), rows(rgb, 2))
    return bright, rgb


def _coded_peak(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                     d_range: tuple, lut: np.ndarray, progress: Progress) -> tuple:
    """(depth_um, brightness, rgb) of the "peak" method."""
    vals, idx = fold_peak(v, progress)
    depth = np.empty(vals.shape, np.float32)
    with KERNEL_LOCK:
        nb.finish_depth_index(rows(vals), rows(idx), lo, z_step, rows(depth))
    del idx
    return (depth, *_finish_colour(vals, depth, lo, scale, gamma, d_range, lut))


def _start_weighted(shape: tuple, kdtype: np.dtype) -> tuple:
    """Fresh (maximum, sum of u, sum of u * z) state."""
    return initial_values(shape, kdtype), np.zeros(shape, np.float64), np.zeros(shape, np.float64)


def _update_weighted(block: np.ndarray, z0: int, state: tuple, *, lo: float, scale: float) -> None:
    nb.weighted_update(block, z0, lo, scale, *state)


def _weighted_depth(v: Any, lo: float, scale: float, z_step: float,
                    progress: Progress) -> tuple[np.ndarray, np.ndarray]:
    """(maximum, intensity-weighted mean depth in µm); the float64 sums die on return."""
    kdtype = kernel_dtype(v.dtype)
    fold = DepthFold(start=partial(_start_weighted, kdtype=kdtype),
                     update=partial(_update_weighted, lo=lo, scale=scale),
                     combine=combine_weighted, dtype=kdtype)
    vals, sum_u, sum_uz = reduce_depth(v, fold, progress)
    depth = np.empty(vals.shape, np.float32)
    with KERNEL_LOCK:
        nb.finish_depth_sums(rows(sum_u), rows(sum_uz), z_step, rows(depth))
    return vals, depth


def _coded_weighted(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                    d_range: tuple, lut: np.ndarray, progress: Progress) -> tuple:
    """(depth_um, brightness, rgb) of the "weighted" method."""
    # the sums are freed before the colour image is allocated: lower peak memory
    vals, depth = _weighted_depth(v, lo, scale, z_step, progress)
    return (depth, *_finish_colour(vals, depth, lo, scale, gamma, d_range, lut))


def _start_tinted(shape: tuple, kdtype: np.dtype, n: int) -> tuple:
    """Fresh (maximum, index, planar tint) state; tint is (..., 3, rows, cols) float32."""
    tint = np.zeros(shape[:-2] + (3,) + shape[-2:], np.float32)
    return (*start_peak(shape, kdtype, n), tint)


def _update_tinted(block: np.ndarray, z0: int, state: tuple, *, lo: float, scale: float,
                   colours: np.ndarray) -> None:
    nb.tinted_update(block, z0, lo, scale, colours, *state)


def _coded_tinted(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                  colours: np.ndarray, progress: Progress) -> tuple:
    """(depth_um, brightness, rgb) of the tinted method; rgb = max_z colour_z * u_z**gamma.

    rgb is a (..., rows, cols, 3) view of the channel-planar state: no copy.
    """
    kdtype = kernel_dtype(v.dtype)
    # colour * u**g == (colour**(1/g) * u)**g, so gamma is applied once at the end
    pre = np.ascontiguousarray(colours ** (1.0 / gamma))
    fold = DepthFold(start=partial(_start_tinted, kdtype=kdtype, n=int(v.shape[0])),
                     update=partial(_update_tinted, lo=lo, scale=scale, colours=pre),
                     combine=combine_tinted, dtype=kdtype)
    vals, idx, tint = reduce_depth(v, fold, progress)
    others = vals.shape
    with KERNEL_LOCK:
        depth = np.empty(others, np.float32)
        bright = np.empty(others, np.float32)
        nb.finish_depth_index(rows(vals), rows(idx), lo, z_step, rows(depth))
        nb.finish_brightness(rows(vals), lo, scale, gamma, rows(bright))
    if gamma != 1.0:
        np.power(tint, np.float32(gamma), out=tint)
    return depth, bright, np.moveaxis(tint, -3, -1)


def depth_coded_projection(
    stack: Any,
    *,
    z_step: float = 1.0,
    method: str = "peak",
    cmap: Any = "viridis",
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
        * "weighted": the intensity-weighted mean depth along the ray, with
          weights u = clip((I - lo) / (hi - lo), 0, 1); smoother on thick
          fibres, but a pixel where two fibres at different depths cross
          gets a colour between theirs;
        * "tinted": every slice coloured by its own depth and scaled by its
          own u ** gamma, then the channel-wise maximum over slices: fibres
          crossing at different depths both stay visible. ``depth_um`` is
          then the depth of the strongest voxel.

        For "peak" and "weighted", ``rgb = colour(depth) * brightness``
        with ``colour(depth) = cmap((depth - d0) / (d1 - d0))`` (position
        clipped to [0, 1]) and ``brightness = clip((max - lo) / (hi - lo),
        0, 1) ** gamma``.
    cmap : str, matplotlib Colormap or array of shape (N, 3), optional
        Colour table from the first to the last depth of *depth_range*.
        Default "viridis" (perceptually uniform, readable with red-green
        colour-vision deficiency).
    depth_range : (float, float), optional
        (d0, d1) in µm mapped to the ends of the colour table; default the
        first to the last slice, ``(0, (n - 1) * z_step)`` (``(0, z_step)``
        for a single slice).
    clim : (float, float), optional
        (lo, hi) display limits in input units. Default: the 0.1 and 99.9
        percentiles of the stack, **estimated from a strided subsample**
        (whole pixel rows, about a million values) for speed; pass the
        viewer's contrast limits to match the display. For "weighted" the
        default lo is raised to the background level + 3 sigma
        (sigma-clipped, :func:`~viewer_plugin.kernels.background_level`):
        with lo below the background, the background voxels all along the
        ray pull every weighted depth towards the middle of the stack. When
        passing clim for "weighted", put lo at or above the background.
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
        ``rgb`` float32 (..., 3) in [0, 1]; ``depth_um`` float32 (NaN where
        nothing exceeds lo); ``brightness`` float32 in [0, 1];
        ``depth_range``; ``lut`` ((N, 3) float64); ``clim``; ``method``;
        ``gamma``; ``z_step``. For "tinted", ``rgb`` is a strided view of
        channel-planar storage (saves a copy of the image); call
        :func:`numpy.ascontiguousarray` if a consumer needs C order.

    Raises
    ------
    ParameterError
        For a stack that is not a numeric array of >= 3 dimensions, an
        unknown method or colour table, z_step or gamma <= 0, or a clim or
        depth_range whose high end is not above the low end.

    Notes
    -----
    Colours are relative: they encode position within *depth_range* and the
    brightness is scaled by *clim*; neither is a calibrated quantity.

    References
    ----------
    .. [1] F. Crameri, G. E. Shephard, P. J. Heron, "The misuse of colour in
       science communication", Nat Commun 11:5444, 2020,
       doi:10.1038/s41467-020-19160-7 (why not a rainbow colour table).
    .. [2] J. R. Nuñez, C. R. Anderton, R. S. Renslow, "Optimizing colormaps
       with consideration for color vision deficiency", PLoS ONE
       13(7):e0199239, 2018, doi:10.1371/journal.pone.0199239.

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
    # background voxels all along the ray would pull every weighted depth to mid-stack
    lo, hi = weighted_clim(v) if clim is None and method == "weighted" else resolve_clim(clim, v)
    scale = 1.0 / (hi - lo)
    if method == "tinted":
        colours = depth_colours(n, z_step=z_step, cmap=lut, depth_range=d_range)
        depth, brightness, rgb = _coded_tinted(v, lo, scale, gamma, z_step, colours, progress)
    else:
        reduce = _coded_peak if method == "peak" else _coded_weighted
        depth, brightness, rgb = reduce(v, lo, scale, gamma, z_step, d_range, lut, progress)
    return DepthCodedProjection(
        rgb=rgb, depth_um=depth, brightness=brightness, depth_range=d_range, lut=lut,
        clim=(lo, hi), method=method, gamma=gamma, z_step=z_step,
    )
