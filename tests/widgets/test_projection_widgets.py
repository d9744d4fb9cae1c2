"""The three projection dock widgets under Xvfb: new layers, geometry, untouched source, errors, cancel.

Reference values: the peak layers are compared with numpy's ``max`` and ``argmax``
along the depth axis (numpy documentation: argmax returns the first occurrence on ties).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

pytestmark = pytest.mark.gui

WAIT_MS = 300_000  # first calls compile the numba kernels; CI machines are slow and shared


def _stack(shape=(12, 40, 48), seed=0):
    """A small uint16 z-stack: Poisson background and one bright bar per slice at its own y."""
    rng = np.random.default_rng(seed)
    data = (100 + rng.poisson(5.0, shape)).astype(np.uint16)
    for z in range(shape[0]):
        data[z, 2 + 3 * z: 4 + 3 * z, 5:40] += 400
    return data


def _add_stack(viewer, data=None, **kwargs):
    data = _stack() if data is None else data
    kwargs.setdefault("scale", (2.0, 0.5, 0.5))
    kwargs.setdefault("translate", (0.0, 10.0, -4.0))
    kwargs.setdefault("axis_labels", ("z", "y", "x"))
    kwargs.setdefault("units", ("um", "um", "um"))
    return viewer.add_image(data, name="cells", **kwargs)


def _run(qtbot, widget, *, signal="returned"):
    worker = widget.compute(start_thread=False)
    assert worker is not None
    with qtbot.waitSignal(getattr(worker, signal), timeout=WAIT_MS):
        worker.start()
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)
    return worker


def test_depth_colour_widget_adds_rgb_layer(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    before = data.copy()
    layer = _add_stack(viewer, data)
    widget = DepthColourWidget(viewer)
    viewer.window.add_dock_widget(widget, area="right")
    assert widget.layer is layer
    assert widget.axis_combo.value == 0          # the axis labelled "z"
    assert widget.z_step.value == pytest.approx(2.0)  # from the layer scale
    assert widget.method.choices[:3] == ("peak", "weighted", "tinted")
    # constant-lightness maps first, the default first of all (jobs/choices.py)
    assert widget.cmap.choices[:4] == ("CET-I1", "CET-I3", "CET-I2", "viridis")
    assert widget.cmap.value == "CET-I1" and widget.cmap_hint.value == ""
    _run(qtbot, widget)
    out = viewer.layers["cells depth colour"]
    assert out.rgb
    assert out.data.shape == (40, 48, 3)
    assert out.data.dtype == np.float32
    assert 0.0 <= float(out.data.min()) and float(out.data.max()) <= 1.0
    np.testing.assert_allclose(out.scale, (0.5, 0.5))
    np.testing.assert_allclose(out.translate, (10.0, -4.0))
    np.testing.assert_array_equal(layer.data, before)
    assert widget.result_info["z_step_um"] == pytest.approx(2.0)
    assert widget.result_info["depth_range_um"] == pytest.approx([0.0, 22.0])
    assert widget.export_button.enabled


def test_depth_colour_preview_is_downsampled(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    layer = _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    worker = widget.update_live(start_thread=False, downsample=True)  # as for a big stack
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    preview = widget.preview_layer
    assert preview is not None and preview.name == "cells depth colour (preview)"
    assert preview.data.shape == (10, 12, 3)  # every 4th pixel of 40 x 48
    np.testing.assert_allclose(preview.scale, (2.0, 2.0))
    np.testing.assert_allclose(preview.translate, layer.translate[1:])
    assert widget.legend_image is not None and widget.legend_image.shape[-1] == 4  # dock colour bar
    assert not widget.legend.native.pixmap().isNull()
    _run(qtbot, widget)
    assert "cells depth colour (preview)" not in viewer.layers  # replaced by the full result


def test_z_step_override_is_used(make_napari_viewer, qtbot):
    """An overridden z-step changes the depth range shown and the depths computed."""
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    widget.live.value = False
    widget.override_z.value = True
    widget.z_step.value = 3.0
    assert widget.depth_to.value == pytest.approx(33.0)  # (12 - 1) slices x 3 um
    _run(qtbot, widget)
    assert widget.result.depth_range == pytest.approx((0.0, 33.0))
    assert widget.result_info["z_step_from"] == "override"
    widget.override_z.value = False  # back to the layer scale
    assert widget.z_step.value == pytest.approx(2.0) and widget.depth_to.value == pytest.approx(22.0)


def test_depth_colour_bad_depth_range_is_a_notification(make_napari_viewer, errors):
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    widget.whole_depth.value = False
    widget.depth_from.value = 10.0
    widget.depth_to.value = 5.0
    assert widget.compute(start_thread=False) is None
    assert errors and "depth range" in errors[0]


def test_bad_z_step_is_a_notification(make_napari_viewer, errors):
    """A z-step override of 0 gives a notification naming the z-step, and no layer."""
    from viewer_plugin.widgets.projection import OcclusionWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = OcclusionWidget(viewer)
    widget.override_z.value = True
    widget.z_step.min = 0.0
    widget.z_step.value = 0.0
    assert widget.compute(start_thread=False) is None
    assert errors and "z-step" in errors[0]
    assert not any(layer.name.startswith("cells occlusion") for layer in viewer.layers)


def test_peak_depth_layers_match_numpy(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    before = data.copy()
    layer = _add_stack(viewer, data)
    widget = PeakDepthWidget(viewer)
    _run(qtbot, widget)
    top = viewer.layers["cells peak"]
    depth = viewer.layers["cells peak depth (\u00b5m)"]
    # reference: numpy max / argmax (first occurrence on ties), times the z-step
    np.testing.assert_array_equal(top.data, data.max(axis=0))
    assert top.data.dtype == np.uint16
    assert depth.data.dtype == np.float32
    np.testing.assert_allclose(depth.data, data.argmax(axis=0) * 2.0)
    assert depth.colorbar.visible
    assert tuple(depth.contrast_limits) == pytest.approx((0.0, 22.0))
    np.testing.assert_allclose(depth.scale, (0.5, 0.5))
    np.testing.assert_allclose(depth.translate, (10.0, -4.0))
    # hovering a pixel of the bar in slice 5 reads its depth: 5 slices x 2 um
    value = depth.get_value((10.0 + 0.5 * (2 + 3 * 5), -4.0 + 0.5 * 20), world=True)
    assert value == pytest.approx(10.0)
    np.testing.assert_array_equal(layer.data, before)


def test_peak_depth_depth_axis_from_labels(make_napari_viewer, qtbot):
    """A TZYX layer: depth is the axis labelled z, the time axis is kept."""
    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    data = np.stack([_stack(seed=1), _stack(seed=2)])
    layer = viewer.add_image(data, name="series", scale=(30.0, 2.0, 0.5, 0.5),
                             axis_labels=("t", "z", "y", "x"))
    widget = PeakDepthWidget(viewer)
    assert widget.layer is layer and widget.axis_combo.value == 1
    _run(qtbot, widget)
    top = viewer.layers["series peak"]
    # numpy reference; the depth axis stays as one slice spanning the 12 x 2 um stack, so the
    # time axis lines up with the source's time axis in the viewer (not with its z axis)
    np.testing.assert_array_equal(top.data, data.max(axis=1, keepdims=True))
    np.testing.assert_allclose(top.scale, (30.0, 24.0, 0.5, 0.5))
    np.testing.assert_allclose(top.translate, (0.0, 11.0, 0.0, 0.0))
    viewer.dims.set_point(0, 30.0)  # second time point, any depth: the second projection shows
    for z_um in (0.0, 22.0):
        viewer.dims.set_point(1, z_um)
        assert top.get_value((30.0, z_um, 0.5 * 20, 0.5 * 20), world=True) == data[1, :, 20, 20].max()


def _occlusion_with_side_views(make_napari_viewer, qtbot, colour=None):
    """Run the occlusion widget with side views on the test stack; returns its pieces."""
    from viewer_plugin.widgets.projection import OcclusionWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    before = data.copy()
    layer = _add_stack(viewer, data)
    widget = OcclusionWidget(viewer)
    widget.side_views.value = True
    widget.colour.value = colour
    _run(qtbot, widget)
    return viewer, widget, layer, data, before


def test_occlusion_widget_side_views_geometry(make_napari_viewer, qtbot):
    viewer, _, layer, _, before = _occlusion_with_side_views(make_napari_viewer, qtbot)
    top = viewer.layers["cells occlusion (top)"]
    along_y = viewer.layers["cells occlusion side (along y)"]
    along_x = viewer.layers["cells occlusion side (along x)"]
    assert top.data.shape == (40, 48) and top.data.dtype == np.float32
    assert along_y.data.shape == (12, 48)   # depth vertical, x across
    assert along_x.data.shape == (12, 40)   # depth vertical, y across
    # geometrically right: vertical pixel = z-step, horizontal = pixel size
    np.testing.assert_allclose(along_y.scale, (2.0, 0.5))
    np.testing.assert_allclose(along_x.scale, (2.0, 0.5))
    # placed below the top view, not on top of it
    assert along_y.translate[0] >= layer.translate[1] + 40 * 0.5
    assert along_x.translate[1] >= along_y.translate[1] + 48 * 0.5
    np.testing.assert_array_equal(layer.data, before)


def test_occlusion_widget_colour_side_views(make_napari_viewer, qtbot):
    """Side views of the depth-coloured rendering: grey side view x the colour of each row's depth.

    Reference: the kernel's own grey rendering along y and the matplotlib colour table
    (matplotlib documentation, Colormap.__call__).
    """
    import matplotlib

    from viewer_plugin.kernels.projection import occlusion_projection

    viewer, widget, layer, data, before = _occlusion_with_side_views(make_napari_viewer, qtbot,
                                                                   colour="magma")
    top = viewer.layers["cells occlusion (top)"]
    along_y = viewer.layers["cells occlusion side (along y)"]
    assert top.rgb and along_y.rgb and along_y.data.shape == (12, 48, 3)
    clim = tuple(float(v) for v in layer.contrast_limits)
    grey = occlusion_projection(data, z_step=0.5, density=widget._options(layer)["density"],
                              clim=clim, axis=1)  # (z, x): rows are depths
    colours = matplotlib.colormaps["magma"](np.arange(12) / 11)[:, :3]
    np.testing.assert_allclose(along_y.data, grey[..., None] * colours[:, None, :],
                               rtol=1e-5, atol=1e-6)
    np.testing.assert_array_equal(layer.data, before)

def test_cancel_stops_and_adds_nothing(make_napari_viewer, qtbot):
    from viewer_plugin.widgets.projection import OcclusionWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer, _stack(shape=(24, 40, 48)))
    widget = OcclusionWidget(viewer)
    worker = widget.compute(start_thread=False)
    assert widget.cancel_button.enabled and not widget.compute_button.enabled
    widget.cancel()  # before the first chunk: the first progress call raises Cancelled
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)
    assert not any("occlusion" in layer.name for layer in viewer.layers)
    assert widget.compute_button.enabled and not widget.cancel_button.enabled
    assert widget.status.value.startswith("Cancelled")


def test_export_figure_from_widget(make_napari_viewer, qtbot, tmp_path):
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    _run(qtbot, widget)
    files = widget.export_figure(tmp_path / "fig.png")
    assert files is not None and files.figure.exists() and files.sidecar.exists()
    assert widget.export_figure(tmp_path / "fig.png") is None  # refuses to overwrite



def test_export_figure_in_background(make_napari_viewer, qtbot, tmp_path, errors):
    """The button's export runs in a worker thread; the button is off until it is done."""
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    _run(qtbot, widget)
    # the worker is already running when export_figure returns, so wait on what its
    # handlers (connected before the start) change, not on its signals
    worker = widget.export_figure(tmp_path / "fig.pdf", background=True)
    assert worker is not None and not widget.export_button.enabled
    qtbot.waitUntil(lambda: widget.export_button.enabled, timeout=WAIT_MS)
    assert (tmp_path / "fig.pdf").exists() and widget.status.value.startswith("Exported")
    widget.export_figure(tmp_path / "fig.pdf", background=True)  # exists: refused
    qtbot.waitUntil(lambda: bool(errors), timeout=WAIT_MS)
    assert "fig.pdf" in errors[-1] and widget.status.value.startswith("Export failed")

