"""Publication figures of the projections (matplotlib Agg, no pyplot, no Qt).

Three kinds of figure share one drawing path (:func:`build_figure`) and one
writer (:func:`export_figure`); each is described by a :class:`FigurePanel`:

* :func:`depth_coded_panel` -- a depth-coded projection with its
  two-dimensional key: depth in µm down, brightness (the signal between the
  display limits) across, each cell painted as the image paints a voxel at
  that depth and brightness;
* :func:`depth_map_panel` -- the peak depth map: the depth in µm of each
  pixel's maximum through a colour map, with its colour bar in µm;
* :func:`occlusion_panel` -- the occlusion rendering (grey, or each slice
  emitting the colour of its depth, with the colour bar of depth), marked in
  the figure and in its methods sentence as a rendering for showing, not a
  measurement.

:func:`export_figure` writes, atomically and never over an existing file
unless asked:

* the figure itself (PNG, TIFF, PDF or SVG, chosen by the file extension):
  the image drawn with its pixel size (rows and columns may differ), a scale
  bar in µm and the key; in PDF and SVG the scale bar and the key are vector
  paths, only the image is a raster; PNG and TIFF store the resolution;
* ``<figure>.json``: every parameter needed to make the figure again
  (method, colour map, depth range, contrast, gamma or density, z-step,
  voxel size, source file, stackdepth version, date) and the key's ticks;
* ``<figure>.methods.txt``: a methods sentence to adapt for a paper.

:func:`colour_bar_image` draws the same key as a small RGBA array for the
dock widgets, so the screen and the paper show identical ticks;
:func:`draw_scale_bar` and :func:`draw_colour_bar` draw the scale bar and the
key into any matplotlib axes (the movie frames use them too).
"""

from .keys import (
    KEY_STEPS,
    LegendParts,
    colour_bar_image,
    draw_colour_bar,
    draw_scale_bar,
    legend_parts,
    nice_label,
    nice_length,
)
from .panels import (
    FIGURE_FORMATS,
    FIGURE_KEY_DEPTHS,
    FIGURE_KEY_STEPS,
    FigureFiles,
    FigurePanel,
    build_depth_figure,
    build_figure,
    depth_coded_panel,
    depth_map_panel,
    export_depth_figure,
    export_figure,
    occlusion_panel,
)
from .words import (
    CAVEAT,
    DEPTH_MAP_CAVEAT,
    METHOD_WORDS,
    RENDERING_CAVEAT,
    RENDERING_NOTE,
    methods_sentence,
)

__all__ = [
    "CAVEAT",
    "DEPTH_MAP_CAVEAT",
    "FIGURE_FORMATS",
    "FIGURE_KEY_DEPTHS",
    "FIGURE_KEY_STEPS",
    "FigureFiles",
    "FigurePanel",
    "KEY_STEPS",
    "LegendParts",
    "METHOD_WORDS",
    "RENDERING_CAVEAT",
    "RENDERING_NOTE",
    "build_depth_figure",
    "build_figure",
    "colour_bar_image",
    "depth_coded_panel",
    "depth_map_panel",
    "draw_colour_bar",
    "draw_scale_bar",
    "export_depth_figure",
    "export_figure",
    "legend_parts",
    "methods_sentence",
    "nice_label",
    "nice_length",
    "occlusion_panel",
]
