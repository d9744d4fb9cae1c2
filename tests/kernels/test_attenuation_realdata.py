"""Attenuation on real open stacks (../shared/realdata; skipped when absent).

Data and attribution (see ../shared/realdata/README.md):
- cortex_cells_serial_twophoton.ome.tif: BSD 3-Clause, "Copyright (c) 2020, Adam Tyson,
  University College London", from the brainglobe/cellfinder repository (cropped);
- nucleus_confocal_widefield.ome.tif: CC BY 4.0, (c) NEUBIAS, NEUBIAS training resources.
The README describes what they show: the cortex per-slice mean rises within each block of
10 planes (not exponential); the nucleus's confocal channel is optically sectioned, its
widefield channel has a flat per-slice mean (no sectioning).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from viewer_plugin.io import read_stack
from viewer_plugin.kernels import estimate_attenuation

pytestmark = pytest.mark.realdata


def test_cortex_stack_reports_a_poor_fit_not_a_confident_length(realdata):
    stack = read_stack(realdata / "cortex_cells_serial_twophoton.ome.tif")
    assert stack.axes == "ZYX"
    fit = estimate_attenuation(np.asarray(stack.data), z_step=stack.scale[0])
    low, high = fit.length_interval_um
    wide = math.isinf(high) or high > 2 * low
    assert fit.r_squared < 0.5 or wide
    assert fit.r_squared < 0.5  # the sawtooth of 10-plane blocks is far from Beer-Lambert
    assert any("explains only" in note for note in fit.warnings)


def test_confocal_channel_has_a_depth_profile_widefield_is_flat(realdata):
    stack = read_stack(realdata / "nucleus_confocal_widefield.ome.tif")
    assert stack.axes == "ZCYX"
    data = np.asarray(stack.data)
    z_step = stack.scale[0]
    confocal = estimate_attenuation(data[:, 0], z_step=z_step, model="smooth")
    widefield = estimate_attenuation(data[:, 1], z_step=z_step, model="smooth")
    # sectioning: the in-focus confocal signal is > 20x its out-of-focus level (README: ~1/50)
    measured = confocal.model_profile[np.isfinite(confocal.model_profile)]
    assert measured.max() / measured.min() > 20
    # widefield: the blurred nucleus is brighter in focus, but by far less (< 5x) ...
    wf = widefield.model_profile
    assert wf.max() / wf.min() < 5
    # ... and its per-slice mean stays flat, as the README states (light is not sectioned away)
    per_slice = data[:, 1].mean(axis=(1, 2))
    assert np.ptp(per_slice) / per_slice.mean() < 0.1