def test_layer_list_refresh(make_napari_viewer):
    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    widget = PeakDepthWidget(viewer)
    assert widget.layer is None and not widget.compute_button.enabled
    viewer.add_image(np.zeros((8, 8)), name="flat")  # 2-D: not offered
    assert widget.layer is None
    layer = _add_stack(viewer)
    assert widget.layer is layer and widget.compute_button.enabled
    viewer.layers.remove(layer)
    assert widget.layer is None


def test_demo_fibre_slab_depth_colour(make_napari_viewer, qtbot):
    """The demo stack end to end: the peak depth map spans the slab's depth."""
    demo = pytest.importorskip("viewer_plugin.demo")
    from viewer_plugin.widgets.projection import PeakDepthWidget

    stack = demo.fibre_slab(seed=0, shape=(20, 64, 64))
    viewer = make_napari_viewer(show=True)
    layer = viewer.add_image(stack.data, name=stack.name, scale=stack.scale,
                             axis_labels=("z", "y", "x"))
    before = stack.data.copy()
    widget = PeakDepthWidget(viewer)
    _run(qtbot, widget)
    depth = viewer.layers[f"{stack.name} peak depth (\u00b5m)"]
    np.testing.assert_allclose(depth.data, stack.data.argmax(axis=0) * stack.scale[0])  # numpy
    np.testing.assert_array_equal(layer.data, before)


