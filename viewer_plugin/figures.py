"""Publication figures of depth-coded projections (matplotlib Agg, no pyplot, no Qt).

:func:`export_depth_figure` writes, atomically and never over an existing file
unless asked:

* the figure itself (PNG, TIFF, PDF or SVG, chosen by the file extension): the
  depth-coded image with a scale bar in µm and its two-dimensional key:
  depth in µm down, brightness (the signal between the display limits)
  across, each cell painted as the image paints a voxel at that depth and
  brightness;
* ``<figure>.json``: every parameter needed to make the figure again
  (method, colour map, depth range, contrast, gamma, z-step, voxel size,
  source file, stackdepth version, date);
* ``<figure>.methods.txt``: a methods sentence to adapt for a paper.

:func:`colour_bar_image` draws the same key as a small RGBA array for the
dock widgets, so the screen and the paper show identical ticks;
:func:`draw_scale_bar` and :func:`draw_colour_bar` draw the scale bar and the
key into any matplotlib axes (the movie frames use them too).
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from . import __version__
from ._shared.atomic import atomic_write
from ._shared.jsonio import write_json
from ._shared.validation import check_number, fail

__all__ = [
    "FigureFiles",
    "LegendParts",
    "build_depth_figure",
    "colour_bar_image",
    "draw_colour_bar",
    "draw_scale_bar",
    "export_depth_figure",
    "legend_parts",
    "methods_sentence",
    "nice_length",
]

#: File extensions accepted for figures and the matplotlib format used for each.
FIGURE_FORMATS = {".png": "png", ".tif": "tiff", ".tiff": "tiff", ".pdf": "pdf", ".svg": "svg"}

#: Brightness levels across the key of a figure or a dock (depth x brightness).
KEY_STEPS = 64

#: What each projection method shows, in the words of a methods section.
METHOD_WORDS = {
    "peak": "each pixel shows the depth of its strongest voxel along the optical axis, "
            "with brightness from that voxel's intensity",
    "weighted": "each pixel shows the intensity-weighted mean depth of the signal above the "
                "background level along the optical axis, with brightness from the maximum "
                "intensity",
    "tinted": "every slice was tinted with the colour of its depth and the tinted slices were "
              "combined by maximum-intensity projection, the display range applied after the "
              "maximum",
    "occlusion": "the stack was rendered with an emission-absorption model (nearer structures "
                 "partly hide deeper ones); this is a rendering, not a measurement",
    "max": "each pixel shows the maximum intensity along the optical axis",
}

CAVEAT = ("Brightness is relative (display contrast), not a calibrated intensity; colours give "
          "depth relative to the first slice of the stack.")


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


@dataclass(frozen=True)
class FigureFiles:
    """Paths written by :func:`export_depth_figure`."""

    figure: Path
    sidecar: Path
    methods: Path
    methods_text: str


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


def _pixel_pair(pixel_size_um: Any) -> tuple[float, float]:
    if np.ndim(pixel_size_um) == 0:
        value = check_number(pixel_size_um, name="pixel_size_um", low=0.0, low_open=True)
        return value, value
    values = list(np.ravel(pixel_size_um))
    if len(values) != 2:
        fail("pixel_size_um", "a number or a pair (y, x) in µm", pixel_size_um)
    return (check_number(values[0], name="pixel_size_um[0]", low=0.0, low_open=True),
            check_number(values[1], name="pixel_size_um[1]", low=0.0, low_open=True))


def _figure_rgb(result: Any) -> np.ndarray:
    rgb = np.asarray(getattr(result, "rgb", result))
    if rgb.ndim != 3 or rgb.shape[-1] != 3:
        fail("result.rgb", "a 2-D RGB image of shape (y, x, 3)", rgb,
             hint="pick one time point or channel first")
    return np.clip(np.nan_to_num(rgb.astype(np.float32)), 0.0, 1.0)


def _fmt(value: float) -> str:
    return f"{value:.3g}"


def methods_sentence(parameters: Mapping[str, Any], *, legend_range: Sequence[float] | None = None) -> str:
    """A methods sentence describing a depth-coded projection.

    Parameters
    ----------
    parameters : mapping
        Keys used when present: ``method``, ``cmap``, ``depth_range_um``, ``z_step_um``,
        ``voxel_size_um``, ``gamma``, ``clim`` (None = automatic), ``clim_used``.
    legend_range : pair of float, optional
        Depth range (µm) shown by the colour table, when *parameters* has none.

    Returns
    -------
    str
        One paragraph ending with a newline.

    Examples
    --------
    >>> text = methods_sentence({"method": "peak", "cmap": "viridis",
    ...                          "depth_range_um": [0, 59], "z_step_um": 1.0})
    >>> text.startswith("Depth was colour-coded with stackdepth")
    True
    """
    from .kernels.projection import CONSTANT_LIGHTNESS, DEFAULT_CMAP

    method = str(parameters.get("method", "peak"))
    words = METHOD_WORDS.get(method, f"method '{method}'")
    d_range = parameters.get("depth_range_um") or legend_range
    cmap = parameters.get("cmap", DEFAULT_CMAP)
    text = f"Depth was colour-coded with stackdepth {__version__}: {words}"
    if d_range is not None:
        text += f" ({_fmt(float(d_range[0]))}\u2013{_fmt(float(d_range[1]))} \u00b5m, {cmap} colour map)"
    else:
        text += f" ({cmap} colour map)"
    text += "."
    if cmap in CONSTANT_LIGHTNESS:
        text += (f" The {cmap} colour map has constant lightness (Kovesi 2015), so colour shows "
                 "depth and brightness shows signal.")
    else:
        text += f" The lightness of the {cmap} colour map varies with depth."
    z_step = parameters.get("z_step_um")
    voxel = parameters.get("voxel_size_um")
    if voxel is not None and len(voxel) == 3:
        text += (f" The stack had a voxel size of {_fmt(voxel[0])} \u00d7 {_fmt(voxel[1])} \u00d7 "
                 f"{_fmt(voxel[2])} \u00b5m (z \u00d7 y \u00d7 x).")
    elif z_step is not None:
        text += f" Slices were {_fmt(float(z_step))} \u00b5m apart."
    clim = parameters.get("clim")
    used = parameters.get("clim_used") or clim
    gamma = parameters.get("gamma", 1.0)
    if used is not None:
        text += (f" Brightness was scaled linearly from {_fmt(used[0])} to {_fmt(used[1])} "
                 "(raw intensity")
        if clim is not None:
            text += ")"
        elif method == "weighted":
            text += "; automatic: background level + 3 SD and the 99.9th percentile)"
        else:
            text += "; automatic 0.1 and 99.9 percentiles)"
    else:
        text += " Brightness was scaled between the 0.1 and 99.9 percentiles of the intensity"
    text += "." if float(gamma) == 1.0 else f" with gamma {_fmt(float(gamma))}."
    floor = parameters.get("weight_floor")
    if method == "weighted" and floor is not None:
        text += (f" Depths were weighted by the signal above {_fmt(float(floor))} (background "
                 "level + 3 SD, sigma-clipped), independent of the display range.")
    text += " " + CAVEAT
    return text + "\n"


def _check_targets(path: Path, *, overwrite: bool) -> tuple[Path, Path, Path, str]:
    ext = "".join(path.suffixes[-1:]).lower()
    if ext not in FIGURE_FORMATS:
        fail("path", "a file name ending in " + ", ".join(FIGURE_FORMATS), str(path))
    sidecar = path.with_name(path.name + ".json")
    methods = path.with_name(path.name + ".methods.txt")
    if not path.parent.is_dir():
        raise FileNotFoundError(f"figure: folder {path.parent} does not exist")
    if not overwrite:
        existing = [str(p) for p in (path, sidecar, methods) if p.exists()]
        if existing:
            raise FileExistsError(
                f"figure: {', '.join(existing)} already exists; choose another name or "
                "allow overwriting (overwrite=True, --overwrite)")
    return path, sidecar, methods, FIGURE_FORMATS[ext]


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


def draw_colour_bar(ax: Any, parts: LegendParts, *, vertical: bool, colour: str = "black") -> None:
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
        ax.imshow(np.swapaxes(table, 0, 1), aspect="auto", extent=(b0, b1, d1, d0),
                  interpolation="nearest")
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
        ax.imshow(table, aspect="auto", extent=(d0, d1, b0, b1), origin="lower",
                  interpolation="nearest")
        ax.set_yticks(parts.level_ticks, parts.level_labels)
        ax.set_xticks(d0 + parts.positions * (d1 - d0), parts.labels)
        ax.set_xlabel("Depth (\u00b5m)", color=colour)
        ax.tick_params(axis="both", colors=colour, labelsize=8)
        if parts.two_dimensional:
            ax.set_ylabel("Signal", color=colour, fontsize=8)
            ax.tick_params(axis="y", labelsize=7)
    for spine in ax.spines.values():
        spine.set_edgecolor(colour)


def build_depth_figure(result: Any, *, pixel_size_um: float | Sequence[float],
                       scale_bar_um: float | None = None, title: str | None = None,
                       dpi: int = 300) -> Any:
    """The figure of a depth-coded projection: image, scale bar and its key (depth in µm x signal).

    Parameters
    ----------
    result : object
        A ``depth_coded_projection`` result with a 2-D ``rgb`` (y, x, 3).
    pixel_size_um : float or (float, float)
        Pixel size (y, x) in µm.
    scale_bar_um : float, optional
        Scale bar length; default :func:`nice_length` of the image width.
    title : str, optional
        Title above the image.
    dpi : int
        Resolution.

    Returns
    -------
    matplotlib.figure.Figure
        Not attached to pyplot; ``fig.axes[0]`` is the image (in µm), ``fig.axes[1]`` the key
        (depth down in µm, brightness across, ticked with the signal).

    Raises
    ------
    ParameterError
        For a result that is not one RGB image, a bad pixel size or scale bar.

    Examples
    --------
    >>> import numpy as np
    >>> from viewer_plugin.kernels import depth_coded_projection
    >>> stack = np.zeros((5, 20, 30), np.uint8); stack[3, 5:9, 5:25] = 200
    >>> fig = build_depth_figure(depth_coded_projection(stack, z_step=2.0), pixel_size_um=0.5)
    >>> fig.axes[1].get_ylabel()
    'Depth (µm)'
    """
    return _build_figure(result, pixel_size_um=pixel_size_um, scale_bar_um=scale_bar_um,
                         title=title, dpi=dpi)[0]


def _build_figure(result: Any, *, pixel_size_um: Any, scale_bar_um: float | None,
                  title: str | None, dpi: int) -> tuple[Any, LegendParts, tuple[float, float], float]:
    from matplotlib.figure import Figure

    from .kernels.projection import depth_legend

    rgb = _figure_rgb(result)
    pixel = _pixel_pair(pixel_size_um)
    dpi = int(check_number(dpi, name="dpi", low=30, high=2400))
    ny, nx = rgb.shape[:2]
    height_um, width_um = ny * pixel[0], nx * pixel[1]
    if scale_bar_um is None:
        scale_bar_um = nice_length(width_um)
    scale_bar_um = check_number(scale_bar_um, name="scale_bar_um", low=0.0, low_open=True,
                                high=width_um)
    parts = legend_parts(depth_legend(result, brightness_steps=KEY_STEPS, orientation="vertical"))
    image_w, key_w = 5.0, 1.5  # inches: the image, and the key with its labels
    image_h = min(8.0, max(1.5, image_w * height_um / width_um))
    width, height = image_w + key_w, image_h + (0.5 if title else 0.2)
    fig = Figure(figsize=(width, height), dpi=dpi)
    ax = fig.add_axes((0.02, 0.03, image_w / width - 0.02, 0.94 if not title else 0.88))
    ax.imshow(rgb, extent=(0, width_um, height_um, 0), interpolation="nearest")
    ax.set_axis_off()
    ax.set_anchor("W")
    draw_scale_bar(ax, width_um, height_um, scale_bar_um)
    top = 0.5 if title else 0.2  # inches above the key; below it: the signal ticks and label
    cax = fig.add_axes((image_w / width + 0.03, 0.75 / height, 0.45 / width,
                        (height - 0.75 - top) / height))
    draw_colour_bar(cax, parts, vertical=True)
    if title:
        fig.suptitle(title, fontsize=10, y=0.985)
    return fig, parts, pixel, scale_bar_um


def _sidecar_record(path: Path, params: dict[str, Any], parts: LegendParts, *, source_name: str,
                    pixel: tuple[float, float], scale_bar_um: float, shape: tuple[int, ...],
                    methods: str) -> dict[str, Any]:
    """The JSON sidecar: parameters, provenance, the key's ticks and the methods text."""
    d0, d1 = parts.depth_range
    return {
        "figure": path.name,
        "stackdepth_version": __version__,
        "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "source": source_name or params.get("source_file"),
        "parameters": params,
        "pixel_size_um": list(pixel),
        "scale_bar_um": scale_bar_um,
        "colour_bar": {"unit": "\u00b5m", "depth_range_um": [d0, d1],
                       "tick_labels": list(parts.labels),
                       "tick_depths_um": [d0 + f * (d1 - d0) for f in parts.positions]},
        "key": {"depth": "down, \u00b5m below the first slice",
                "brightness": "across, the signal between the display limits (clim_used), "
                              "darkest at the left; each cell is the colour of its depth times "
                              "its brightness ** gamma, as in the image",
                "brightness_levels": int(parts.levels.size),
                "brightness_tick_labels": list(parts.level_labels)},
        "image_shape": list(shape),
        "methods": methods.strip(),
        "caveat": CAVEAT,
    }


