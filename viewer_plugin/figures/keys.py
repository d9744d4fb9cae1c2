"""The keys and scale bars of figures, docks and movies: drawn into any matplotlib axes.

:func:`draw_colour_bar` draws a key of depth in µm (a colour bar, or depth x
brightness) and :func:`draw_scale_bar` a scale bar in µm; the figures
(:mod:`.panels`), the dock legends (:func:`colour_bar_image`) and the frames
of movies use them, so the screen and the paper show identical ticks.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._shared.validation import check_number, fail

__all__ = ["KEY_STEPS", "LegendParts", "colour_bar_image", "draw_colour_bar", "draw_scale_bar",
           "legend_parts", "nice_label", "nice_length"]

#: Brightness levels across the key of a dock (depth x brightness).
KEY_STEPS = 64


@dataclass(frozen=True)
class LegendParts:
    """The pieces of a depth legend (colour bar or 2-D key) used for drawing.

    Attributes
    ----------
    image : ndarray, float32, shape (rows, N, 3)
        The key from shallow (column 0) to deep (column N - 1), values in
        [0, 1]; for a 2-D key, row k has brightness ``levels[k]`` (darkest first).
    positions : ndarray of float
        Tick positions as fractions of the table length, 0 = shallow end, 1 = deep end.
    labels : tuple of str
        Tick labels in µm.
    depth_range : tuple of float
        (shallow, deep) depth in µm at the two ends of the table.
    levels : ndarray of float
        2-D key: the brightness of each row as a fraction of the display
        range, increasing; empty for a colour bar.
    level_ticks : ndarray of float
        2-D key: tick positions across the key, as fractions of the display range.
    level_labels : tuple of str
        Their labels (signal in input units, or fractions).
    level_title : str
        What the brightness axis shows.
    """

    image: np.ndarray
    positions: np.ndarray
    labels: tuple[str, ...]
    depth_range: tuple[float, float]
    levels: np.ndarray = field(default_factory=lambda: np.zeros(0))
    level_ticks: np.ndarray = field(default_factory=lambda: np.zeros(0))
    level_labels: tuple[str, ...] = ()
    level_title: str = ""

    @property
    def two_dimensional(self) -> bool:
        """True for a depth x brightness key."""
        return self.levels.size > 0

def legend_parts(legend: Any) -> LegendParts:
    """Read a :class:`~viewer_plugin.kernels.DepthLegend` for drawing.

    Parameters
    ----------
    legend : DepthLegend
        From :func:`viewer_plugin.kernels.depth_legend` (uint8 ``image``,
        ``tick_fractions``, ``tick_labels`` in µm, ``depth_range``, ``orientation``).

    Returns
    -------
    LegendParts
        The table as a horizontal float32 image in [0, 1] (shallow at column 0),
        tick positions as fractions 0..1 from the shallow end, labels, depth range.

    Raises
    ------
    ParameterError
        When *legend* is not a depth legend.

    Examples
    --------
    >>> from viewer_plugin.kernels import depth_legend
    >>> parts = legend_parts(depth_legend((0.0, 63.0), cmap="viridis"))
    >>> parts.labels, parts.image.dtype
    (('0', '20', '40', '60'), dtype('float32'))
    """
    needed = ("image", "tick_fractions", "tick_labels", "depth_range")
    missing = [name for name in needed if not hasattr(legend, name)]
    if missing:
        fail("legend", "a depth legend from depth_legend()", f"<{type(legend).__name__} without "
             f"{', '.join(missing)}>")
    image = np.asarray(legend.image)
    image = image.astype(np.float32) / 255.0 if image.dtype.kind in "ui" else image.astype(np.float32)
    if getattr(legend, "orientation", "horizontal") == "vertical":
        image = np.swapaxes(image, 0, 1)
    return LegendParts(image[..., :3], np.asarray(legend.tick_fractions, dtype=np.float64),
                       tuple(str(t) for t in legend.tick_labels),
                       (float(legend.depth_range[0]), float(legend.depth_range[1])),
                       np.asarray(getattr(legend, "brightness_levels", ()), dtype=np.float64),
                       np.asarray(getattr(legend, "brightness_tick_fractions", ()), np.float64),
                       tuple(getattr(legend, "brightness_tick_labels", ())),
                       str(getattr(legend, "brightness_title", "")))


def nice_length(span: float, *, fraction: float = 0.2) -> float:
    """The longest 1-2-5 length (1, 2, 5 times a power of ten) not above *fraction* of *span*.

    Used for scale bars (a bar of at most a fifth of the width: common practice).

    Examples
    --------
    >>> nice_length(300.0)
    50.0
    >>> nice_length(38.4)
    5.0
    """
    span = check_number(span, name="span", low=0.0, low_open=True)
    target = span * fraction
    exponent = math.floor(math.log10(target))
    best = 1.0
    for step in (1.0, 2.0, 5.0, 10.0):
        if step * 10.0**exponent <= target:
            best = step
    return float(best * 10.0**exponent)


def draw_scale_bar(ax: Any, width_um: float, height_um: float, length_um: float) -> None:
    """Draw a white scale bar with its length in µm at the lower right of an image axes.

    Used by the figures here and by the frames of movies.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Axes showing the image in µm: x from 0 to *width_um*, y from
        *height_um* (bottom) to 0 (top), as ``imshow(..., extent=(0, w, h, 0))``.
    width_um, height_um : float
        Size of the image in µm.
    length_um : float
        Length of the bar in µm (e.g. :func:`nice_length` of the width).

    Returns
    -------
    None

    Examples
    --------
    >>> from matplotlib.figure import Figure
    >>> ax = Figure().add_subplot()
    >>> ax.set_xlim(0, 100); ax.set_ylim(50, 0)  # doctest: +ELLIPSIS
    (...)
    >>> draw_scale_bar(ax, 100.0, 50.0, nice_length(100.0))
    >>> ax.texts[0].get_text()
    '20 µm'
    """
    from matplotlib.patches import Rectangle

    margin = 0.05 * width_um
    thick = max(0.012 * height_um, 0.5 * 1e-3 * height_um)
    x0 = width_um - margin - length_um
    y0 = height_um - margin - thick
    ax.add_patch(Rectangle((x0, y0), length_um, thick, facecolor="white", edgecolor="none"))
    label = f"{nice_label(length_um)} \u00b5m"
    ax.text(x0 + length_um / 2.0, y0 - 0.01 * height_um, label, color="white",
            ha="center", va="bottom", fontsize=8)


def nice_label(value: float) -> str:
    """Label a length without trailing zeros (``50`` not ``50.0``)."""
    return f"{value:g}"


def _level_extent(parts: LegendParts) -> tuple[float, float]:
    """The brightness axis of a 2-D key: cell centres at the levels (fractions of the range)."""
    if not parts.two_dimensional:
        return 0.0, 1.0
    half = 0.5 / max(1, parts.levels.size - 1)
    return -half, 1.0 + half


def draw_colour_bar(ax: Any, parts: LegendParts, *, vertical: bool, colour: str = "black",
                    vector: bool = False) -> None:
    """Draw the key *parts* (a depth colour bar or the 2-D key) into *ax*, ticks in µm.

    Depth grows downward (vertical) or rightward. Used by the figures and dock
    legends here and by the depth key of movies.

    A 2-D key has brightness across: left to right (vertical key) or bottom to
    top (horizontal key), darkest first, ticked with the signal values.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        The (empty) axes of the key.
    parts : LegendParts
        From :func:`legend_parts`.
    vertical : bool
        Depth grows downward (vertical, labels on the right) or rightward
        (horizontal, labels below).
    colour : str
        Colour of the ticks, labels and frame.
    vector : bool
        Paint each cell of the key as a filled path (vector in PDF and SVG)
        instead of one raster image.

    Returns
    -------
    None
        The depth axis reads "Depth (µm)"; set another label with
        ``ax.set_xlabel`` (horizontal) or ``ax.set_ylabel`` (vertical).

    Examples
    --------
    >>> from matplotlib.figure import Figure
    >>> from viewer_plugin.kernels import depth_legend
    >>> ax = Figure().add_subplot()
    >>> draw_colour_bar(ax, legend_parts(depth_legend((0.0, 30.0))), vertical=False)
    >>> [t.get_text() for t in ax.get_xticklabels()]
    ['0', '10', '20', '30']
    """
    d0, d1 = parts.depth_range
    b0, b1 = _level_extent(parts)
    table = parts.image
    if vertical:
        _paint_table(ax, np.swapaxes(table, 0, 1), (b0, b1), (d0, d1), vector=vector)
        ax.set_xlim(b0, b1)
        ax.set_ylim(d1, d0)  # depth grows downward
        ax.yaxis.tick_right()
        ax.yaxis.set_label_position("right")
        ax.set_yticks(d0 + parts.positions * (d1 - d0), parts.labels)
        ax.set_ylabel("Depth (\u00b5m)", color=colour)
        ax.set_xticks(parts.level_ticks, parts.level_labels)
        ax.tick_params(axis="both", colors=colour, labelsize=8)
        if parts.two_dimensional:
            ax.set_xlabel("Signal", color=colour, fontsize=8)
            ax.tick_params(axis="x", labelsize=6, labelrotation=90)
    else:
        _paint_table(ax, table, (d0, d1), (b0, b1), vector=vector)
        ax.set_xlim(d0, d1)
        ax.set_ylim(b0, b1)
        ax.set_yticks(parts.level_ticks, parts.level_labels)
        ax.set_xticks(d0 + parts.positions * (d1 - d0), parts.labels)
        ax.set_xlabel("Depth (\u00b5m)", color=colour)
        ax.tick_params(axis="both", colors=colour, labelsize=8)
        if parts.two_dimensional:
            ax.set_ylabel("Signal", color=colour, fontsize=8)
            ax.tick_params(axis="y", labelsize=7)
    for spine in ax.spines.values():
        spine.set_edgecolor(colour)


def _paint_table(ax: Any, table: np.ndarray, x_range: tuple[float, float],
                 y_range: tuple[float, float], *, vector: bool) -> None:
    """Paint *table* (rows, columns, 3): row 0 at ``y_range[0]``, column 0 at ``x_range[0]``."""
    if not vector:
        ax.imshow(table, aspect="auto", extent=(*x_range, *y_range), origin="lower",
                  interpolation="nearest")
        return
    from matplotlib.collections import QuadMesh

    rows, cols = table.shape[:2]
    xs, ys = np.linspace(*x_range, cols + 1), np.linspace(*y_range, rows + 1)
    colours = np.asarray(table, dtype=np.float64).reshape(-1, 3)
    # each cell is also stroked in its own colour, a hair wide: no seams between cells in viewers
    ax.add_collection(QuadMesh(np.stack(np.meshgrid(xs, ys), axis=-1), facecolors=colours,
                               edgecolors=colours, linewidths=0.2, antialiased=False),
                      autolim=False)


def colour_bar_image(legend: Any, *, width_px: int = 260, height_px: int = 54,
                     dark: bool = True) -> np.ndarray:
    """Draw a depth key (colour bar, or depth x brightness) horizontally as an RGBA image.

    Depth runs left to right with ticks in µm; a 2-D key has brightness
    upward, ticked with the signal values of the display range.

    Parameters
    ----------
    legend : object
        The kernels' depth legend (see :func:`legend_parts`).
    width_px, height_px : int
        Size of the image in pixels.
    dark : bool
        Light text for a dark (napari default) theme.

    Returns
    -------
    ndarray of uint8, shape (height_px, width_px, 4)

    Raises
    ------
    ParameterError
        When *legend* lacks the expected fields.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    parts = legend_parts(legend)
    dpi = 100
    fig = Figure(figsize=(width_px / dpi, height_px / dpi), dpi=dpi)
    fig.patch.set_alpha(0.0)
    canvas = FigureCanvasAgg(fig)
    if parts.two_dimensional:  # room for the signal ticks at the left, depth ticks below
        left, bottom = 52 / width_px, 40 / height_px
        ax = fig.add_axes((left, bottom, 1 - left - 8 / width_px, 1 - bottom - 6 / height_px))
    else:
        ax = fig.add_axes((0.05, 0.62, 0.9, 0.33))
    draw_colour_bar(ax, parts, vertical=False, colour="#e0e0e0" if dark else "black")
    ax.yaxis.label.set_fontsize(8)
    ax.xaxis.label.set_fontsize(8)
    ax.xaxis.labelpad = 1
    canvas.draw()
    return np.asarray(canvas.buffer_rgba()).copy()
