"""The three kinds of figure, one drawing path and one writer (see the package docstring)."""

from __future__ import annotations

import datetime as _dt
import textwrap
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from .. import __version__
from .._shared.atomic import atomic_write
from .._shared.jsonio import write_json
from .._shared.validation import check_interval, check_number, fail
from .keys import (
    LegendParts,
    draw_colour_bar,
    draw_scale_bar,
    legend_parts,
    nice_length,
)
from .words import (
    CAVEAT,
    DEPTH_MAP_CAVEAT,
    RENDERING_CAVEAT,
    RENDERING_NOTE,
    methods_sentence,
)
from .words import cmap_name as _cmap_name

__all__ = ["FIGURE_FORMATS", "FIGURE_KEY_DEPTHS", "FIGURE_KEY_STEPS", "FigureFiles", "FigurePanel",
           "build_depth_figure", "build_figure", "depth_coded_panel", "depth_map_panel",
           "export_depth_figure", "export_figure", "occlusion_panel"]

#: File extensions accepted for figures and the matplotlib format used for each.
FIGURE_FORMATS = {".png": "png", ".tif": "tiff", ".tiff": "tiff", ".pdf": "pdf", ".svg": "svg"}

#: The key of a figure is drawn as vector cells (PDF, SVG): FIGURE_KEY_DEPTHS depths down and,
#: for a depth-coded image, FIGURE_KEY_STEPS brightness levels across. Fewer cells than the
#: dock's key: each cell is one path, and the 2-D key adds about 50 kB to a PDF, 400 kB to an SVG.
FIGURE_KEY_DEPTHS = 128
FIGURE_KEY_STEPS = 16


@dataclass(frozen=True)
class FigureFiles:
    """Paths written by :func:`export_figure`."""

    figure: Path
    sidecar: Path
    methods: Path
    methods_text: str


@dataclass(frozen=True)
class FigurePanel:
    """What a figure shows and says: the image, its key, the words and the parameters.

    Made by :func:`depth_coded_panel`, :func:`depth_map_panel` or
    :func:`occlusion_panel`; drawn by :func:`build_figure`, written with its
    sidecars by :func:`export_figure`.

    Attributes
    ----------
    image : ndarray of float32, shape (y, x, 3)
        The picture, RGB in [0, 1].
    key : LegendParts or None
        The key drawn beside it (depth in µm down); None for a picture without one.
    parameters : dict
        Everything needed to make the picture again (the sidecar's "parameters").
    record : dict
        What the sidecar says about the key (and, for a rendering, its model).
    methods : str
        The methods paragraph (ends with a newline).
    caveat : str
        What the picture does not show.
    note : str
        A line printed under the picture ("" for none).
    """

    image: np.ndarray
    key: LegendParts | None
    parameters: dict[str, Any]
    record: dict[str, Any]
    methods: str
    caveat: str
    note: str = ""


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


def _colour_bar_record(parts: LegendParts, **extra: Any) -> dict[str, Any]:
    """The sidecar's description of a key's depth axis: range and ticks in µm."""
    d0, d1 = parts.depth_range
    return {"unit": "\u00b5m", "depth_range_um": [d0, d1], "tick_labels": list(parts.labels),
            "tick_depths_um": [d0 + f * (d1 - d0) for f in parts.positions], **extra}


def _depth_key(depth_range: Any, cmap: Any) -> tuple[LegendParts, np.ndarray]:
    """A figure's colour bar of depth in µm (shallow at the top), and its colour table."""
    from ..kernels.projection import depth_legend

    d_range = check_interval(depth_range, name="depth_range", allow_none=False)
    legend = depth_legend(d_range, cmap=cmap, n_colours=FIGURE_KEY_DEPTHS, height=1,
                          orientation="vertical")
    return legend_parts(legend), np.asarray(legend.lut)


