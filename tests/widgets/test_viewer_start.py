"""`stackdepth view --demo`: a viewer with the fibre slab and the five widgets docked."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("napari")

from viewer_plugin.commands.view import WIDGETS, open_in_viewer  # noqa: E402
from viewer_plugin.samples import sample_fibre_slab  # noqa: E402


@pytest.mark.gui
def test_demo_viewer_has_five_docked_widgets(make_napari_viewer, qtbot, tmp_path):
    viewer = make_napari_viewer(show=True)
    widgets = open_in_viewer(viewer, sample_fibre_slab())
    assert len(widgets) == 5
    # depth at a glance: the full-resolution depth colour image arrives without a click
    qtbot.waitUntil(lambda: widgets[0].live_worker is None and widgets[0].result_layer is not None,
                    timeout=120_000)
    assert [layer.name for layer in viewer.layers] == ["fibre slab", "fibre slab depth colour"]
    layer = viewer.layers["fibre slab"]
    assert viewer.layers["fibre slab depth colour"].data.shape == layer.data.shape[1:] + (3,)
    assert tuple(layer.scale) == pytest.approx((1.0, 0.3, 0.3))
    assert "truth" in layer.metadata
    docks = viewer.window.dock_widgets
    for name in WIDGETS:
        assert any(name in key for key in docks), (name, list(docks))
    shot = viewer.screenshot(str(tmp_path / "start.png"), canvas_only=True)
    assert shot.shape[-1] == 4 and np.asarray(shot)[..., :3].max() > 0  # the canvas shows the stack
