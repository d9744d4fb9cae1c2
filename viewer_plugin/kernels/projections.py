"""Projections of a z-stack along its depth axis.

* :func:`brightest_point` -- maximum-intensity projection and the index of
  the slice holding each maximum;
* :func:`depth_coded_projection` -- an RGB image whose colour tells the depth
  and whose brightness tells the intensity (three ways to pick the depth);
* :func:`blended_projection` -- emission-absorption compositing (Max 1995),
  where structures in front hide those behind them;
* :func:`depth_legend` -- the colour bar of a depth-coded image (in
  :mod:`.legend`, re-exported here).

Every projection is a chunk -> combine -> aggregate reduction over z-chunks
(see :mod:`._proj_combine`), so numpy arrays and z-chunked dask arrays share
the code, progress is reported between chunks, and no float copy of the
whole stack is ever made. The inner loops are compiled with numba
(:mod:`._numba_proj`); call :func:`warm_up` once, e.g. in a background
thread, to compile (or load from the on-disk cache) before the first use.

A depth-coded colour shows *where along the optical axis* the signal was
brightest, in µm from the first slice; it is not a height map of a surface,
and the brightness is relative (display limits), not calibrated intensity.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from typing import Any, Callable, Optional

import numpy as np

from . import _numba_proj as nb
from ._proj_combine import (
    background_floor,
    estimate_clim,
    fold_chunks,
    kernel_dtype,
    resolve_lut,
    slice_colours,
)
from ._validate import (
    check_choice,
    check_int,
    check_interval,
    check_number,
    check_stack,
    depth_first,
)
from .legend import DepthLegend, depth_legend

__all__ = [
    "BrightestPoint",
    "DepthCodedProjection",
    "DepthLegend",
    "METHODS",
    "VIEWS",
    "DEFAULT_OPTICAL_DEPTH",
    "CLIM_PERCENTILES",
    "brightest_point",
    "depth_coded_projection",
    "depth_colours",
    "display_limits",
    "blended_projection",
    "depth_legend",
    "warm_up",
]

#: Ways of choosing the depth of a pixel in :func:`depth_coded_projection`.
METHODS = ("brightest", "weighted", "tinted")
#: Viewing sides of :func:`blended_projection`.
VIEWS = ("top", "bottom")
#: Optical depth of a fully bright column through the whole stack when
#: ``density=None`` in :func:`blended_projection`.
DEFAULT_OPTICAL_DEPTH = 10.0
#: Percentiles of the stack used as display limits when ``clim=None``.
CLIM_PERCENTILES = (0.1, 99.9)

Progress = Optional[Callable[[int, int], None]]

# One compiled parallel kernel at a time: numba's thread pools are not meant
# to be entered from several Python threads at once.
_KERNEL_LOCK = threading.RLock()


@dataclass(frozen=True, eq=False)
class BrightestPoint:
    """Result of :func:`brightest_point`.

    Attributes
    ----------
    values : ndarray
        Maximum along the depth axis, in the input dtype (NaN where a ray
        holds only NaN).
    depth : ndarray of int32
        Index of the slice holding the maximum (the first one on ties, as
        :func:`numpy.argmax`; 0 where a ray holds only NaN).
    """

    values: np.ndarray
    depth: np.ndarray


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
        "brightest", "weighted" or "tinted".
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


# --- shared preparation -----------------------------------------------------

def _depth_view(stack: Any, axis: int) -> tuple[Any, int]:
    """Checked, depth-first view of *stack* and its number of slices."""
    stack, axis = check_stack(stack, axis=axis)
    v = depth_first(stack, axis)
    return v, int(v.shape[0])


def _resolve_clim(clim: Any, v: Any) -> tuple[float, float]:
    """User display limits (checked) or, on the depth-first *v*, those of :func:`display_limits`."""
    pair = check_interval(clim, name="clim")
    return pair if pair is not None else estimate_clim(v, CLIM_PERCENTILES)


def _resolve_depth_range(depth_range: Any, n: int, z_step: float) -> tuple[float, float]:
    """User colour range (checked) or first slice .. last slice."""
    pair = check_interval(depth_range, name="depth_range")
    if pair is not None:
        return pair
    return 0.0, (n - 1) * z_step if n > 1 else z_step


def _initial_values(shape: tuple, kdtype: np.dtype) -> np.ndarray:
    """Running-maximum state: NaN for floats, the minimum for integers."""
    if kdtype.kind == "f":
        return np.full(shape, np.nan, kdtype)
    return np.full(shape, np.iinfo(kdtype).min, kdtype)


def _index_dtype(n: int) -> np.dtype:
    """Slice-index state: int16 below 32768 slices (half the vector width), else int32."""
    return np.dtype(np.int16 if n < 2**15 else np.int32)


def _fold_brightest(v: Any, progress: Progress) -> tuple[np.ndarray, np.ndarray]:
    """(values, index) of the brightest point; index -1 on all-NaN rays.

    For integers the index also stays -1 where the ray holds only the
    dtype's minimum (read as 0, as numpy.argmax).
    """
    vals = _initial_values(v.shape[1:], kernel_dtype(v.dtype))
    idx = np.full(v.shape[1:], -1, _index_dtype(v.shape[0]))

    def fold(block: np.ndarray, z0: int, index: tuple) -> None:
        nb.brightest_update(block, z0, vals[index], idx[index])

    with _KERNEL_LOCK:
        fold_chunks(v, fold, progress=progress)
    return vals, idx


def _rows(a: np.ndarray, tail: int = 1) -> np.ndarray:
    """View of a C-contiguous array with all leading axes merged: (rows, *last tail axes)."""
    return a.reshape((-1,) + a.shape[a.ndim - tail:])


# --- brightest point ------------------------------------------------------------

def brightest_point(stack: Any, *, axis: int = 0, progress: Progress = None) -> BrightestPoint:
    """Maximum-intensity projection and the slice index of each maximum.

    Parameters
    ----------
    stack : array_like or dask array
        Stack with at least 3 dimensions (e.g. ZYX, TZYX, CZYX), integer,
        boolean or floating point. NaN counts as no signal. Not modified.
    axis : int, optional
        The depth axis (default 0). Other axes are kept in order.
    progress : callable, optional
        ``progress(done, total)`` called between z-chunks; may raise
        :class:`~viewer_plugin.kernels.Cancelled`.

    Returns
    -------
    BrightestPoint
        ``values`` in the input dtype and ``depth`` (int32 slice index), both
        of the stack's shape without *axis*. Ties go to the smallest index,
        as :func:`numpy.argmax`; a ray of only NaN gives NaN and index 0.

    Raises
    ------
    ParameterError
        For fewer than 3 dimensions, an empty axis, a non-numeric dtype or an
        axis out of range.

    References
    ----------
    .. [1] numpy.argmax documentation: the first occurrence of the maximum
       is returned.

    Examples
    --------
    >>> import numpy as np
    >>> stack = np.array([[[1, 5]], [[3, 5]], [[2, 0]]], dtype=np.uint8)
    >>> result = brightest_point(stack)
    >>> result.values
    array([[3, 5]], dtype=uint8)
    >>> result.depth
    array([[1, 0]], dtype=int32)
    """
    v, _ = _depth_view(stack, axis)
    vals, idx = _fold_brightest(v, progress)
    depth = np.maximum(idx, 0).astype(np.int32, copy=False)
    values = vals if vals.dtype == v.dtype else vals.astype(v.dtype)
    return BrightestPoint(values=values, depth=depth)


# --- depth-coded projection -----------------------------------------------------

def _finish_colour(vals: np.ndarray, depth: np.ndarray, lo: float, scale: float, gamma: float,
                   d_range: tuple, lut: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(brightness, rgb) float32 from the maximum and the depth of each pixel."""
    bright = np.empty(depth.shape, np.float32)
    rgb = np.empty(depth.shape + (3,), np.float32)
    d0, d1 = d_range
    with _KERNEL_LOCK:
        nb.finish_colour(_rows(vals), _rows(depth), lo, scale, gamma, d0, d1 - d0, lut,
                         _rows(bright), _rows(rgb, 2))
    return bright, rgb