def depth_coded_panel(result: Any, *, parameters: Mapping[str, Any] | None = None) -> FigurePanel:
    """The figure of a depth-coded projection: its RGB image and 2-D key (depth x signal).

    Parameters
    ----------
    result : object
        A ``depth_coded_projection`` result (``.rgb`` (y, x, 3) in [0, 1],
        ``.depth_range`` in µm, ``.lut``, ``.clim``, ``.gamma``).
    parameters : mapping, optional
        The projection's parameters (method, cmap, depth_range_um, clim, gamma,
        z_step_um, voxel_size_um, source_file, ...); ``clim_used`` is taken
        from the result when missing.

    Returns
    -------
    FigurePanel
        The key is ``depth_legend(result, brightness_steps=FIGURE_KEY_STEPS)``:
        depth down, brightness across, each cell coloured as the image.

    Raises
    ------
    ParameterError
        For a result that is not one RGB image.

    Examples
    --------
    >>> import numpy as np
    >>> from viewer_plugin.kernels import depth_coded_projection
    >>> stack = np.zeros((5, 20, 30), np.uint8); stack[3, 5:9, 5:25] = 200
    >>> panel = depth_coded_panel(depth_coded_projection(stack, z_step=2.0))
    >>> panel.key.depth_range, panel.key.levels.size
    ((0.0, 8.0), 16)
    """
    from ..kernels.projection import depth_legend

    rgb = _figure_rgb(result)
    params = dict(parameters or {})
    if params.get("clim_used") is None and getattr(result, "clim", None) is not None:
        params["clim_used"] = [float(v) for v in result.clim]
    parts = legend_parts(depth_legend(result, brightness_steps=FIGURE_KEY_STEPS,
                                      n_colours=FIGURE_KEY_DEPTHS, orientation="vertical"))
    record = {
        "colour_bar": _colour_bar_record(parts),
        "key": {"depth": "down, \u00b5m below the first slice",
                "brightness": "across, the signal between the display limits (clim_used), "
                              "darkest at the left; each cell is the colour of its depth times "
                              "its brightness ** gamma, as in the image",
                "brightness_levels": int(parts.levels.size),
                "brightness_tick_labels": list(parts.level_labels)}}
    return FigurePanel(rgb, parts, params, record,
                       methods_sentence(params, legend_range=parts.depth_range), CAVEAT)


def depth_map_panel(depth_um: Any, *, depth_range: Sequence[float], cmap: Any,
                    parameters: Mapping[str, Any] | None = None, peak: Any = None,
                    blank_at_or_below: float | None = None) -> FigurePanel:
    """The figure of a peak depth map: the depth of each maximum in colour, its colour bar in µm.

    Parameters
    ----------
    depth_um : array_like, shape (y, x)
        Depth in µm below the first slice of each pixel's maximum (NaN: none).
    depth_range : (float, float)
        Depths in µm at the two ends of the colour map (outside: the end colours).
    cmap : str or (N, 3) array
        Colour map of depth (one quantity: a map whose lightness rises with
        depth, such as viridis, suits it).
    parameters : mapping, optional
        The projection's parameters, recorded in the sidecar.
    peak : array_like, shape (y, x), optional
        The maximum of each pixel; needed with *blank_at_or_below*.
    blank_at_or_below : float, optional
        Pixels whose maximum is at or below this value are drawn black: their
        depth would only be the depth of the strongest noise.

    Returns
    -------
    FigurePanel
        Pixel colour ``cmap((depth - d0) / (d1 - d0))`` (matplotlib's lookup),
        black where there is no depth; the key is the colour bar of depth.

    Raises
    ------
    ParameterError
        For a map that is not 2-D, a bad range or colour map, or
        *blank_at_or_below* without a *peak* of the same shape.

    Examples
    --------
    >>> import numpy as np
    >>> panel = depth_map_panel(np.array([[0.0, 10.0]]), depth_range=(0, 10), cmap="viridis")
    >>> panel.key.labels, panel.parameters["method"]
    (('0', '2', '4', '6', '8', '10'), 'max')
    """
    depth = np.asarray(depth_um, dtype=np.float64)
    if depth.ndim != 2:
        fail("depth_um", "a 2-D depth map (y, x) in \u00b5m", depth,
             hint="pick one time point or channel first")
    parts, lut = _depth_key(depth_range, cmap)
    d0, d1 = parts.depth_range
    shown = np.isfinite(depth)
    if blank_at_or_below is not None:
        blank_at_or_below = check_number(blank_at_or_below, name="blank_at_or_below")
        if peak is None or np.shape(peak) != depth.shape:
            fail("peak", f"the maximum of each pixel, shape {depth.shape}, to blank pixels at "
                 "or below blank_at_or_below", peak)
        with np.errstate(invalid="ignore"):
            shown &= np.asarray(peak, dtype=np.float64) > blank_at_or_below
    from ..kernels.projection.colour import lut_index

    index = lut_index(np.where(shown, (depth - d0) / (d1 - d0), 0.0), lut.shape[0])
    image = np.where(shown[..., None], lut[index], 0.0).astype(np.float32)
    params = {"method": "max", **(parameters or {}), "depth_map_cmap": _cmap_name(cmap),
              "depth_range_um": [d0, d1], "blank_at_or_below": blank_at_or_below}
    record = {
        "colour_bar": _colour_bar_record(parts, colour_map=_cmap_name(cmap)),
        "key": {"depth": "down, \u00b5m below the first slice",
                "colour": "the depth of the slice holding each pixel's maximum (the shallowest "
                          "on ties)",
                "black": "no depth" + ("" if blank_at_or_below is None else
                                       f": maximum at or below {blank_at_or_below:g}")}}
    return FigurePanel(image, parts, params, record,
                       methods_sentence(params, legend_range=parts.depth_range), DEPTH_MAP_CAVEAT)


