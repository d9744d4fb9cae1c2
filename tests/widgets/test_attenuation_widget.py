"""The "Depth attenuation" dock widget under Xvfb: Fit, plot, Correct, source untouched, errors.

The demo's true lengths come from viewer_plugin.demo (layer.metadata["truth"]); the
estimate itself is checked against outside references in tests/kernels/test_attenuation.py.
"""

from __future__ import annotations

import numpy as np
import pytest

pytestmark = pytest.mark.gui

WAIT_MS = 120_000


def _run(qtbot, widget, action):
    worker = action(start_thread=False)
    assert worker is not None
    with qtbot.waitSignal(worker.returned, timeout=WAIT_MS):
        worker.start()
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)
    return worker


@pytest.fixture
def demo_viewer(make_napari_viewer):
    from viewer_plugin.demo import fibre_slab
    from viewer_plugin.samples import demo_layer

    viewer = make_napari_viewer(show=True)
    data, kwargs, _ = demo_layer(fibre_slab(seed=0, shape=(40, 128, 128)))
    layer = viewer.add_image(data, **kwargs)
    return viewer, layer


def test_fit_then_correct_adds_a_layer_and_keeps_the_source(demo_viewer, qtbot):
    from viewer_plugin.widgets.attenuation import AttenuationWidget

    viewer, layer = demo_viewer
    before = layer.data.copy()
    widget = AttenuationWidget(viewer)
    assert widget.layer_combo.value is layer
    assert widget.z_step.value == pytest.approx(layer.scale[0])
    _run(qtbot, widget, widget.fit)
    fit = widget.fit_result
    assert fit is not None and np.isfinite(fit.length_um)
    assert "ℓ =" in widget.result_label.value and "95 %" in widget.result_label.value
    assert "true (demo)" in widget.truth_label.value
    assert len(widget.figure.axes) == 2
    assert widget.correct_button.enabled
    _run(qtbot, widget, widget.correct)
    name = f"{layer.name} attenuation-corrected"
    assert name in viewer.layers
    out = viewer.layers[name]
    assert out.data.dtype == np.float32 and out.data.shape == layer.data.shape
    assert tuple(out.scale) == tuple(layer.scale) and tuple(out.translate) == tuple(layer.translate)
    np.testing.assert_array_equal(layer.data, before)
    assert "relative" in widget._caution.value
    widget.log_scale.value = False
    assert widget.figure.axes[0].get_yscale() == "linear"
    # a fit belongs to its layer: choosing the corrected layer clears it
    widget.layer_combo.value = out
    assert widget.fit_result is None and not widget.correct_button.enabled


def test_mask_from_shapes_and_bad_input(demo_viewer, qtbot, errors):
    from viewer_plugin.widgets.attenuation import AttenuationWidget

    viewer, layer = demo_viewer
    widget = AttenuationWidget(viewer)
    widget.z_step.value = 0.0
    assert widget.fit() is None
    assert errors and "Z-step: expected" in errors[-1]
    widget.z_step.value = float(layer.scale[0])
    shapes = viewer.add_shapes([np.array([[0, 0], [0, 60], [60, 60], [60, 0]]) * layer.scale[1]],
                               shape_type="rectangle", ndim=2)
    widget.mask_combo.value = shapes
    from viewer_plugin.widgets.attenuation import shapes_mask

    lateral = shapes_mask(shapes, layer, 0)
    assert lateral.shape == layer.data.shape[1:] and 0.15 < lateral.mean() < 0.3  # 60 x 60 of 128 x 128
    on_grid = viewer.add_shapes([np.array([[0, 0], [0, 60], [60, 60], [60, 0]])], shape_type="rectangle",
                                ndim=2, scale=layer.scale[1:])
    np.testing.assert_array_equal(shapes_mask(on_grid, layer, 0)[5:55, 5:55], True)
    assert abs(int(shapes_mask(on_grid, layer, 0).sum()) - int(lateral.sum())) < 300
    _run(qtbot, widget, widget.fit)
    assert widget.fit_result is not None
    # a 2-D layer is rejected with a notification, not an exception
    viewer.add_image(np.zeros((16, 16), np.uint16), name="flat")
    viewer.add_image(np.full((6, 16, 16), 5, np.uint16), name="constant")
    widget.layer_combo.value = viewer.layers["constant"]
    widget.mask_combo.value = None
    _run(qtbot, widget, widget.fit)
    assert errors and "expected structure" in errors[-1]


def test_cancel_stops_the_fit(demo_viewer, qtbot, monkeypatch):
    import napari.utils.notifications as notes

    from viewer_plugin.widgets.attenuation import AttenuationWidget

    infos: list[str] = []
    monkeypatch.setattr(notes, "show_info", infos.append)
    viewer, _ = demo_viewer
    widget = AttenuationWidget(viewer)
    worker = widget.fit(start_thread=False)
    widget.task.cancel()  # what the Cancel button does; the kernel stops at its first chunk
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)
    assert widget.fit_result is None  # no result shown from a cancelled fit
    assert not widget.correct_button.enabled
    assert all("error" not in i.lower() for i in infos)