def _coded_brightest(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                     d_range: tuple, lut: np.ndarray, progress: Progress) -> tuple:
    """(depth_um, brightness, rgb) of the "brightest" method."""
    vals, idx = _fold_brightest(v, progress)
    depth = np.empty(vals.shape, np.float32)
    with _KERNEL_LOCK:
        nb.finish_depth_index(_rows(vals), _rows(idx), lo, z_step, _rows(depth))
    del idx
    return (depth, *_finish_colour(vals, depth, lo, scale, gamma, d_range, lut))


def _weighted_depth(v: Any, lo: float, scale: float, z_step: float,
                    progress: Progress) -> tuple[np.ndarray, np.ndarray]:
    """(maximum, intensity-weighted mean depth in µm); the float64 sums die on return."""
    others = v.shape[1:]
    vals = _initial_values(others, kernel_dtype(v.dtype))
    sum_u = np.zeros(others, np.float64)
    sum_uz = np.zeros(others, np.float64)

    def fold(block: np.ndarray, z0: int, index: tuple) -> None:
        nb.weighted_update(block, z0, lo, scale, vals[index], sum_u[index], sum_uz[index])

    with _KERNEL_LOCK:
        fold_chunks(v, fold, progress=progress)
        depth = np.empty(others, np.float32)
        nb.finish_depth_sums(_rows(sum_u), _rows(sum_uz), z_step, _rows(depth))
    return vals, depth