def occlusion_panel(image: Any, *, parameters: Mapping[str, Any] | None = None, cmap: Any = None,
                    depth_range: Sequence[float] | None = None) -> FigurePanel:
    """The figure of an occlusion rendering, marked as a rendering for showing.

    Parameters
    ----------
    image : array_like, shape (y, x) or (y, x, 3)
        The rendering in [0, 1]: grey, or RGB when each slice emitted the
        colour of its depth.
    parameters : mapping, optional
        The projection's parameters (density_per_um, view, clim, clim_used,
        z_step_um, voxel_size_um, ...), recorded in the sidecar.
    cmap : str or (N, 3) array, optional
        RGB renderings: the colour map of depth they were made with.
    depth_range : (float, float), optional
        RGB renderings: the depths in µm at the two ends of that colour map.

    Returns
    -------
    FigurePanel
        Grey renderings have no key; RGB ones the colour bar of depth. The
        figure carries :data:`RENDERING_NOTE` under the image.

    Raises
    ------
    ParameterError
        For an image that is neither (y, x) nor (y, x, 3), or an RGB image
        without its colour map and depth range.

    Examples
    --------
    >>> import numpy as np
    >>> panel = occlusion_panel(np.zeros((4, 6)), parameters={"density_per_um": 0.5})
    >>> panel.key is None, panel.note == RENDERING_NOTE
    (True, True)
    """
    picture = np.asarray(image, dtype=np.float32)
    if picture.ndim == 2:
        picture = np.repeat(picture[..., None], 3, axis=2)
    elif picture.ndim != 3 or picture.shape[-1] != 3:
        fail("image", "a rendering of shape (y, x) or (y, x, 3)", picture,
             hint="pick one time point or channel first")
    params = {"method": "occlusion", **(parameters or {})}
    parts, colour_bar = None, None
    if np.ndim(image) == 3:
        if cmap is None or depth_range is None:
            fail("cmap", "the colour map and depth range of a colour rendering", cmap)
        parts, _ = _depth_key(depth_range, cmap)
        params.update(cmap=_cmap_name(cmap), depth_range_um=list(parts.depth_range))
        colour_bar = _colour_bar_record(parts, colour_map=_cmap_name(cmap))
    record = {
        "colour_bar": colour_bar,
        "key": None if parts is None else {
            "depth": "down, \u00b5m below the first slice",
            "colour": "each slice emits the colour of its depth; where several depths show "
                      "through, their colours mix"},
        "rendering": {"model": "emission\u2013absorption (Max 1995), composited front to back",
                      "purpose": "for showing, not a measurement",
                      "density_per_um": params.get("density_per_um"), "view": params.get("view"),
                      "display_range": params.get("clim_used")}}
    return FigurePanel(np.clip(np.nan_to_num(picture), 0.0, 1.0), parts, params, record,
                       methods_sentence(params), RENDERING_CAVEAT, RENDERING_NOTE)


