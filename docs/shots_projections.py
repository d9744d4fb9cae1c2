"""Screenshots of the three projection widgets on the synthetic demo (run under Xvfb).

    xvfb-run -a python docs/shots_projections.py

Writes docs/images/projection_depth_colour.png (the depth colour widget, its 2-D key and its
RGB result), projection_peak_depth.png (maximum and depth map in µm with napari's colour bar),
projection_occlusion.png (occlusion top view coloured by depth with the default map, the two
side views below it) and projection_figure.png (the figure "Export figure…" saves for a paper).
Open them and look at them before committing.
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("NAPARI_CONFIG", os.path.join(tempfile.mkdtemp(), "settings.yaml"))

from _shots_common import demo_viewer, settle, wait  # noqa: E402  (docs/ is on sys.path for these scripts)

IMAGES = Path(__file__).resolve().parent / "images"






def only_visible(viewer, *names: str) -> None:
    for layer in viewer.layers:
        layer.visible = layer.name in names


def dock(viewer, widget, name: str) -> None:
    viewer.window.remove_dock_widget("all")
    viewer.window.add_dock_widget(widget, name=name, area="right")


def main() -> int:

    from viewer_plugin.kernels.projection import DEFAULT_CMAP
    from viewer_plugin.widgets.projection import (
        DepthColourWidget,
        OcclusionWidget,
        PeakDepthWidget,
    )

    IMAGES.mkdir(exist_ok=True)
    viewer, app, slab, source = demo_viewer(1500)
    name = source.name

    colour = DepthColourWidget(viewer)
    dock(viewer, colour, "Depth colour projection")
    wait(app, colour.compute(start_thread=False), colour)
    only_visible(viewer, f"{name} depth colour")
    viewer.reset_view()
    settle(app)
    viewer.screenshot(str(IMAGES / "projection_depth_colour.png"), canvas_only=False)
    colour.live.value = False  # the next shots change the source's contrast: no preview then

    peak = PeakDepthWidget(viewer)
    source.contrast_limits = (150.0, source.contrast_limits[1])  # above the demo's background
    peak.hide_background.value = True
    dock(viewer, peak, "Peak depth map")
    wait(app, peak.compute(start_thread=False), peak)
    only_visible(viewer, f"{name} peak depth (\u00b5m)")
    viewer.reset_view()
    settle(app)
    viewer.screenshot(str(IMAGES / "projection_peak_depth.png"), canvas_only=False)

    occlusion = OcclusionWidget(viewer)
    occlusion.side_views.value = True
    occlusion.colour.value = DEFAULT_CMAP  # each slice emits its depth's colour, side views too
    dock(viewer, occlusion, "Occlusion projection")
    wait(app, occlusion.compute(start_thread=False), occlusion)
    only_visible(viewer, f"{name} occlusion (top)", f"{name} occlusion side (along y)",
                 f"{name} occlusion side (along x)")
    viewer.reset_view()
    settle(app)
    viewer.screenshot(str(IMAGES / "projection_occlusion.png"), canvas_only=False)

    # the figure "Export figure..." saves, from the same result and parameters
    with tempfile.TemporaryDirectory() as tmp:
        files = colour.export_figure(Path(tmp) / "figure.png",
                                     title="Fibre slab (synthetic demo), depth colour-coded")
        shutil.copyfile(files.figure, IMAGES / "projection_figure.png")
        print(files.methods_text)
    viewer.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
