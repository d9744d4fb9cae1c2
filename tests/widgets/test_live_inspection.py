"""Live inspection in the docks: recolour without the stack, slabs that follow the z slider,
depth and peak under the cursor.

References: the job's own fresh projection (project_stack) for recolouring, numpy slicing
and argmax (first occurrence on ties) for slabs, and the voxel planted in the test stack
for the status text.
"""

from __future__ import annotations

import numpy as np
import pytest

from .test_projection_widgets import WAIT_MS, _add_stack, _run, _stack

pytestmark = pytest.mark.gui


def _settle(qtbot, widget):
    qtbot.waitUntil(lambda: widget.live_worker is None and not widget._live_timer.isActive(),
                    timeout=WAIT_MS)


def test_colour_changes_recolour_without_a_new_pass(make_napari_viewer, qtbot):
    from viewer_plugin._shared.stack import Stack
    from viewer_plugin.jobs import ProjectionOptions, Selection, project_stack
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    layer = _add_stack(viewer, data)
    widget = DepthColourWidget(viewer)
    _settle(qtbot, widget)
    assert widget.result_layer is not None
    widget.cmap.value = "viridis"  # recoloured at once, on this thread: no worker
    assert widget.live_worker is None and not widget._live_timer.isActive()
    widget.gamma.value = 0.5
    assert widget.live_worker is None
    lo, hi = (float(v) for v in layer.contrast_limits)
    fresh = project_stack(Selection(Stack(data, "ZYX", (2.0, 0.5, 0.5))), ProjectionOptions(
        method="peak", cmap="viridis", clim=(lo, hi), gamma=0.5))
    np.testing.assert_allclose(viewer.layers["cells depth colour"].data, fresh.rgb, atol=1e-6)
    assert widget.result_info["cmap"] == "viridis"


@pytest.mark.parametrize("dock", ["DepthColourWidget", "PeakDepthWidget"])
def test_slab_follows_the_z_slider(make_napari_viewer, qtbot, dock):
    import viewer_plugin.widgets.projection as docks
    from viewer_plugin.kernels import depth_coded_projection

    viewer = make_napari_viewer(show=True)
    data = _stack()
    layer = _add_stack(viewer, data)
    widget = getattr(docks, dock)(viewer)
    widget.slab_thickness.value = 4.0  # 2 um slices: the centre slice and one on each side
    widget.slab.value = True
    for centre in (3, 8):
        viewer.dims.set_current_step(0, centre)
        qtbot.waitUntil(lambda: widget.projected is not None and widget.projected.provenance
                        .get("slab", {}).get("centre_slice") == centre, timeout=WAIT_MS)
        _settle(qtbot, widget)
        a, b = centre - 1, centre + 2
        if dock == "PeakDepthWidget":
            depth = viewer.layers["cells peak depth (\u00b5m)"].data
            np.testing.assert_allclose(depth, (data[a:b].argmax(axis=0) + a) * 2.0)
            np.testing.assert_array_equal(viewer.layers["cells peak"].data, data[a:b].max(axis=0))
        else:
            lo, hi = (float(v) for v in layer.contrast_limits)
            ref = depth_coded_projection(data[a:b], z_step=2.0, clim=(lo, hi),
                                         depth_range=(-a * 2.0, 22.0 - a * 2.0))
            np.testing.assert_array_equal(viewer.layers["cells depth colour"].data, ref.rgb)
            assert widget.result.depth_range == pytest.approx((0.0, 22.0))  # whole stack
    assert [lay.name for lay in viewer.layers].count("cells peak" if dock == "PeakDepthWidget"
                                                     else "cells depth colour") == 1


def test_status_bar_tells_depth_and_peak_under_the_cursor(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.projection import DepthColourWidget, PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    data[7, 30, 20] = 5000  # the strongest voxel of its ray: slice 7, 14 um deep
    _add_stack(viewer, data)  # scale (2, 0.5, 0.5), translate (0, 10, -4)
    world = (7 * 2.0, 10.0 + 30 * 0.5, -4.0 + 20 * 0.5)
    for widget, name in ((DepthColourWidget(viewer), "cells depth colour"),
                         (PeakDepthWidget(viewer), "cells peak")):
        _settle(qtbot, widget)
        _run(qtbot, widget)
        status = viewer.layers[name].get_status(world, world=True)
        assert "depth 14 \u00b1 1 \u00b5m" in status["value"], status
        assert "peak 5000" in status["value"], status
    status = viewer.layers["cells peak depth (\u00b5m)"].get_status(world, world=True)
    assert "depth 14 \u00b1 1 \u00b5m \u00b7 peak 5000" in status["coordinates"]


def test_path_over_the_peak_depth_map_is_plotted(make_napari_viewer, qtbot):
    """A straight tube from slice 2 to slice 10 under a straight path: planar and 3-D lengths
    against Pythagoras (the tube's axis is known), and the plot appears in the dock."""
    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    rng = np.random.default_rng(5)
    data = (100 + rng.poisson(5.0, (12, 40, 48))).astype(np.uint16)
    for x in range(8, 40):  # depth rises by one slice every 4 columns along row 20
        data[2 + (x - 8) // 4, 19:22, x] += 1500
    _add_stack(viewer, data)  # z-step 2 um, pixels 0.5 um, translate (0, 10, -4)
    widget = PeakDepthWidget(viewer)
    _run(qtbot, widget)
    shapes = widget.draw_path()
    assert shapes.mode == "add_path" and widget.path_combo.value is shapes
    world = np.array([[10.0 + 20 * 0.5, -4.0 + 10 * 0.5], [10.0 + 20 * 0.5, -4.0 + 37 * 0.5]])
    shapes.add_paths([world])  # in world units: the layer shares the result's scale
    qtbot.waitUntil(lambda: widget.profile is not None, timeout=WAIT_MS)
    profile = widget.profile
    planar = 27 * 0.5  # 27 pixels of 0.5 um
    rise = (2 + (37 - 8) // 4 - (2 + (10 - 8) // 4)) * 2.0  # slices 2 -> 9, 2 um each
    assert profile.length_2d_um == pytest.approx(planar, rel=1e-6)
    assert profile.length_3d_um == pytest.approx(np.hypot(planar, rise), rel=0.05)
    assert not widget.path_canvas.isHidden() and "3-D / 2-D" in widget.path_text.value