def build_figure(panel: FigurePanel, *, pixel_size_um: float | Sequence[float],
                 scale_bar_um: float | None = None, title: str | None = None,
                 dpi: int = 300) -> Any:
    """Draw *panel*: the image in µm with a scale bar, its key beside it, its note below.

    Parameters
    ----------
    panel : FigurePanel
        From :func:`depth_coded_panel`, :func:`depth_map_panel` or :func:`occlusion_panel`.
    pixel_size_um : float or (float, float)
        Pixel size (y, x) in µm; the image is drawn with this aspect.
    scale_bar_um : float, optional
        Scale bar length; default :func:`nice_length` of the image width.
    title : str, optional
        Title above the image.
    dpi : int
        Resolution.

    Returns
    -------
    matplotlib.figure.Figure
        Not attached to pyplot; ``fig.axes[0]`` is the image (in µm), ``fig.axes[1]``
        the key (depth down in µm) when the panel has one.

    Raises
    ------
    ParameterError
        For a bad pixel size, scale bar or resolution.

    Examples
    --------
    >>> import numpy as np
    >>> panel = depth_map_panel(np.zeros((20, 30)), depth_range=(0, 10), cmap="viridis")
    >>> fig = build_figure(panel, pixel_size_um=(0.4, 0.5))
    >>> fig.axes[0].get_images()[0].get_extent()
    [0.0, 15.0, 8.0, 0.0]
    """
    return _draw(panel, pixel_size_um, scale_bar_um, title, dpi)[0]


def _draw(panel: FigurePanel, pixel_size_um: Any, scale_bar_um: float | None,
          title: str | None, dpi: int) -> tuple[Any, tuple[float, float], float]:
    """The figure of *panel*, its pixel size (y, x) and the scale bar's length in µm."""
    from matplotlib.figure import Figure

    pixel = _pixel_pair(pixel_size_um)
    dpi = int(check_number(dpi, name="dpi", low=30, high=2400))
    ny, nx = panel.image.shape[:2]
    height_um, width_um = ny * pixel[0], nx * pixel[1]
    if scale_bar_um is None:
        scale_bar_um = nice_length(width_um)
    scale_bar_um = check_number(scale_bar_um, name="scale_bar_um", low=0.0, low_open=True,
                                high=width_um)
    key, aspect = panel.key, height_um / width_um
    two_d = key is not None and key.two_dimensional
    # inches: the image at most 5 wide and 8 tall, a column for the key and its labels, the
    # note below, the title above; the key column is at least 1.5 tall
    image_w = min(5.0, 8.0 / aspect)
    image_h = image_w * aspect
    column_h = max(image_h, 1.5)
    pad, key_w = 0.1, (0.1 if key is None else 1.5 if two_d else 1.0)
    width = pad + image_w + key_w
    # the note in 7-point type, about 17 characters to the inch, on as many lines as it needs
    note = textwrap.fill(panel.note, width=max(20, int(17 * (width - 2 * pad))))
    top = 0.5 if title else pad
    bottom = 0.15 + 0.13 * (note.count("\n") + 1) if note else pad
    height = bottom + column_h + top
    fig = Figure(figsize=(width, height), dpi=dpi)
    ax = fig.add_axes((pad / width, (bottom + column_h - image_h) / height, image_w / width,
                       image_h / height))
    ax.imshow(panel.image, extent=(0.0, width_um, height_um, 0.0), interpolation="nearest",
              aspect="auto")
    ax.set_axis_off()
    draw_scale_bar(ax, width_um, height_um, scale_bar_um)
    if key is not None:
        below = 0.65 if two_d else 0.0  # the signal ticks and their label under a 2-D key
        cax = fig.add_axes(((pad + image_w + 0.15) / width, (bottom + below) / height,
                            (0.45 if two_d else 0.22) / width, (column_h - below) / height))
        draw_colour_bar(cax, key, vertical=True, vector=True)
    if note:
        fig.text(pad / width, 0.08 / height, note, fontsize=7, ha="left", va="bottom")
    if title:
        fig.suptitle(title, fontsize=10, y=1.0 - 0.12 / height)
    return fig, pixel, scale_bar_um


def _sidecar_record(path: Path, panel: FigurePanel, *, source_name: str,
                    pixel: tuple[float, float], scale_bar_um: float, dpi: float) -> dict[str, Any]:
    """The JSON sidecar: parameters, provenance, the key's ticks and the methods text."""
    params = panel.parameters
    return {
        "figure": path.name,
        "stackdepth_version": __version__,
        "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "source": source_name or params.get("source_file"),
        "parameters": params,
        "pixel_size_um": list(pixel),
        "scale_bar_um": scale_bar_um,
        "dpi": dpi,
        **panel.record,
        "image_shape": list(panel.image.shape[:2]),
        "methods": panel.methods.strip(),
        "caveat": panel.caveat,
    }


