"""The figure job: a projection made into a figure for a paper, from the command line or a dock."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from .._shared.validation import fail
from ..figures import FIGURE_FORMATS
from .choices import DEPTH_CODED
from .projection import Projected

#: File suffixes a figure can be written as.
FIGURE_SUFFIXES = tuple(FIGURE_FORMATS)

__all__ = ["FIGURE_SUFFIXES", "figure_plane", "write_figure"]


@dataclass(frozen=True)
class _Plane:
    """One 2-D plane of a depth-coded result, with the fields the figure code reads."""

    rgb: np.ndarray
    depth_range: tuple[float, float]
    lut: np.ndarray
    clim: tuple[float, float]
    gamma: float


def figure_plane(projected: Projected, index: Sequence[int] = ()) -> _Plane:
    """The 2-D plane *index* (one entry per axis before the image plane, e.g. time) of a result.

    Raises
    ------
    ParameterError
        When the result is not depth-coded, or *index* does not pick one plane.
    """
    if projected.method not in DEPTH_CODED:
        fail("figure", f"a depth-coded projection ({', '.join(DEPTH_CODED)})",
             f"<method {projected.method}>")
    rgb = np.asarray(projected.result.rgb)
    lead = rgb.ndim - 3
    index = tuple(int(i) for i in index)
    if len(index) != lead:
        fail("figure", "a single image (pick a time point or channel first)",
             f"<a result with {lead} axes before the image plane and index {index}>")
    for i, (k, n) in enumerate(zip(index, rgb.shape[:lead])):
        if not 0 <= k < n:
            fail("figure", f"index {i} from 0 to {n - 1}", k)
    result = projected.result
    return _Plane(rgb[index], tuple(result.depth_range), result.lut, tuple(result.clim),
                  float(result.gamma))


def write_figure(projected: Projected, path: str | Path, *, index: Sequence[int] = (),
                 title: str | None = None, scale_bar_um: float | None = None,
                 overwrite: bool = False, dpi: int = 300) -> Any:
    """Write the figure of a projection, its JSON sidecar and methods sentence.

    The pixel size comes from the projection's geometry (the µm steps of the
    image's rows and columns), so the figure keeps the stack's aspect and the
    scale bar is true, whichever front-end asked for it.

    Parameters
    ----------
    projected : Projected
        From :func:`~viewer_plugin.jobs.projection.project_stack`.
    path : str or Path
        Figure file (.png, .tif/.tiff, .pdf).
    index : sequence of int
        The plane to draw when the result has time/channel axes.
    title, scale_bar_um, overwrite, dpi
        As for :func:`viewer_plugin.figures.export_depth_figure`.

    Returns
    -------
    FigureFiles
        The paths written and the methods text.
    """
    from ..figures import export_depth_figure

    plane = figure_plane(projected, index)
    source = projected.provenance.get("source_file") or projected.provenance.get("source_name", "")
    return export_depth_figure(plane, path, pixel_size_um=projected.geometry.pixel_size_um,
                               scale_bar_um=scale_bar_um, title=title, source_name=str(source),
                               parameters=projected.provenance, overwrite=overwrite, dpi=dpi)
