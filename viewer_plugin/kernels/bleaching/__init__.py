"""Photobleaching: check a series for fading, correct it, or separate it from attenuation.

* :func:`estimate_bleaching` -- how much the foreground signal faded along
  the acquisition order, from a first-order decay model, with a verdict
  against a tolerance;
* :func:`correct_bleaching` -- a new float32 series with the fading divided
  out (by the fitted decay or by the measured signal);
* :func:`equalise_to_reference` -- histogram specification onto one frame,
  for display and segmentation (not for intensities);
* :func:`separate_bleaching` -- bleaching per exposure and attenuation length
  from two passes over the same stack (the second deepest-first).

Corrected intensities are relative, not calibrated, and a correction
amplifies the noise of late (faded) frames. One z-stack alone cannot tell
bleaching from depth attenuation.
"""

from .correct import RESCALE, correct_bleaching, equalise_to_reference
from .estimate import BleachingReport, estimate_bleaching
from .two_pass import TwoPassResult, separate_bleaching

__all__ = [
    "RESCALE",
    "BleachingReport",
    "TwoPassResult",
    "correct_bleaching",
    "equalise_to_reference",
    "estimate_bleaching",
    "separate_bleaching",
]
