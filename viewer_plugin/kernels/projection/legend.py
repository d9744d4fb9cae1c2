"""The key ("depth legend") of a depth-coded projection.

Widgets and exports draw the same key from one :class:`DepthLegend`: an RGB
image plus tick positions and labels in µm at "nice" 1-2-5 steps. With
``brightness_steps`` the key is two-dimensional: depth along one axis,
brightness (the signal between the display limits) along the other, each
pixel painted by the projection's own colouring step, so it shows exactly
what the image shows for a voxel at that depth and brightness.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Optional

import numpy as np

from ..._shared.validation import check_choice, check_int, check_interval, fail
from . import _finish as fin
from ._common import KERNEL_LOCK
from .colour import DEFAULT_CMAP, lut_index, resolve_lut

__all__ = ["DepthLegend", "depth_legend", "nice_ticks", "ORIENTATIONS"]

#: Layouts of the legend image.
ORIENTATIONS = ("horizontal", "vertical")


@dataclass(frozen=True, eq=False)
class DepthLegend:
    """The key of a depth-coded image: a colour bar of depth in µm, or a 2-D key.

    Attributes
    ----------
    image : ndarray of uint8, shape (across, n_colours, 3) or (n_colours, across, 3)
        Horizontal keys run from d0 (left) to d1 (right); vertical keys from
        d0 (top row, the first slice) to d1 (bottom row), like depth in a
        side view. *across* is ``height`` rows of the same colours for a
        colour bar, or one row (column, when vertical) per entry of
        ``brightness_levels``, darkest first, for a 2-D key.
    depth_range : tuple of float
        (d0, d1) in µm at the two ends of the depth axis.
    tick_depths_um : tuple of float
        Tick values in µm (multiples of a 1, 2 or 5 times a power of ten).
    tick_labels : tuple of str
        The tick values as text, without unit (see ``unit``).
    tick_positions : tuple of float
        Where each tick falls along the depth axis of ``image``, in pixels
        from its d0 edge (0 = the d0 edge, n_colours = the d1 edge).
    tick_fractions : tuple of float
        The same positions as fractions of the depth axis, in [0, 1].
    orientation : str
        "horizontal" or "vertical".
    lut : ndarray of float64, shape (N, 3)
        The colour table the key was drawn from.
    unit : str
        "µm".
    title : str
        "depth (µm)".
    brightness_levels : tuple of float
        2-D key: the signal of each row (column) across the key, as a
        fraction of the display range ``(I - lo) / (hi - lo)``, from 0 to 1;
        the pixel is ``colour(depth) * level ** gamma``. Empty for a colour bar.
    brightness_tick_fractions : tuple of float
        Ticks across the key, as fractions of the display range.
    brightness_tick_labels : tuple of str
        Their labels: signal values in input units when the key was made
        from a result (its ``clim``), else fractions of the display range.
    brightness_title : str
        What the brightness axis shows ("" for a colour bar).
    gamma : float
        The brightness exponent the key was painted with.
    """

    image: np.ndarray
    depth_range: tuple[float, float]
    tick_depths_um: tuple[float, ...]
    tick_labels: tuple[str, ...]
    tick_positions: tuple[float, ...]
    tick_fractions: tuple[float, ...]
    orientation: str
    lut: np.ndarray
    unit: str = "µm"
    title: str = "depth (µm)"
    brightness_levels: tuple[float, ...] = ()
    brightness_tick_fractions: tuple[float, ...] = ()
    brightness_tick_labels: tuple[str, ...] = ()
    brightness_title: str = ""
    gamma: float = 1.0


def nice_ticks(low: float, high: float, *, max_ticks: int = 6) -> tuple[list[float], int]:
    """Tick values at 1-2-5 steps covering [low, high], and their decimals.

    The step is the smallest of 1, 2, 5 (times a power of ten) giving at
    most *max_ticks* ticks inside the interval ("nice numbers", common
    practice for axis labelling).

    Parameters
    ----------
    low, high : float
        The interval, ``high > low``.
    max_ticks : int, optional
        Largest number of ticks (>= 2).

    Returns
    -------
    ticks : list of float
        Multiples of the step inside [low, high] (within rounding).
    decimals : int
        Digits after the decimal point needed to print the step.

    Examples
    --------
    >>> nice_ticks(0.0, 63.0)
    ([0.0, 20.0, 40.0, 60.0], 0)
    >>> nice_ticks(0.0, 1.5)
    ([0.0, 0.5, 1.0, 1.5], 1)
    """
    span = high - low
    raw = span / max(1, max_ticks - 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = power * 10.0
    for factor in (1.0, 2.0, 5.0):
        candidate = factor * power
        count = math.floor(high / candidate + 1e-9) - math.ceil(low / candidate - 1e-9) + 1
        if count <= max_ticks:
            step = candidate
            break
    first = math.ceil(low / step - 1e-9)
    last = math.floor(high / step + 1e-9)
    ticks = [round(k * step, 12) + 0.0 for k in range(first, last + 1)]
    decimals = max(0, -math.floor(math.log10(step) + 1e-9))
    return ticks, decimals


def _key_pixels(lut: np.ndarray, d_range: tuple, n_colours: int, levels: np.ndarray,
                gamma: float) -> np.ndarray:
    """(levels, n_colours, 3) uint8: the projection's own colouring of (level, depth cell centre)."""
    d0, d1 = d_range
    depth = (d0 + (np.arange(n_colours) + 0.5) / n_colours * (d1 - d0)).astype(np.float32)
    depth = np.ascontiguousarray(np.broadcast_to(depth, (levels.size, n_colours)))
    vals = np.ascontiguousarray(np.broadcast_to(levels[:, None], depth.shape))
    bright = np.empty(depth.shape, np.float32)
    rgb = np.empty(depth.shape + (3,), np.float32)
    with KERNEL_LOCK:  # signal given as a fraction of the display range: lo 0, scale 1
        fin.finish_colour(vals, depth, 0.0, 1.0, gamma, d0, d1 - d0, lut, np.empty(0, np.float32),
                         bright, rgb)
    return np.rint(rgb * 255.0).astype(np.uint8)


