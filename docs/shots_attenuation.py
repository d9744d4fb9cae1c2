"""Screenshots of the depth attenuation widget on the synthetic demo (run under Xvfb).

    xvfb-run -a python docs/shots_attenuation.py

Writes docs/images/attenuation_widget.png (Fit on the demo fibre slab: recovered
length against the true one), attenuation_corrected.png (the corrected layer beside
the original, side view) and attenuation_plot.png (the figure the command line
writes with --plot). Open them and look at them before committing.
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
    import numpy as np
    from qtpy.QtWidgets import QApplication

    from viewer_plugin import demo
    from viewer_plugin.kernels import estimate_attenuation
    from viewer_plugin.plots.attenuation import attenuation_figure
    from viewer_plugin.samples import demo_layer
    from viewer_plugin.widgets.attenuation import AttenuationWidget

    IMAGES.mkdir(exist_ok=True)
    viewer = napari.Viewer(show=True)
    viewer.window.resize(1500, 1050)
    app = QApplication.instance()

    slab = demo.fibre_slab()
    data, kwargs, _ = demo_layer(slab)
    layer = viewer.add_image(data, **kwargs)
    widget = AttenuationWidget(viewer)
    viewer.window.add_dock_widget(widget, name="Depth attenuation", area="right")
    # a side view (depth downwards, maximum over y) shows the fall-off with depth
    viewer.dims.order = (1, 0, 2)
    viewer.dims.set_current_step(1, data.shape[1] // 2)
    viewer.dims.thickness = (1.0, data.shape[1] * slab.scale[1], 1.0)
    layer.projection_mode = "max"
    layer.contrast_limits = (100, float(np.percentile(data.max(axis=1), 99.5)))
    viewer.reset_view()
    wait(app, widget.fit(start_thread=False), widget)
    viewer.screenshot(str(IMAGES / "attenuation_widget.png"), canvas_only=False)

    wait(app, widget.correct(start_thread=False), widget)
    corrected = viewer.layers[f"{layer.name} attenuation-corrected"]
    corrected.contrast_limits = layer.contrast_limits
    viewer.canvas.grid.enabled = True
    corrected.projection_mode = "max"
    viewer.reset_view()
    for _ in range(10):
        app.processEvents()
    viewer.screenshot(str(IMAGES / "attenuation_corrected.png"), canvas_only=False)

    fit = estimate_attenuation(slab.data, z_step=slab.scale[0])
    figure = attenuation_figure(fit, max_gain=10.0, truth=slab.truth, title="fibre slab (demo)")
    figure.savefig(IMAGES / "attenuation_plot.png", dpi=110)
    viewer.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
