"""``stackdepth view [PATH] [--demo]``: open napari with the five stackdepth widgets docked."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ._common import CommandError, check_input

#: Display names of the widgets, as in napari.yaml, in dock order.
WIDGETS = (
    "Depth colour projection",
    "Peak depth map",
    "Occlusion projection",
    "Depth attenuation",
    "Bleaching check",
)


#: Width of the docked tools in pixels: readable, and leaves the image most of a 1600-pixel screen.
DOCK_WIDTH = 430


def register(sub: Any) -> None:
    parser = sub.add_parser("view", help="open napari with the stackdepth widgets",
                            description="Open napari with the five stackdepth widgets docked and "
                            "a file (OME-TIFF or TIFF), an OME-Zarr folder (opened lazily) or the synthetic demo "
                            "loaded.")
    parser.add_argument("path", nargs="?", help="OME-TIFF or TIFF stack, or OME-Zarr folder, to open")
    parser.add_argument("--demo", action="store_true", help="load the synthetic fibre-slab demo")
    parser.add_argument("--screenshot", metavar="PNG",
                        help="save a screenshot of the window once it is shown, then quit")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..io.reader import read_layers

    layers = []
    if args.path:
        check_input(args.path)  # a missing file or a folder that is no image: exit 2 before the GUI
        layers.extend(read_layers(args.path))  # OME-Zarr opens lazily, as a multiscale layer
    if args.demo:
        from ..samples import sample_fibre_slab

        layers.extend(sample_fibre_slab())
    if args.screenshot and not Path(args.screenshot).resolve().parent.is_dir():
        raise CommandError(f"--screenshot: folder {Path(args.screenshot).parent} does not exist")
    import napari

    viewer = napari.Viewer(title="stackdepth")
    viewer.window.resize(1600, 1000)
    widgets = open_in_viewer(viewer, layers)
    if args.screenshot:
        _shoot_when_ready(viewer, widgets[0], args.screenshot)
    napari.run()
    return 0


_TIMERS: list[Any] = []


def _shoot_when_ready(viewer: Any, first: Any, path: str, *, timeout_s: float = 120.0) -> None:
    """Save a screenshot once the first dock's live result is shown (or after *timeout_s*), then quit."""
    import time

    from qtpy.QtCore import QTimer

    start = time.monotonic()
    timer = QTimer()
    _TIMERS.append(timer)  # kept alive until the viewer closes

    def poll() -> None:
        ready = getattr(first, "live_worker", None) is None and (
            getattr(first, "result_layer", None) is not None or not viewer.layers)
        if ready or time.monotonic() - start > timeout_s:
            timer.stop()
            QTimer.singleShot(1000, shoot)  # let the canvas draw the new layer

    def shoot() -> None:
        viewer.screenshot(path, canvas_only=False)
        viewer.close()

    timer.timeout.connect(poll)
    timer.start(200)


def open_in_viewer(viewer: Any, layers: list[tuple[Any, dict[str, Any], str]]) -> list[Any]:
    """Add *layers* to *viewer* and dock the five widgets, tabbed together.

    Returns the docked widgets in the order of :data:`WIDGETS`.
    """
    for data, kwargs, kind in layers:
        getattr(viewer, f"add_{kind}")(data, **kwargs)
    widgets, docks = [], []
    for name in WIDGETS:
        dock, widget = viewer.window.add_plugin_dock_widget("stackdepth", name)
        docks.append(dock)
        widgets.append(widget)
    for dock, widget in zip(docks, widgets):
        dock.setWindowTitle(widget.tab_title)  # short tab labels that read whole
    main_window = docks[0].parentWidget()
    if main_window is not None and hasattr(main_window, "tabifyDockWidget"):
        from qtpy.QtCore import Qt

        for dock in docks[1:]:
            main_window.tabifyDockWidget(docks[0], dock)
        docks[0].raise_()
        # the image keeps most of the window: the docks take a fixed, readable width
        main_window.resizeDocks([docks[0]], [DOCK_WIDTH], Qt.Orientation.Horizontal)
        from qtpy.QtCore import QTimer

        QTimer.singleShot(200, viewer.reset_view)  # fit the image to the canvas the docks leave
    if layers and hasattr(widgets[0], "update_live"):
        widgets[0].update_live()  # depth at a glance: full resolution when the stack allows
    return widgets
