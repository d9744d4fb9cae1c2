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
