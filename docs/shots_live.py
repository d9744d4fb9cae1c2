"""Screenshots of live inspection on the synthetic demo (run under Xvfb).

    xvfb-run -a -s "-screen 0 1600x1000x24" python docs/shots_live.py

Writes docs/images/live_slab.png (the depth colour dock in slab mode: a 10 µm slab around the
slice the z slider shows, coloured with the whole stack's depth range) and live_path.png (the
Peak depth map dock plotting depth and peak along a path drawn over one fibre of the demo).
The path follows the demo's own centre line of that fibre, so the printed 3-D length can be set
beside the true one. Open the PNGs and look at them before committing.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

import numpy as np

os.environ.setdefault("NAPARI_CONFIG", os.path.join(tempfile.mkdtemp(), "settings.yaml"))

from _shots_common import demo_viewer, settle, wait  # noqa: E402  (docs/ is on sys.path for these scripts)

IMAGES = Path(__file__).resolve().parent / "images"


def _idle(app, widget, timeout: float = 120.0) -> None:
    import time

    start = time.monotonic()
    while (widget.live_worker is not None or widget._live_timer.isActive()) \
            and time.monotonic() - start < timeout:
        app.processEvents()
        time.sleep(0.02)
    settle(app)


def _demo_fibre(voxel_um, shape) -> np.ndarray:
    """Centre line (z, y, x in µm) of a thick, bright, shallow fibre of the demo (rebuilt from the
    demo's seed): the kind of fibre whose depth the peak depth map reads well."""
    from viewer_plugin import demo

    extent = np.asarray(voxel_um, float) * (np.asarray(shape) - 1)
    fibres = demo._fibres(np.random.default_rng(0), extent, 14)  # what fibre_slab(seed=0) draws
    good = [f for f in fibres if f[1] >= 0.8 and f[2] >= 1.0 and f[0][:, 0].mean() < 30]
    return max(good, key=lambda f: len(f[0]))[0]


def main() -> int:

    from viewer_plugin.widgets.projection import DepthColourWidget, PeakDepthWidget

    IMAGES.mkdir(exist_ok=True)
    viewer, app, slab, source = demo_viewer(1600)
    name = source.name

    colour = DepthColourWidget(viewer)
    viewer.window.add_dock_widget(colour, name="Depth colour projection", area="right")
    _idle(app, colour)
    colour.slab.value = True
    viewer.dims.set_current_step(0, 20)
    _idle(app, colour)
    for layer in viewer.layers:
        layer.visible = layer.name == f"{name} depth colour"
    viewer.reset_view()
    settle(app)
    viewer.screenshot(str(IMAGES / "live_slab.png"), canvas_only=False)
    colour.slab.value = False
    viewer.window.remove_dock_widget("all")

    peak = PeakDepthWidget(viewer)
    viewer.window.add_dock_widget(peak, name="Peak depth map", area="right")
    wait(app, peak.compute(start_thread=False), peak)
    line = _demo_fibre(slab.scale, slab.data.shape)
    inside = line[(line[:, 1] > 1) & (line[:, 1] < 75) & (line[:, 2] > 1) & (line[:, 2] < 75)]
    vertices = inside[::25, 1:] / np.asarray(slab.scale[1:])  # pixels (y, x), every ~4 µm
    shapes = viewer.add_shapes([vertices * np.asarray(slab.scale[1:])], shape_type="path",
                               edge_color="white", edge_width=0.6, name=f"{name} path",
                               units=("micrometer", "micrometer"))
    peak.path_combo.reset_choices()
    peak.path_combo.value = shapes
    profile = peak.plot_path()
    segment = inside[::25][:, :]
    true_3d = float(np.sum(np.linalg.norm(np.diff(inside, axis=0), axis=1)))
    print(f"path: measured 2-D {profile.length_2d_um:.1f} um, 3-D {profile.length_3d_um:.1f} um "
          f"{profile.length_3d_range_um}; demo centre line 3-D {true_3d:.1f} um "
          f"(through {len(segment)} vertices)")
    for layer in viewer.layers:
        layer.visible = layer.name in (f"{name} peak depth (\u00b5m)", shapes.name)
    viewer.reset_view()
    settle(app, 1.0)
    viewer.screenshot(str(IMAGES / "live_path.png"), canvas_only=False)
    viewer.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
