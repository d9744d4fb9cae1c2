"""Small helpers shared by the dock widgets (layers in, layers out)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Sequence

import numpy as np
from magicgui.widgets import Container, Label, TextEdit

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


def layer_step(layer: Any, axis: int) -> float:
    """The layer's scale along *axis* (um per voxel when the file said so)."""
    return float(layer.scale[axis])


def projected_geometry(layer: Any, axis: int) -> dict[str, Any]:
    """``scale``/``translate`` of *layer* with *axis* removed, for a projection."""
    keep = [i for i in range(layer.ndim) if i != axis]
    return {
        "scale": tuple(float(layer.scale[i]) for i in keep),
        "translate": tuple(float(layer.translate[i]) for i in keep),
    }


def same_geometry(layer: Any) -> dict[str, Any]:
    """``scale``/``translate`` of *layer*, for a result of the same shape."""
    return {"scale": tuple(layer.scale), "translate": tuple(layer.translate)}


def leading_axis_labels(layer: Any) -> Sequence[str]:
    """Axis labels of a layer (napari's, or generic ones)."""
    labels = getattr(layer, "axis_labels", None)
    if labels is None:
        return tuple(f"axis {i}" for i in range(layer.ndim))
    return tuple(labels)


def snapshot(data: Any) -> Any:
    """A cheap fingerprint of array data, used by tests to prove it is unchanged."""
    arr = np.asarray(data)
    return arr.shape, arr.dtype, float(np.sum(arr, dtype=np.float64))


class PlaceholderWidget(Container):
    """A dock widget that only says, in one line, what it will do."""

    purpose = ""

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        super().__init__(widgets=[Label(value=self.purpose)])
        self.viewer = napari_viewer