def export_figure(
    panel: FigurePanel,
    path: str | Path,
    *,
    pixel_size_um: float | Sequence[float],
    scale_bar_um: float | None = None,
    title: str | None = None,
    source_name: str = "",
    overwrite: bool = False,
    dpi: int = 300,
) -> FigureFiles:
    """Save *panel* as a figure for a paper, with its JSON sidecar and methods sentence.

    Parameters
    ----------
    panel : FigurePanel
        What to draw (see :func:`depth_coded_panel`, :func:`depth_map_panel`,
        :func:`occlusion_panel`).
    path : str or Path
        Figure file; ``.png``, ``.tif``/``.tiff``, ``.pdf`` or ``.svg``.
    pixel_size_um : float or (float, float)
        Pixel size in µm (y, x); the image is drawn with this aspect ratio.
    scale_bar_um : float, optional
        Scale bar length in µm; default: a 1-2-5 length near a fifth of the width.
    title : str, optional
        Title above the image.
    source_name : str
        Source file or layer name, recorded in the sidecar.
    overwrite : bool
        Replace existing files; otherwise an existing figure or sidecar raises.
    dpi : int
        Resolution of raster formats (stored in PNG and TIFF files).

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
        For an unsupported extension or a bad size.

    Examples
    --------
    >>> nice_length(120.0)
    20.0
    """
    from matplotlib import rc_context

    path, sidecar, methods, fmt = _check_targets(Path(path), overwrite=overwrite)
    with rc_context({"pdf.fonttype": 42, "ps.fonttype": 42, "svg.fonttype": "none"}):
        fig, pixel, scale_bar_um = _draw(panel, pixel_size_um, scale_bar_um, title, dpi)
        atomic_write(path, lambda tmp: fig.savefig(tmp, format=fmt, dpi=fig.dpi,
                                                   facecolor="white"))
    write_json(sidecar, _sidecar_record(path, panel, source_name=source_name, pixel=pixel,
                                        scale_bar_um=scale_bar_um, dpi=fig.dpi))
    atomic_write(methods, lambda tmp: tmp.write_text(panel.methods, encoding="utf-8"))
    return FigureFiles(path, sidecar, methods, panel.methods)


def build_depth_figure(result: Any, *, pixel_size_um: float | Sequence[float],
                       scale_bar_um: float | None = None, title: str | None = None,
                       dpi: int = 300) -> Any:
    """The figure of a depth-coded projection: :func:`build_figure` of :func:`depth_coded_panel`.

    Examples
    --------
    >>> import numpy as np
    >>> from viewer_plugin.kernels import depth_coded_projection
    >>> stack = np.zeros((5, 20, 30), np.uint8); stack[3, 5:9, 5:25] = 200
    >>> fig = build_depth_figure(depth_coded_projection(stack, z_step=2.0), pixel_size_um=0.5)
    >>> fig.axes[1].get_ylabel()
    'Depth (µm)'
    """
    return build_figure(depth_coded_panel(result), pixel_size_um=pixel_size_um,
                        scale_bar_um=scale_bar_um, title=title, dpi=dpi)


def export_depth_figure(result: Any, path: str | Path, *, parameters: Mapping[str, Any] | None = None,
                        **options: Any) -> FigureFiles:
    """Save a depth-coded projection as a figure: :func:`export_figure` of :func:`depth_coded_panel`.

    Parameters
    ----------
    result : object
        The result of ``depth_coded_projection`` (see :func:`depth_coded_panel`).
    path : str or Path
        Figure file; ``.png``, ``.tif``/``.tiff``, ``.pdf`` or ``.svg``.
    parameters : mapping, optional
        Parameters of the projection, recorded in the sidecar and used for the
        methods sentence.
    **options
        ``pixel_size_um`` (required), ``scale_bar_um``, ``title``,
        ``source_name``, ``overwrite``, ``dpi``: as for :func:`export_figure`.

    Returns
    -------
    FigureFiles

    Raises
    ------
    FileExistsError, FileNotFoundError, ParameterError
        As :func:`export_figure`; ParameterError also for a result that is not
        one RGB image.

    Examples
    --------
    >>> nice_length(120.0)
    20.0
    """
    return export_figure(depth_coded_panel(result, parameters=parameters), path, **options)