def _brightness_ticks(clim: Any) -> tuple[tuple[float, ...], tuple[str, ...], str]:
    """Ticks across a 2-D key: signal values of the display range, or its fractions."""
    if clim is None:
        return (0.0, 0.5, 1.0), ("0", "0.5", "1"), "brightness (fraction of the display range)"
    lo, hi = (float(c) for c in clim)
    ticks, decimals = nice_ticks(lo, hi, max_ticks=4)
    fractions = tuple((t - lo) / (hi - lo) for t in ticks)
    return fractions, tuple(f"{t:.{decimals}f}" for t in ticks), "signal (display range)"


def depth_legend(
    result_or_depth_range: Any,
    *,
    cmap: Any = None,
    n_colours: int = 256,
    height: int = 16,
    orientation: str = "horizontal",
    brightness_steps: Optional[int] = None,
) -> DepthLegend:
    """Build the key of a depth-coded projection: a colour bar, or depth × brightness.

    Parameters
    ----------
    result_or_depth_range : DepthCodedProjection or (float, float)
        A :func:`~viewer_plugin.kernels.depth_coded_projection` result (its
        ``lut``, ``depth_range``, ``clim`` and ``gamma`` are used) or an
        explicit (d0, d1) in µm.
    cmap : str, Colormap or (N, 3) array, optional
        Colour table; default the result's ``lut``, or "CET-I1" (the default
        of the projections) for an explicit range. When given it replaces
        the result's table.
    n_colours : int, optional
        Length of the depth axis in pixels (>= 2); cell i shows the depth at
        position ``(i + 0.5) / n_colours`` of the range.
    height : int, optional
        Thickness of a colour bar in pixels (>= 1), across the depth axis.
        Not used by a 2-D key, whose thickness is ``brightness_steps``.
    orientation : {"horizontal", "vertical"}, optional
        Horizontal: d0 at the left. Vertical: d0 at the top.
    brightness_steps : int, optional
        Make a 2-D key with this many brightness levels (>= 2), evenly
        spaced from 0 to 1 of the display range: pixel (level b, depth d)
        is what the projection renders for a voxel at depth d whose signal
        lies at fraction b of the display range, ``colour(d) * b ** gamma``
        (computed by the projection's own colouring step). Default: a 1-D
        colour bar.

    Returns
    -------
    DepthLegend
        ``image`` (uint8 RGB), depth ticks (``tick_depths_um``,
        ``tick_labels``, ``tick_positions`` in pixels from the d0 edge,
        ``tick_fractions``), ``depth_range``, ``orientation``, ``lut``,
        ``unit``, ``title``; for a 2-D key also ``brightness_levels``,
        ``brightness_tick_fractions``, ``brightness_tick_labels`` (signal in
        input units from the result's ``clim``), ``brightness_title``, ``gamma``.

    Raises
    ------
    ParameterError
        For a range whose d1 <= d0, an unknown colour table or orientation,
        or n_colours / height / brightness_steps too small.

    References
    ----------
    .. [1] matplotlib documentation, ``Colormap.__call__`` (entry
       ``floor(t * N)`` for position t).
    .. [2] P. Kovesi, "Good colour maps: how to design them",
       arXiv:1509.03700, 2015.

    Examples
    --------
    >>> legend = depth_legend((0.0, 63.0), cmap="viridis", height=4)
    >>> legend.image.shape, legend.image.dtype
    ((4, 256, 3), dtype('uint8'))
    >>> legend.tick_labels
    ('0', '20', '40', '60')
    >>> key = depth_legend((0.0, 63.0), brightness_steps=5, orientation="vertical")
    >>> key.image.shape, key.brightness_levels
    ((256, 5, 3), (0.0, 0.25, 0.5, 0.75, 1.0))
    """
    source = result_or_depth_range
    lut, clim, gamma = None, None, 1.0
    if hasattr(source, "depth_range") and hasattr(source, "lut"):
        d_range = check_interval(tuple(source.depth_range), name="depth_range", allow_none=False)
        lut = np.asarray(source.lut, dtype=np.float64)
        clim, gamma = getattr(source, "clim", None), float(getattr(source, "gamma", 1.0))
    else:
        d_range = check_interval(source, name="result_or_depth_range", allow_none=False)
    if cmap is not None or lut is None:
        lut = resolve_lut(DEFAULT_CMAP if cmap is None else cmap)
    n_colours = check_int(n_colours, name="n_colours", low=2)
    height = check_int(height, name="height", low=1)
    orientation = check_choice(orientation, name="orientation", choices=ORIENTATIONS)
    d0, d1 = d_range
    ticks, decimals = nice_ticks(d0, d1)
    if not ticks:
        fail("result_or_depth_range", "a range containing at least one tick", d_range)
    fractions = tuple((t - d0) / (d1 - d0) for t in ticks)
    extra: dict[str, Any] = {}
    if brightness_steps is None:
        centres = (np.arange(n_colours) + 0.5) / n_colours
        bar = np.rint(lut[lut_index(centres, lut.shape[0])] * 255).astype(np.uint8)
        image = np.broadcast_to(bar[None, :, :], (height, n_colours, 3)).copy()
    else:
        steps = check_int(brightness_steps, name="brightness_steps", low=2)
        levels = np.linspace(0.0, 1.0, steps)
        image = _key_pixels(lut, d_range, n_colours, levels, gamma)
        b_fractions, b_labels, b_title = _brightness_ticks(clim)
        extra = dict(brightness_levels=tuple(float(b) for b in levels),
                     brightness_tick_fractions=b_fractions, brightness_tick_labels=b_labels,
                     brightness_title=b_title, gamma=gamma)
    if orientation == "vertical":
        image = np.ascontiguousarray(np.swapaxes(image, 0, 1))
    return DepthLegend(
        image=image, depth_range=(d0, d1), tick_depths_um=tuple(ticks),
        tick_labels=tuple(f"{t:.{decimals}f}" for t in ticks),
        tick_positions=tuple(f * n_colours for f in fractions), tick_fractions=fractions,
        orientation=orientation, lut=lut, **extra,
    )
