"""Small helpers shared by the dock widgets (layers in, layers out)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from magicgui.widgets import Label, TextEdit

if TYPE_CHECKING:  # pragma: no cover
    import napari


def image_layer_choices(viewer: "napari.Viewer", *, min_ndim: int = 3) -> list[Any]:
    """Image layers of *viewer* with at least *min_ndim* dimensions (no RGB)."""
    from napari.layers import Image

    return [
        layer
        for layer in viewer.layers
        if isinstance(layer, Image) and not layer.rgb and layer.ndim >= min_ndim
    ]


def connect_layer_events(viewer: "napari.Viewer", callback: Any) -> None:
    """Call *callback* whenever layers are added, removed or reordered."""
    for name in ("inserted", "removed", "reordered"):
        getattr(viewer.layers.events, name).connect(callback)


def disconnect_layer_events(viewer: "napari.Viewer", callback: Any) -> None:
    """Undo :func:`connect_layer_events` (quietly, also while napari shuts down)."""
    for name in ("inserted", "removed", "reordered"):
        try:
            getattr(viewer.layers.events, name).disconnect(callback)
        except (RuntimeError, TypeError, ValueError):
            pass


def wrapped(label: Label) -> Label:
    """*label* with word wrap on (for short fixed notes)."""
    label.native.setWordWrap(True)
    return label


def result_text(*, lines: int = 5) -> TextEdit:
    """A read-only, selectable text box for a result summary of several sentences.

    A word-wrapped label in a dock gets too little height once its text is
    long (Qt does not pass the wrapped height up through the dock's scroll
    area), so long results were cut off; this box keeps at least *lines*
    lines and scrolls beyond them, and its text can be copied.
    """
    box = TextEdit(value="")
    native = box.native
    native.setReadOnly(True)
    native.setFrameStyle(0)
    native.viewport().setAutoFillBackground(False)
    metrics = native.fontMetrics()
    margins = native.contentsMargins()
    native.setMinimumHeight(lines * metrics.lineSpacing() + margins.top() + margins.bottom() + 8)
    return box
