"""Depth attenuation: measure how the signal fades with depth, and correct it.

* :func:`estimate_attenuation` -- per-slice foreground signal and a depth
  model (Beer-Lambert exponential, smooth, or quantile maps);
* :func:`correct_attenuation` -- a new float32 stack with the per-slice gain
  applied (numpy, or lazy for dask input).

Corrected intensities are relative, not calibrated, and deep slices carry
amplified noise. A single stack cannot tell attenuation from bleaching.
"""

from .estimate import (
    CAUTION,
    MODELS,
    AttenuationFit,
    AttenuationWarning,
    correct_attenuation,
    estimate_attenuation,
)

__all__ = [
    "CAUTION",
    "MODELS",
    "AttenuationFit",
    "AttenuationWarning",
    "correct_attenuation",
    "estimate_attenuation",
]
