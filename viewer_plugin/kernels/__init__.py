"""Numerical kernels of stackdepth, one subpackage per feature.

* :mod:`.projection` -- peak, depth-coded and occlusion projections, the
  depth legend, turning views (the stack seen from angles about one axis),
  depth and lengths along a drawn path;
* :mod:`.attenuation` -- depth attenuation estimate and correction;
* :mod:`.bleaching` -- bleaching check, correction and two-pass separation;
* :mod:`.primitives` -- what the features share, written once: background
  levels, line fits and intervals, per-slice gains, histogram specification,
  Otsu thresholds, the per-slice foreground profile and z-chunking. The
  features import primitives, never each other.

Pure numpy (with numba loops and dask arrays); this package never imports
napari, Qt or magicgui, so everything here runs headless, in scripts and
notebooks. The public kernels are importable from here directly.
"""

from .._shared.progress import Cancelled
from .._shared.validation import ParameterError
from ._deprecated import blended_projection, brightest_point
from .attenuation import (
    AttenuationFit,
    AttenuationWarning,
    correct_attenuation,
    estimate_attenuation,
)
from .bleaching import (
    BleachingReport,
    TwoPassResult,
    correct_bleaching,
    equalise_to_reference,
    estimate_bleaching,
    separate_bleaching,
)
from .primitives import Background, background_level, slice_background
from .projection import (
    DepthCodedProjection,
    DepthLegend,
    PathProfile,
    PeakProjection,
    TurnVolume,
    Views,
    depth_along_path,
    depth_coded_projection,
    depth_colours,
    depth_legend,
    display_limits,
    occlusion_projection,
    offset_depths,
    peak_projection,
    series_views,
    slab_bounds,
    turn_volume,
    turned_view,
    turning_views,
    warm_up,
)

__all__ = [
    "AttenuationFit",
    "AttenuationWarning",
    "Background",
    "BleachingReport",
    "Cancelled",
    "DepthCodedProjection",
    "DepthLegend",
    "ParameterError",
    "PathProfile",
    "PeakProjection",
    "TurnVolume",
    "TwoPassResult",
    "Views",
    "background_level",
    "blended_projection",
    "brightest_point",
    "correct_attenuation",
    "correct_bleaching",
    "depth_along_path",
    "depth_coded_projection",
    "depth_colours",
    "depth_legend",
    "display_limits",
    "equalise_to_reference",
    "estimate_attenuation",
    "estimate_bleaching",
    "occlusion_projection",
    "offset_depths",
    "peak_projection",
    "separate_bleaching",
    "series_views",
    "slab_bounds",
    "slice_background",
    "turn_volume",
    "turned_view",
    "turning_views",
    "warm_up",
]