def test_kernel_error_becomes_notification(make_napari_viewer, qtbot, errors, monkeypatch):
    """A ParameterError raised inside the kernel (worker thread) is a notification, no layer."""
    from viewer_plugin.kernels import ParameterError
    from viewer_plugin.kernels import projection as projections
    from viewer_plugin.widgets.projection import DepthColourWidget

    def broken(*args, **kwargs):
        raise ParameterError("clim: expected a pair (low, high) with high > low, got (5, 5)")

    monkeypatch.setattr(projections, "depth_coded_projection", broken)
    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    _run(qtbot, widget)
    assert errors and errors[0].startswith("Depth colour projection: clim: expected")
    assert "cells depth colour" not in viewer.layers
    assert widget.compute_button.enabled


def test_parameter_change_updates_one_full_result_live(make_napari_viewer, qtbot):
    """A small stack: the full result arrives without Compute and follows the options."""
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    widget.method.value = "weighted"
    widget.gamma.value = 0.8  # changes inside the delay: one update
    qtbot.waitUntil(lambda: widget.result_layer is not None and widget.live_worker is None,
                    timeout=WAIT_MS)
    names = [layer.name for layer in viewer.layers]
    assert names.count("cells depth colour") == 1 and "cells depth colour (preview)" not in names
    assert viewer.layers["cells depth colour"].data.shape == (40, 48, 3)  # full resolution
    assert widget.result.method == "weighted" and widget.result.gamma == pytest.approx(0.8)


