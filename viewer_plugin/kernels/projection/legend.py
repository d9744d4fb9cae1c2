"""The colour bar ("depth legend") of a depth-coded projection.

Widgets and exports draw the same legend from one :class:`DepthLegend`: an
RGB image of the colour table plus tick positions and labels in µm at "nice"
1-2-5 steps.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..._shared.validation import check_choice, check_int, check_interval, fail
from .colour import lut_index, resolve_lut

__all__ = ["DepthLegend", "depth_legend", "nice_ticks", "ORIENTATIONS"]

#: Layouts of the legend image.
ORIENTATIONS = ("horizontal", "vertical")


@dataclass(frozen=True, eq=False)
class DepthLegend:
    """A colour bar for depth in µm.

    Attributes
    ----------
    image : ndarray of uint8, shape (height, n_colours, 3) or (n_colours, height, 3)
        The colour table drawn as a bar: horizontal bars run from d0 (left)
        to d1 (right); vertical bars from d0 (top row, the first slice) to
        d1 (bottom row), like depth in a side view.
    depth_range : tuple of float
        (d0, d1) in µm at the two ends of the bar.
    tick_depths_um : tuple of float
        Tick values in µm (multiples of a 1, 2 or 5 times a power of ten).
    tick_labels : tuple of str
        The tick values as text, without unit (see ``unit``).
    tick_positions : tuple of float
        Where each tick falls along the long side of ``image``, in pixels
        from its d0 edge (0 = the d0 edge, n_colours = the d1 edge).
    tick_fractions : tuple of float
        The same positions as fractions of the bar length, in [0, 1].
    orientation : str
        "horizontal" or "vertical".
    lut : ndarray of float64, shape (N, 3)
        The colour table the bar was drawn from.
    unit : str
        "µm".
    title : str
        "depth (µm)".
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


def depth_legend(
    result_or_depth_range: Any,
    *,
    cmap: Any = None,
    n_colours: int = 256,
    height: int = 16,
    orientation: str = "horizontal",
) -> DepthLegend:
    """Build the colour bar of a depth-coded projection.

    Parameters
    ----------
    result_or_depth_range : DepthCodedProjection or (float, float)
        A :func:`~viewer_plugin.kernels.depth_coded_projection` result (its
        ``lut`` and ``depth_range`` are used) or an explicit (d0, d1) in µm.
    cmap : str, Colormap or (N, 3) array, optional
        Colour table; default the result's ``lut``, or "viridis" for an
        explicit range. When given it replaces the result's table.
    n_colours : int, optional
        Length of the bar in pixels (>= 2); colour cell i shows the table
        entry at position ``(i + 0.5) / n_colours``.
    height : int, optional
        Thickness of the bar in pixels (>= 1), across the colour direction.
    orientation : {"horizontal", "vertical"}, optional
        Horizontal: d0 at the left. Vertical: d0 at the top.

    Returns
    -------
    DepthLegend
        ``image`` (uint8 RGB), ``tick_depths_um``, ``tick_labels``,
        ``tick_positions`` (pixels from the d0 edge), ``tick_fractions``,
        ``depth_range``, ``orientation``, ``lut``, ``unit``, ``title``.

    Raises
    ------
    ParameterError
        For a range whose d1 <= d0, an unknown colour table or orientation,
        or n_colours / height too small.

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
    """
    lut = None
    if hasattr(result_or_depth_range, "depth_range") and hasattr(result_or_depth_range, "lut"):
        d_range = check_interval(tuple(result_or_depth_range.depth_range), name="depth_range",
                                 allow_none=False)
        lut = np.asarray(result_or_depth_range.lut, dtype=np.float64)
    else:
        d_range = check_interval(result_or_depth_range, name="result_or_depth_range",
                                 allow_none=False)
    if cmap is not None or lut is None:
        lut = resolve_lut("viridis" if cmap is None else cmap)
    n_colours = check_int(n_colours, name="n_colours", low=2)
    height = check_int(height, name="height", low=1)
    orientation = check_choice(orientation, name="orientation", choices=ORIENTATIONS)
    d0, d1 = d_range
    centres = (np.arange(n_colours) + 0.5) / n_colours
    bar = np.rint(lut[lut_index(centres, lut.shape[0])] * 255).astype(np.uint8)
    if orientation == "horizontal":
        image = np.broadcast_to(bar[None, :, :], (height, n_colours, 3)).copy()
    else:
        image = np.broadcast_to(bar[:, None, :], (n_colours, height, 3)).copy()
    ticks, decimals = nice_ticks(d0, d1)
    if not ticks:
        fail("result_or_depth_range", "a range containing at least one tick", d_range)
    fractions = tuple((t - d0) / (d1 - d0) for t in ticks)
    return DepthLegend(
        image=image, depth_range=(d0, d1), tick_depths_um=tuple(ticks),
        tick_labels=tuple(f"{t:.{decimals}f}" for t in ticks),
        tick_positions=tuple(f * n_colours for f in fractions), tick_fractions=fractions,
        orientation=orientation, lut=lut,
    )