def _coded_weighted(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                    d_range: tuple, lut: np.ndarray, progress: Progress) -> tuple:
    """(depth_um, brightness, rgb) of the "weighted" method."""
    # the sums are freed before the colour image is allocated: lower peak memory
    vals, depth = _weighted_depth(v, lo, scale, z_step, progress)
    return (depth, *_finish_colour(vals, depth, lo, scale, gamma, d_range, lut))


def _coded_tinted(v: Any, lo: float, scale: float, gamma: float, z_step: float,
                  colours: np.ndarray, progress: Progress) -> tuple:
    """(depth_um, brightness, rgb) of the tinted method; rgb = max_z colour_z * u_z**gamma.

    rgb is a (..., rows, cols, 3) view of the channel-planar state: no copy.
    """
    others = v.shape[1:]
    vals = _initial_values(others, kernel_dtype(v.dtype))
    idx = np.full(others, -1, _index_dtype(v.shape[0]))
    tint = np.zeros(others[:-2] + (3,) + others[-2:], np.float32)
    # colour * u**g == (colour**(1/g) * u)**g, so gamma is applied once at the end
    pre = np.ascontiguousarray(colours ** (1.0 / gamma))

    def fold(block: np.ndarray, z0: int, index: tuple) -> None:
        nb.tinted_update(block, z0, lo, scale, pre, vals[index], idx[index], tint[index])

    with _KERNEL_LOCK:
        fold_chunks(v, fold, progress=progress)
        depth = np.empty(others, np.float32)
        bright = np.empty(others, np.float32)
        nb.finish_depth_index(_rows(vals), _rows(idx), lo, z_step, _rows(depth))
        nb.finish_brightness(_rows(vals), lo, scale, gamma, _rows(bright))
    if gamma != 1.0:
        np.power(tint, np.float32(gamma), out=tint)
    return depth, bright, np.moveaxis(tint, -3, -1)