def test_widgets_open_from_the_plugin_menu(make_napari_viewer):
    """The manifest's display names build the three widgets (as Plugins > stackdepth does)."""
    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    for title in ("Depth colour projection", "Peak depth map", "Occlusion projection"):
        _dock, widget = viewer.window.add_plugin_dock_widget("stackdepth", title)
        assert widget.title == title and widget.layer is viewer.layers["cells"]


def test_export_time_series_uses_current_time_point(make_napari_viewer, qtbot, tmp_path):
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    data = np.stack([_stack(seed=1), _stack(seed=2)])
    viewer.add_image(data, name="series", scale=(30.0, 2.0, 0.5, 0.5),
                     axis_labels=("t", "z", "y", "x"))
    widget = DepthColourWidget(viewer)
    _run(qtbot, widget)
    assert viewer.layers["series depth colour"].data.shape == (2, 1, 40, 48, 3)
    viewer.dims.set_point(0, 30.0)  # the second time point
    worker = widget.update_live(start_thread=False, downsample=True)
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    assert widget.preview_layer.data.shape == (2, 1, 10, 12, 3)  # lined up like the full result
    plane = widget._current_plane(widget.result)
    np.testing.assert_array_equal(plane.rgb, widget.result.rgb[1])
    assert widget.export_figure(tmp_path / "t1.png") is not None


