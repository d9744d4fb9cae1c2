"""Open real stacks (../shared/realdata; skipped when absent).

Data: cortex_cells_serial_twophoton.ome.tif, BSD 3-Clause, "Copyright (c) 2020, Adam Tyson,
University College London", from the brainglobe/cellfinder repository (cropped);
nucleus_confocal_widefield.ome.tif, CC BY 4.0, (c) NEUBIAS, NEUBIAS training resources.
See ../shared/realdata/README.md for the full attribution.
"""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin.io import read_stack
from viewer_plugin.kernels import estimate_bleaching

pytestmark = pytest.mark.realdata


def test_non_exponential_depth_pattern_reports_a_poor_fit(realdata):
    """The cortex stack's per-slice mean rises within each block of 10 planes (README): a
    first-order decay cannot describe it, and the report must say so instead of giving a
    confident verdict."""
    stack = read_stack(realdata / "cortex_cells_serial_twophoton.ome.tif")
    report = estimate_bleaching(np.asarray(stack.data), interval=stack.scale[0])
    assert report.axis_kind == "depth" and "two-pass" in report.caveat
    assert report.r_squared < 0.8
    assert "fits poorly" in report.summary
    assert not report.exceeds_tolerance


def test_widefield_channel_runs_with_its_voxel_size(realdata):
    """The widefield channel of the nucleus stack: a depth check in um of its own z-step."""
    stack = read_stack(realdata / "nucleus_confocal_widefield.ome.tif")
    c = stack.axes.index("C")
    channel = np.take(np.asarray(stack.data), 1, axis=c)
    z_step = stack.scale[stack.axes.index("Z")]
    report = estimate_bleaching(channel, interval=z_step)
    assert report.n_frames == 45 and report.interval == pytest.approx(0.4994, rel=1e-3)
    assert report.half_life >= 0
    assert "over 45 slices" in report.summary