def export_depth_figure(
    result: Any,
    path: str | Path,
    *,
    pixel_size_um: float | Sequence[float],
    scale_bar_um: float | None = None,
    title: str | None = None,
    source_name: str = "",
    parameters: Mapping[str, Any] | None = None,
    overwrite: bool = False,
    dpi: int = 300,
) -> FigureFiles:
    """Save a depth-coded projection as a figure for a paper, with its sidecars.

    Parameters
    ----------
    result : object
        The result of ``depth_coded_projection`` (``.rgb`` (y, x, 3) in [0, 1],
        ``.depth_range`` in µm, ``.lut``, ``.clim``, ``.gamma``); the key is
        ``depth_legend(result, brightness_steps=KEY_STEPS)``.
    path : str or Path
        Figure file; ``.png``, ``.tif``/``.tiff`` or ``.pdf``.
    pixel_size_um : float or (float, float)
        Pixel size in µm (y, x); the image is drawn with this aspect ratio.
    scale_bar_um : float, optional
        Scale bar length in µm; default: a 1-2-5 length near a fifth of the width.
    title : str, optional
        Title above the image.
    source_name : str
        Source file or layer name, recorded in the sidecar.
    parameters : mapping, optional
        Parameters of the projection (method, cmap, depth_range_um, clim, gamma,
        z_step_um, voxel_size_um, source_file, ...), recorded in the sidecar and
        used for the methods sentence.
    overwrite : bool
        Replace existing files; otherwise an existing figure or sidecar raises.
    dpi : int
        Resolution of raster formats.

    Returns
    -------
    FigureFiles
        Paths of the figure, the JSON sidecar and the methods text, and that text.

    Raises
    ------
    FileExistsError
        When one of the three files exists and *overwrite* is False.
    FileNotFoundError
        When the target folder does not exist.
    ParameterError
        For an unsupported extension, a result that is not a 2-D RGB image, or a bad size.

    Examples
    --------
    >>> nice_length(120.0)
    20.0
    """
    from matplotlib import rc_context

    path, sidecar, methods, fmt = _check_targets(Path(path), overwrite=overwrite)
    params = dict(parameters or {})
    if params.get("clim_used") is None and getattr(result, "clim", None) is not None:
        params["clim_used"] = [float(v) for v in result.clim]
    with rc_context({"pdf.fonttype": 42, "ps.fonttype": 42, "svg.fonttype": "none"}):
        fig, parts, pixel, scale_bar_um = _build_figure(
            result, pixel_size_um=pixel_size_um, scale_bar_um=scale_bar_um, title=title, dpi=dpi)
        rgb = _figure_rgb(result)
        text = methods_sentence(params, legend_range=parts.depth_range)
        atomic_write(path, lambda tmp: fig.savefig(tmp, format=fmt, dpi=fig.dpi,
                                                         facecolor="white"))
    record = _sidecar_record(path, params, parts, source_name=source_name, pixel=pixel,
                             scale_bar_um=scale_bar_um, shape=rgb.shape[:2], methods=text)
    write_json(sidecar, record)
    atomic_write(methods, lambda tmp: tmp.write_text(text, encoding="utf-8"))
    return FigureFiles(path, sidecar, methods, text)


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
