"""One function per user job, shared by the command line and the docks.

Between the kernels and the front-ends: each job takes a
:class:`~viewer_plugin._shared.stack.Stack` (picked with :func:`select`) and
options, and returns the kernel's result together with the geometry of every
output and its provenance. ``commands/`` and ``widgets/`` only translate
arguments and widgets into these calls and show or write what comes back;
the choice lists, defaults and caution texts they show are in
:mod:`.choices`.

* :func:`project_stack`, :func:`recolour_projected`, :func:`write_figure` -- projections
  (whole stack or a slab), new colours without the stack, and figures;
* :func:`path_profile` -- depth and peak along a path drawn over a projection;
* :func:`save_movie` (:func:`make_movie` + :func:`write_movie`) -- a turning
  movie, or one top view per time point, as MP4 or GIF;
* :func:`measure_attenuation`, :func:`correct_measured` -- depth attenuation;
* :func:`check_bleaching`, :func:`correct_checked`, :func:`equalise_checked`,
  :func:`separate_passes` -- bleaching.
"""

from .attenuation import (
    AttenuationOptions,
    Measured,
    attenuation_record,
    correct_measured,
    measure_attenuation,
)
from .bleaching import (
    BleachingOptions,
    Checked,
    TwoPass,
    bleaching_record,
    check_bleaching,
    correct_checked,
    equalise_checked,
    separate_passes,
)
from .figure import figure_panel, figure_plane, figure_planes, write_figure
from .movie import (
    Movie,
    MovieOptions,
    SavedMovie,
    check_movie_options,
    make_movie,
    movie_path,
    save_movie,
    write_movie,
)
from .path import path_profile
from .projection import Projected, ProjectionOptions, SideView, project_stack, recolour_projected
from .stack import Corrected, Geometry, Selection, geometry_of, select

__all__ = [
    "AttenuationOptions",
    "BleachingOptions",
    "Checked",
    "Corrected",
    "Geometry",
    "Measured",
    "Movie",
    "MovieOptions",
    "Projected",
    "ProjectionOptions",
    "Selection",
    "SavedMovie",
    "SideView",
    "TwoPass",
    "attenuation_record",
    "bleaching_record",
    "check_bleaching",
    "check_movie_options",
    "correct_checked",
    "correct_measured",
    "equalise_checked",
    "figure_panel",
    "figure_plane",
    "figure_planes",
    "geometry_of",
    "make_movie",
    "measure_attenuation",
    "movie_path",
    "path_profile",
    "project_stack",
    "recolour_projected",
    "save_movie",
    "select",
    "separate_passes",
    "write_figure",
    "write_movie",
]
