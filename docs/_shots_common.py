"""Helpers shared by the docs/shots_*.py screenshot scripts (not a screenshot script itself)."""

from __future__ import annotations

import time


def settle(app, seconds: float = 0.5) -> None:
    """Let Qt process pending events (layer drawing, dock layout) before a screenshot."""
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        app.processEvents()
        time.sleep(0.02)


def wait(app, worker, widget, timeout: float = 300.0) -> None:
    """Start *worker* and process events until the widget's task has finished."""
    worker.start()
    start = time.monotonic()
    while widget.task.running and time.monotonic() - start < timeout:
        app.processEvents()
        time.sleep(0.02)
    settle(app)


def demo_viewer(width: int = 1500, height: int = 1000):
    """(viewer, app, demo stack, source layer): the demo fibre slab in a new napari window, with
    the projection kernels compiled first."""
    import napari
    from qtpy.QtWidgets import QApplication

    from viewer_plugin import demo
    from viewer_plugin.kernels.projection import warm_up
    from viewer_plugin.samples import demo_layer

    warm_up()
    viewer = napari.Viewer(show=True)
    viewer.window.resize(width, height)
    slab = demo.fibre_slab()
    data, kwargs, _ = demo_layer(slab)
    return viewer, QApplication.instance(), slab, viewer.add_image(data, **kwargs)
