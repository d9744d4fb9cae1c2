"""Numerical kernels of stackdepth.

Pure numpy (optionally numba and dask); this package never imports napari,
Qt or magicgui, so everything here runs headless, in scripts and on a
dask.distributed cluster.
"""

from ._validate import Cancelled, ParameterError
from .attenuation import AttenuationFit, AttenuationWarning, correct_attenuation, estimate_attenuation
from .bleaching import (
    BleachingReport,
    TwoPassResult,
    correct_bleaching,
    estimate_bleaching,
    separate_bleaching,
)
from .legend import DepthLegend
from .profiles import Background, background_level, slice_background
from .projections import (
    BrightestPoint,
    DepthCodedProjection,
    blended_projection,
    brightest_point,
    depth_coded_projection,
    depth_legend,
    warm_up,
)

__all__ = [
    "AttenuationFit",
    "AttenuationWarning",
    "Background",
    "BleachingReport",
    "BrightestPoint",
    "Cancelled",
    "DepthCodedProjection",
    "DepthLegend",
    "ParameterError",
    "TwoPassResult",
    "background_level",
    "blended_projection",
    "brightest_point",
    "correct_attenuation",
    "correct_bleaching",
    "depth_coded_projection",
    "depth_legend",
    "estimate_attenuation",
    "estimate_bleaching",
    "separate_bleaching",
    "slice_background",
    "warm_up",
]