@pytest.mark.realdata
def test_real_cortex_depth_map(realdata, make_napari_viewer, qtbot):
    """Open data: cortex_cells_serial_twophoton.ome.tif (BSD 3-Clause, (c) 2020 Adam Tyson, UCL,
    brainglobe/cellfinder test data); 5 um z-steps. Reference: numpy argmax x z-step."""
    from viewer_plugin.io import read_stack
    from viewer_plugin.widgets.projection import PeakDepthWidget

    stack = read_stack(realdata / "cortex_cells_serial_twophoton.ome.tif")
    data = np.asarray(stack.data)
    viewer = make_napari_viewer(show=True)
    layer = viewer.add_image(data, name="cortex", scale=stack.scale, axis_labels=("z", "y", "x"))
    widget = PeakDepthWidget(viewer)
    assert widget.z_step.value == pytest.approx(5.0)
    _run(qtbot, widget)
    depth = viewer.layers["cortex peak depth (\u00b5m)"]
    np.testing.assert_allclose(depth.data, data.argmax(axis=0) * 5.0)
    np.testing.assert_array_equal(viewer.layers["cortex peak"].data, data.max(axis=0))
    np.testing.assert_array_equal(layer.data, np.asarray(read_stack(realdata /
                                  "cortex_cells_serial_twophoton.ome.tif").data))


def test_weighted_hint_says_depth_ignores_contrast(make_napari_viewer):
    """Weighted depths are weighted by the signal above the background (kernel docs), whatever
    the contrast limits: the dock says so with either contrast, and names the automatic limits."""
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    widget.live.value = False
    assert widget.method_hint.value == ""
    widget.method.value = "weighted"
    assert "background" in widget.method_hint.value and "only the brightness" in widget.method_hint.value
    widget.auto_contrast.value = True
    assert "background" in widget.method_hint.value and "background + 3 SD" in widget.clim_label.value


def test_lightness_varying_map_and_saturation_are_flagged(make_napari_viewer, qtbot):
    """A map whose lightness varies is marked; over 1 % saturated pixels gives a warning."""
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    layer = _add_stack(viewer)
    widget = DepthColourWidget(viewer)
    widget.live.value = False
    widget.cmap.value = "viridis"
    assert "lightness" in widget.cmap_hint.value
    widget.cmap.value = "CET-I1"
    assert widget.cmap_hint.value == ""
    layer.contrast_limits = (100.0, 200.0)  # the bars (about 505) are far above: saturated
    _run(qtbot, widget)
    # numpy reference: the share of pixels whose maximum exceeds the upper limit
    expected = float(np.mean(layer.data.max(axis=0) > 200.0))
    assert widget.result.saturated_fraction == pytest.approx(expected)
    assert expected > 0.01 and "saturated" in widget.saturation.value
    assert widget.result_info["saturated_fraction"] == pytest.approx(expected)


@pytest.mark.parametrize("pixel", [(0.4, 0.5), (2.0, 2.0)])
def test_dock_figure_is_drawn_to_scale(make_napari_viewer, qtbot, tmp_path, pixel):
    """The dock's export with anisotropic pixels: sidecar pixel size, aspect and scale bar
    (tests/figure_checks.py; the scale bar's definition: µm length / pixel width)."""
    from tests.cli.test_figure_geometry import mostly_black_stack
    from tests.figure_checks import check_figure_geometry
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    data = mostly_black_stack()
    viewer.add_image(data, name="aniso", scale=(1.5, *pixel), axis_labels=("z", "y", "x"))
    widget = DepthColourWidget(viewer)
    widget.live.value = False
    widget.auto_contrast.value = True
    _run(qtbot, widget)
    files = widget.export_figure(tmp_path / "fig.png")
    assert files is not None
    check_figure_geometry(files.figure, shape_yx=data.shape[1:], pixel_um=pixel)


