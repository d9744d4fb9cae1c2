"""Screenshots of the bleaching check on the synthetic demo (run under Xvfb).

    xvfb-run -a python docs/shots_bleaching.py

Writes docs/images/bleaching_series.png (check of the demo time series, recovered rate
against the true rate), bleaching_corrected.png (the corrected layer beside the original),
bleaching_single_stack.png (a single z-stack: the caveat), bleaching_two_pass.png (the
two-pass estimate against the demo truth) and bleaching_plot.png (the figure the command
line writes). Open them and look at them before committing.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("NAPARI_CONFIG", os.path.join(tempfile.mkdtemp(), "settings.yaml"))

from _shots_common import wait  # noqa: E402  (docs/ is on sys.path for these scripts)

IMAGES = Path(__file__).resolve().parent / "images"




def main() -> int:
    import napari
    from qtpy.QtWidgets import QApplication

    from viewer_plugin import demo
    from viewer_plugin.kernels import estimate_bleaching
    from viewer_plugin.plots.bleaching import bleaching_figure
    from viewer_plugin.samples import demo_layer
    from viewer_plugin.widgets.bleaching import TWO_PASS, BleachingWidget

    IMAGES.mkdir(exist_ok=True)
    viewer = napari.Viewer(show=True)
    viewer.window.resize(1500, 1000)
    app = QApplication.instance()

    series = demo.bleach_series()
    data, kwargs, _ = demo_layer(series)
    viewer.add_image(data, **kwargs)
    widget = BleachingWidget(viewer)
    viewer.window.add_dock_widget(widget, name="Bleaching check", area="right")
    wait(app, widget.check(start_thread=False), widget)
    viewer.screenshot(str(IMAGES / "bleaching_series.png"), canvas_only=False)

    wait(app, widget.correct(start_thread=False), widget)
    viewer.canvas.grid.enabled = True
    viewer.dims.set_current_step(0, series.data.shape[0] - 1)
    viewer.reset_view()
    viewer.canvas.overlays["text"].text = "last time point - left: original, right: bleach-corrected"
    viewer.canvas.overlays["text"].visible = True
    for _ in range(10):
        app.processEvents()
    viewer.screenshot(str(IMAGES / "bleaching_corrected.png"), canvas_only=False)
    viewer.canvas.grid.enabled = False
    viewer.canvas.overlays["text"].visible = False

    viewer.layers.clear()
    slab = demo.fibre_slab()
    data, kwargs, _ = demo_layer(slab)
    viewer.add_image(data, **kwargs)
    wait(app, widget.check(start_thread=False), widget)
    viewer.screenshot(str(IMAGES / "bleaching_single_stack.png"), canvas_only=False)

    viewer.layers.clear()
    for stack in demo.two_pass_pair():
        data, kwargs, _ = demo_layer(stack)
        viewer.add_image(data, **kwargs)
    widget.mode.value = TWO_PASS
    wait(app, widget.check(start_thread=False), widget)
    viewer.screenshot(str(IMAGES / "bleaching_two_pass.png"), canvas_only=False)

    report = estimate_bleaching(series.data, interval=series.scale[0])
    figure = bleaching_figure(report, truth_rate=series.truth["bleach_rate_per_frame"])
    figure.savefig(IMAGES / "bleaching_plot.png", dpi=100)
    viewer.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
