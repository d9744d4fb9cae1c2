"""The figure job: a projection made into a figure for a paper, from the command line or a dock.

Every projection method has its figure (see :mod:`viewer_plugin.figures`):
depth-coded results with their depth x signal key, the peak depth map ("max")
through its colour map with a colour bar in µm, and the occlusion rendering,
marked as a rendering for showing, not a measurement.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from .._shared.validation import fail
from ..figures import FIGURE_FORMATS
from .choices import DEPTH_CODED, DEPTH_MAP_CMAPS
from .projection import Projected

#: File suffixes a figure can be written as.
FIGURE_SUFFIXES = tuple(FIGURE_FORMATS)

__all__ = ["FIGURE_SUFFIXES", "figure_panel", "figure_plane", "figure_planes", "write_figure"]


@dataclass(frozen=True)
class _Plane:
    """One 2-D plane of a depth-coded result, with the fields the figure code reads."""

    rgb: np.ndarray
    depth_range: tuple[float, float]
    lut: np.ndarray
    clim: tuple[float, float]
    gamma: float


def _image_of(projected: Projected) -> tuple[np.ndarray, int]:
    """The array a figure is drawn from, and how many of its last axes make one image."""
    if projected.method in DEPTH_CODED:
        return np.asarray(projected.result.rgb), 3
    if projected.method == "max":
        return np.asarray(projected.result.depth_um), 2
    return np.asarray(projected.result), 2 if projected.rgb is None else 3


def figure_planes(projected: Projected) -> tuple[int, ...]:
    """The sizes of the axes before the image plane (time, channel): () for one image.

    A figure shows one plane; :func:`write_figure` picks it with ``index``.
    """
    image, dims = _image_of(projected)
    return tuple(image.shape[:image.ndim - dims])


def _check_index(projected: Projected, index: Sequence[int]) -> tuple[int, ...]:
    sizes = figure_planes(projected)
    index = tuple(int(i) for i in index)
    if len(index) != len(sizes):
        fail("figure", "a single image (pick a time point or channel first)",
             f"<a result with {len(sizes)} axes before the image plane and index {index}>")
    for i, (k, n) in enumerate(zip(index, sizes)):
        if not 0 <= k < n:
            fail("figure", f"index {i} from 0 to {n - 1}", k)
    return index


def figure_plane(projected: Projected, index: Sequence[int] = ()) -> Any:
    """The 2-D plane *index* (one entry per axis before the image plane, e.g. time) of a result.

    Returns
    -------
    object
        Depth-coded methods: the plane with ``rgb``, ``depth_range``, ``lut``,
        ``clim``, ``gamma``; "max": a ``PeakProjection`` of the plane;
        "occlusion": the rendering, (y, x) or (y, x, 3).

    Raises
    ------
    ParameterError
        When *index* does not pick one plane.
    """
    index = _check_index(projected, index)
    result = projected.result
    if projected.method in DEPTH_CODED:
        return _Plane(np.asarray(result.rgb)[index], tuple(result.depth_range), result.lut,
                      tuple(result.clim), float(result.gamma))
    if projected.method == "max":
        return dataclasses.replace(result, peak=np.asarray(result.peak)[index],
                                   index=np.asarray(result.index)[index],
                                   depth_um=np.asarray(result.depth_um)[index])
    return np.asarray(result)[index]


def figure_panel(projected: Projected, index: Sequence[int] = (), *,
                 blank_at_or_below: float | None = None) -> Any:
    """What the figure of plane *index* of a projection shows and says (a ``FigurePanel``).

    Parameters
    ----------
    projected : Projected
        From :func:`~viewer_plugin.jobs.projection.project_stack`, any method.
    index : sequence of int
        The plane to draw when the result has time/channel axes.
    blank_at_or_below : float, optional
        "max" only: draw pixels whose maximum is at or below this value black.

    Raises
    ------
    ParameterError
        For a bad *index*, or *blank_at_or_below* with another method.
    """
    from ..figures import depth_coded_panel, depth_map_panel, occlusion_panel

    plane = figure_plane(projected, index)
    record = projected.provenance
    if blank_at_or_below is not None and projected.method != "max":
        fail("blank_at_or_below", "a peak depth map (method max)", f"<method {projected.method}>")
    if projected.method in DEPTH_CODED:
        return depth_coded_panel(plane, parameters=record)
    if projected.method == "max":
        return depth_map_panel(plane.depth_um, depth_range=record.get("depth_range_um"),
                               cmap=record.get("depth_map_cmap") or DEPTH_MAP_CMAPS[0],
                               parameters=record, peak=plane.peak,
                               blank_at_or_below=blank_at_or_below)
    return occlusion_panel(plane, parameters=record, cmap=record.get("cmap"),
                           depth_range=record.get("depth_range_um"))


def write_figure(projected: Projected, path: str | Path, *, index: Sequence[int] = (),
                 title: str | None = None, scale_bar_um: float | None = None,
                 blank_at_or_below: float | None = None, overwrite: bool = False,
                 dpi: int = 300) -> Any:
    """Write the figure of a projection, its JSON sidecar and methods sentence.

    The pixel size comes from the projection's geometry (the µm steps of the
    image's rows and columns), so the figure keeps the stack's aspect and the
    scale bar is true, whichever front-end asked for it.

    Parameters
    ----------
    projected : Projected
        From :func:`~viewer_plugin.jobs.projection.project_stack`: a
        depth-coded result (with its depth x signal key), the peak depth map
        of "max" (the depth of each maximum in colour, with a colour bar in µm)
        or an occlusion rendering (grey, or coloured by depth with a colour
        bar; the figure says it is a rendering, not a measurement).
    path : str or Path
        Figure file (.png, .tif/.tiff, .pdf, .svg).
    index : sequence of int
        The plane to draw when the result has time/channel axes.
    title, scale_bar_um, overwrite, dpi
        As for :func:`viewer_plugin.figures.export_figure`.
    blank_at_or_below : float, optional
        "max" only: pixels whose maximum is at or below this value get no
        depth and are drawn black (as the dock's "Blank depth" option).

    Returns
    -------
    FigureFiles
        The paths written and the methods text.

    Raises
    ------
    ParameterError
        For a bad index, size or file name, or *blank_at_or_below* with a
        method other than "max".
    FileExistsError, FileNotFoundError
        As :func:`viewer_plugin.figures.export_figure`.
    """
    from ..figures import export_figure

    panel = figure_panel(projected, index, blank_at_or_below=blank_at_or_below)
    source = projected.provenance.get("source_file") or projected.provenance.get("source_name", "")
    return export_figure(panel, path, pixel_size_um=projected.geometry.pixel_size_um,
                         scale_bar_um=scale_bar_um, title=title, source_name=str(source),
                         overwrite=overwrite, dpi=dpi)