@pytest.mark.parametrize("suffix", ["png", "svg"])
@pytest.mark.parametrize("dock", ["PeakDepthWidget", "OcclusionWidget"])
def test_peak_and_occlusion_figures_are_drawn_to_scale(make_napari_viewer, qtbot, tmp_path, dock,
                                                       suffix):
    """The peak depth map and occlusion docks export figures too; anisotropic pixels of
    0.4 x 0.5 µm: aspect, scale bar, resolution, vector key and bar (tests/figure_checks.py)."""
    from tests.cli.test_figure_geometry import mostly_black_stack
    from tests.figure_checks import check_figure_geometry
    from viewer_plugin.widgets import projection

    viewer = make_napari_viewer(show=True)
    data = mostly_black_stack()
    viewer.add_image(data, name="aniso", scale=(1.5, 0.4, 0.5), axis_labels=("z", "y", "x"))
    widget = getattr(projection, dock)(viewer)
    assert not widget.export_button.enabled  # nothing to export yet
    _run(qtbot, widget)
    assert widget.export_button.enabled
    files = widget.export_figure(tmp_path / f"fig.{suffix}")
    assert files is not None
    sidecar = check_figure_geometry(files.figure, shape_yx=data.shape[1:], pixel_um=(0.4, 0.5))
    assert sidecar["parameters"]["z_step_from"] == "layer scale"  # the dock's words


def test_peak_dock_figure_follows_the_depth_layer(make_napari_viewer, qtbot, tmp_path):
    """The figure uses the dock's depth colours and blanks what the depth layer blanks."""
    from matplotlib import colormaps

    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    layer = _add_stack(viewer, data)
    layer.contrast_limits = (150.0, 600.0)  # above the Poisson background of about 105
    widget = PeakDepthWidget(viewer)
    widget.depth_cmap.value = "magma"
    widget.hide_background.value = True
    _run(qtbot, widget)
    depth_layer = viewer.layers["cells peak depth (\u00b5m)"]
    assert depth_layer.colormap.name == "magma"
    files = widget.export_figure(tmp_path / "depth.png")
    record = json.loads(files.sidecar.read_text(encoding="utf-8"))
    assert record["parameters"]["blank_at_or_below"] == 150.0
    assert record["colour_bar"]["colour_map"] == "magma"
    assert record["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 22.0])
    panel = widget_panel(widget)
    blank = np.isnan(np.asarray(depth_layer.data))  # the layer's blanked pixels: black
    assert np.all(panel.image[blank] == 0) and blank.any()
    # the others: magma of depth / 22 µm (matplotlib reference)
    expected = colormaps["magma"](np.asarray(depth_layer.data)[~blank] / 22.0)[:, :3]
    np.testing.assert_allclose(panel.image[~blank], expected, atol=1e-6)


def widget_panel(widget):
    """The figure panel of the dock's last result, as its export draws it."""
    from viewer_plugin.jobs import figure_panel

    return figure_panel(widget.projected, widget._current_index(), **widget._figure_options())


def test_occlusion_dock_figure_is_a_rendering(make_napari_viewer, qtbot, tmp_path):
    """The occlusion dock's figure (coloured by depth) has the colour bar of depth and says it is
    a rendering with the density used."""
    from viewer_plugin.widgets.projection import OcclusionWidget

    viewer = make_napari_viewer(show=True)
    _add_stack(viewer)
    widget = OcclusionWidget(viewer)
    widget.colour.value = "CET-I1"
    widget.side_views.value = True  # the figure shows the top view
    _run(qtbot, widget)
    files = widget.export_figure(tmp_path / "occ.svg", title="Occlusion")
    record = json.loads(files.sidecar.read_text(encoding="utf-8"))
    density = widget._options(widget.layer)["density"]
    assert record["parameters"]["density_per_um"] == pytest.approx(density)
    assert record["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 22.0])
    assert record["image_shape"] == [40, 48]
    assert "not a measurement" in files.methods_text and "Max 1995" in files.methods_text
    assert "A rendering for showing" in files.figure.read_text(encoding="utf-8")