def depth_coded_projection(
    stack: Any,
    *,
    z_step: float = 1.0,
    method: str = "brightest",
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
    z_step : float, optional
        Slice spacing in µm (> 0). Depths are ``index * z_step`` from the
        first slice along *axis*.
    method : {"brightest", "weighted", "tinted"}, optional
        How each pixel's depth and colour are chosen:

        * "brightest": the depth of the brightest voxel on the ray;
        * "weighted": the intensity-weighted mean depth along the ray, with
          weights u = clip((I - lo) / (hi - lo), 0, 1); smoother on thick
          fibres, but a pixel where two fibres at different depths cross
          gets a colour between theirs;
        * "tinted": every slice coloured by its own depth and scaled by its
          own u ** gamma, then the channel-wise maximum over slices: fibres
          crossing at different depths both stay visible. ``depth_um`` is
          then the depth of the brightest voxel.

        For "brightest" and "weighted", ``rgb = colour(depth) * brightness``
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
        ``progress(done, total)`` between z-chunks; may raise Cancelled.

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
    v, n = _depth_view(stack, axis)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    method = check_choice(method, name="method", choices=METHODS)
    lut = resolve_lut(cmap)
    gamma = check_number(gamma, name="gamma", low=0.0, low_open=True)
    d_range = _resolve_depth_range(depth_range, n, z_step)
    lo, hi = _resolve_clim(clim, v)
    if clim is None and method == "weighted":
        # background voxels all along the ray would pull every depth to mid-stack
        lo = max(lo, background_floor(v))
        hi = hi if hi > lo else lo + max(1.0, abs(lo)) * 1e-6
    scale = 1.0 / (hi - lo)
    if method == "tinted":
        colours = depth_colours(n, z_step=z_step, cmap=lut, depth_range=d_range)
        depth, brightness, rgb = _coded_tinted(v, lo, scale, gamma, z_step, colours, progress)
    else:
        reduce = _coded_brightest if method == "brightest" else _coded_weighted
        depth, brightness, rgb = reduce(v, lo, scale, gamma, z_step, d_range, lut, progress)
    return DepthCodedProjection(
        rgb=rgb, depth_um=depth, brightness=brightness, depth_range=d_range, lut=lut,
        clim=(lo, hi), method=method, gamma=gamma, z_step=z_step,
    )


def display_limits(stack: Any, *, axis: int = 0) -> tuple[float, float]:
    """Default display limits of the projections: the 0.1 and 99.9 percentiles.

    The same limits ``clim=None`` gives in :func:`depth_coded_projection`
    (methods "brightest" and "tinted") and :func:`blended_projection`; pass
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
    v, _ = _depth_view(stack, axis)
    return estimate_clim(v, CLIM_PERCENTILES)


def depth_colours(
    n_slices: int,
    *,
    z_step: float = 1.0,
    cmap: Any = "viridis",
    depth_range: Optional[tuple[float, float]] = None,
) -> np.ndarray:
    """Colour of every slice, as the depth-coded projections use it.

    Slice ``z`` sits at depth ``z * z_step`` µm; its colour is the colour
    table's entry for ``(depth - d0) / (d1 - d0)`` clipped to [0, 1] (entry
    ``floor(t * N)``, matplotlib's rule). These are the colours of
    ``depth_coded_projection(method="tinted")`` (before gamma) and of
    ``blended_projection(cmap=...)``; a side view of a blended projection,
    whose rays run at one depth, is its grey image times these colours.

    Parameters
    ----------
    n_slices : int
        Number of slices (>= 1).
    z_step : float, optional
        Slice spacing in µm (> 0).
    cmap : str, matplotlib Colormap or array of shape (N, 3), optional
        Colour table (default "viridis").
    depth_range : (float, float), optional
        (d0, d1) in µm; default the first to the last slice.

    Returns
    -------
    ndarray of float64, shape (n_slices, 3)
        RGB in [0, 1].

    Raises
    ------
    ParameterError
        For n_slices < 1, z_step <= 0, an unknown colour table or d1 <= d0.

    References
    ----------
    .. [1] matplotlib documentation, ``Colormap.__call__`` (lookup of a
       position in [0, 1]).

    Examples
    --------
    >>> depth_colours(3, z_step=2.0, cmap=np.array([[1.0, 0, 0], [0, 0, 1.0]]))
    array([[1., 0., 0.],
           [0., 0., 1.],
           [0., 0., 1.]])
    """
    n = check_int(n_slices, name="n_slices", low=1)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    lut = resolve_lut(cmap)
    return slice_colours(lut, n, z_step, _resolve_depth_range(depth_range, n, z_step))


# --- blended (emission-absorption) projection ------------------------------------

def _blend_tables(kdtype: np.dtype, lo: float, hi: float, kappa: float) -> tuple:
    """Per-integer-value ``a * u`` and ``1 - a`` for uint8/uint16 input (float64)."""
    x = np.arange(2 ** (8 * kdtype.itemsize), dtype=np.float64)
    u = np.clip((x - lo) / (hi - lo), 0.0, 1.0)
    return -np.expm1(-kappa * u) * u, np.exp(-kappa * u)


def _blend_fold(v: Any, lo: float, hi: float, kappa: float, reverse: bool,
                colours: Optional[np.ndarray], progress: Progress) -> np.ndarray:
    """Composited colour over all chunks: float64 grey, or planar float32 RGB if *colours*.

    The RGB accumulators are float32 (each step adds at most 1 to a sum that
    stays in [0, 1]: rounding stays near 1e-7 per slice) to keep the extra
    memory of the colour variant within a quarter of a 16-bit stack.
    """
    others = v.shape[1:]
    kdtype = kernel_dtype(v.dtype)
    rgb_shape = others[:-2] + (3,) + others[-2:]
    colour = (np.zeros(others, np.float64) if colours is None
              else np.zeros(rgb_shape, np.float32))
    trans = np.ones(others, np.float64)
    tables = _blend_tables(kdtype, lo, hi, kappa) if kdtype.kind == "u" else None
    scale = 1.0 / (hi - lo)

    def fold(block: np.ndarray, z0: int, index: tuple) -> None:
        c, t = colour[index], trans[index]
        if colours is None and tables is not None:
            nb.blend_update_lut(block, *tables, reverse, c, t)
        elif colours is None:
            nb.blend_update_float(block, lo, scale, kappa, reverse, c, t)
        elif tables is not None:
            nb.blend_rgb_update_lut(block, z0, *tables, reverse, colours, c, t)
        else:
            nb.blend_rgb_update_float(block, z0, lo, scale, kappa, reverse, colours, c, t)

    with _KERNEL_LOCK:
        fold_chunks(v, fold, reverse=reverse, progress=progress)
    return colour


def blended_projection(
    stack: Any,
    *,
    z_step: float = 1.0,
    density: Optional[float] = None,
    clim: Optional[tuple[float, float]] = None,
    view: str = "top",
    cmap: Any = None,
    axis: int = 0,
    progress: Progress = None,
) -> np.ndarray:
    """Emission-absorption projection: bright structures hide what lies behind.

    Each voxel emits its normalised intensity ``u = clip((I - lo) / (hi -
    lo), 0, 1)`` and absorbs with extinction ``density * u`` per µm. A slice
    of thickness *z_step* then has opacity ``a = 1 - exp(-density * u *
    z_step)`` and colour u, composited front to back: ``C += T * a * u``,
    ``T *= 1 - a``. A homogeneous slab of value u and thickness L gives
    exactly ``u * (1 - exp(-density * u * L))`` whatever the number of slices.

    Parameters
    ----------
    stack : array_like or dask array
        Stack with at least 3 dimensions; integer, boolean or floating point.
        NaN counts as no signal. Not modified.
    z_step : float, optional
        Slice thickness in µm (> 0).
    density : float, optional
        Extinction per µm of a fully bright voxel (>= 0). Default ``None``:
        ``DEFAULT_OPTICAL_DEPTH / (n * z_step)`` = 10 / stack depth, i.e. a
        fully bright column through the whole stack would let through e^-10
        of the light behind it, and a fully bright structure one tenth of
        the stack deep is 63 % opaque (1 - 1/e). Small densities approach a
        (squared-intensity) sum projection; large ones show only the first
        bright structure met from the viewing side.
    clim : (float, float), optional
        (lo, hi) display limits; default the 0.1 and 99.9 percentiles,
        estimated from a strided subsample of the stack.
    view : {"top", "bottom"}, optional
        Composite from slice 0 ("top") or from the last slice ("bottom").
    cmap : str, Colormap or (N, 3) array, optional
        When given, each slice emits ``u * colour(depth)`` (depth from the
        first to the last slice through the colour table, as in
        :func:`depth_coded_projection`) and the result is RGB.
    axis : int, optional
        The depth axis (default 0); other axes are kept.
    progress : callable, optional
        ``progress(done, total)`` between z-chunks; may raise Cancelled.

    Returns
    -------
    ndarray of float32
        The composited image in [0, 1], the stack's shape without *axis*;
        with *cmap*, an extra last axis of 3 (RGB), a strided view of
        channel-planar storage (no copy).

    Raises
    ------
    ParameterError
        For a bad stack, z_step <= 0, density < 0, clim with hi <= lo, an
        unknown view or colour table.

    Notes
    -----
    The result is a rendering, not a measurement: the "absorption" is a
    display device derived from the signal itself, not the sample's real
    attenuation. 8- and 16-bit input goes through a table of (a * u, 1 - a)
    per input value.

    References
    ----------
    .. [1] N. Max, "Optical models for direct volume rendering", IEEE TVCG
       1(2):99-108, 1995, doi:10.1109/2945.468400.
    .. [2] T. Porter, T. Duff, "Compositing digital images", Computer
       Graphics 18(3):253-259, 1984, doi:10.1145/964965.808606.
    .. [3] M. Levoy, "Display of surfaces from volume data", IEEE CG&A
       8(3):29-37, 1988, doi:10.1109/38.511.

    Examples
    --------
    >>> import numpy as np
    >>> slab = np.full((4, 1, 1), 1.0)
    >>> out = blended_projection(slab, z_step=0.5, density=1.0, clim=(0, 1))
    >>> bool(np.isclose(out[0, 0], 1 - np.exp(-2.0)))
    True
    """
    v, n = _depth_view(stack, axis)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    if density is None:
        density = DEFAULT_OPTICAL_DEPTH / (n * z_step)
    density = check_number(density, name="density", low=0.0)
    view = check_choice(view, name="view", choices=VIEWS)
    lut = None if cmap is None else resolve_lut(cmap)
    lo, hi = _resolve_clim(clim, v)
    colours = None
    if lut is not None:
        colours = depth_colours(n, z_step=z_step, cmap=lut)
    colour = _blend_fold(v, lo, hi, density * z_step, view == "bottom", colours, progress)
    if colours is not None:
        return np.moveaxis(colour, -3, -1)  # a view of the planar float32 state
    return colour.astype(np.float32)


# --- compile ahead -----------------------------------------------------------

def warm_up() -> None:
    """Compile (or load from numba's disk cache) the kernels for common dtypes.

    Runs every projection on tiny uint16, uint8 and float32 stacks. Takes
    tens of seconds the very first time on a machine and well under a second
    once cached; widgets call it in a background thread at start-up.

    Returns
    -------
    None

    Raises
    ------
    Exception
        Only if numba cannot compile on this machine (a broken installation);
        never for user input.

    References
    ----------
    .. [1] numba documentation, "Cache compiled functions" (``cache=True``).

    Examples
    --------
    >>> warm_up()
    """
    for dtype in (np.uint16, np.uint8, np.float32):  # the commonest microscopy dtype first
        tiny = np.zeros((3, 4, 8), dtype)
        tiny[1, 1, 1] = 1
        brightest_point(tiny)
        for method in METHODS:
            depth_coded_projection(tiny, method=method, clim=(0, 1))
        blended_projection(tiny, clim=(0, 1))
        blended_projection(tiny, clim=(0, 1), cmap="viridis")
