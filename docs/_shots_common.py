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
