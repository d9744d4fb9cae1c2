"""Fixtures shared by the widget tests (napari under Xvfb)."""

from __future__ import annotations

import pytest


@pytest.fixture
def errors(monkeypatch):
    """Collect napari error notifications instead of showing them.

    Widgets and the background runner look ``show_error`` up on
    :mod:`napari.utils.notifications` when they call it, so one patch catches all.
    """
    seen: list[str] = []
    import napari.utils.notifications as notes

    monkeypatch.setattr(notes, "show_error", seen.append)
    return seen


@pytest.fixture(autouse=True)
def _quiet_docks(request, monkeypatch):
    """Stop the projection docks' live updates before the test's viewer closes.

    Tests build docks without docking them, so closing the viewer does not
    destroy them; a live update started by a pause timer would then add a layer
    to a closed viewer. The finalizer is added when the first dock is built,
    after ``make_napari_viewer`` was set up, so it runs before that closes the viewer.
    """
    import functools

    from viewer_plugin.widgets._projection_base import ProjectionDock

    built = []
    original = ProjectionDock.__init__

    bots = []

    def stop_all():
        qtbot = bots[0]
        for dock in built:
            dock._live_timer.stop()
            dock._live_pending = False
        qtbot.waitUntil(lambda: all(d.live_worker is None for d in built), timeout=300_000)

    @functools.wraps(original)
    def recording(self, *args, **kwargs):
        if not built:
            bots.append(request.getfixturevalue("qtbot"))  # set up now: torn down after us
            request.node.addfinalizer(stop_all)  # LIFO: before the viewer's own teardown
        original(self, *args, **kwargs)
        built.append(self)

    monkeypatch.setattr(ProjectionDock, "__init__", recording)
    yield
