"""Shared parts of the three projection dock widgets.

Every projection widget has the same top (which stack, which axis is depth,
the z-step in µm) and the same bottom (Compute, Cancel, a status line). The
widgets translate layers into kernel calls and kernel results into new
layers; they never change the source layer or its data.
"""

from __future__ import annotations

import logging
import threading
from typing import TYPE_CHECKING, Any, Callable

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, Container, FloatSpinBox, Label, PushButton

from .._shared.progress import Cancelled
from ._common import (
    connect_layer_events,
    disconnect_layer_events,
    image_layer_choices,
    layer_step,
    leading_axis_labels,
)
from ._runner import BackgroundTask

if TYPE_CHECKING:  # pragma: no cover
    import napari

logger = logging.getLogger(__name__)

#: Default maximum number of voxels of a preview (downsampled copy).
PREVIEW_VOXELS = 8_000_000

_WARM_UP_LOCK = threading.Lock()
_WARM_UP_STARTED: list[bool] = []


def start_warm_up() -> None:
    """Compile the projection kernels once, in a background thread."""
    with _WARM_UP_LOCK:
        if _WARM_UP_STARTED:
            return
        _WARM_UP_STARTED.append(True)

    def run() -> None:
        from ..kernels import projection as projections

        warm = getattr(projections, "warm_up", None)
        if warm is not None:
            try:
                warm()
            except Exception:  # noqa: BLE001 - a failed warm-up only costs time later
                logger.debug("projection kernels warm-up failed", exc_info=True)

    threading.Thread(target=run, name="stackdepth-warm-up", daemon=True).start()


def default_depth_axis(layer: Any) -> int:
    """The axis labelled z/Z in ``layer.axis_labels``, else ``ndim - 3``."""
    labels = [str(label).strip().lower() for label in leading_axis_labels(layer)]
    for i, label in enumerate(labels):
        if label in ("z", "depth"):
            return i
    return max(0, layer.ndim - 3)


def layer_data(layer: Any) -> Any:
    """Full-resolution data of an image layer (level 0 of a multiscale layer)."""
    return layer.data[0] if getattr(layer, "multiscale", False) else layer.data


def geometry_without(layer: Any, axis: int) -> dict[str, Any]:
    """scale, translate, units and axis labels of *layer* with *axis* removed."""
    keep = [i for i in range(layer.ndim) if i != axis]
    labels = leading_axis_labels(layer)
    units = getattr(layer, "units", None)
    out: dict[str, Any] = {
        "scale": tuple(float(layer.scale[i]) for i in keep),
        "translate": tuple(float(layer.translate[i]) for i in keep),
        "axis_labels": tuple(str(labels[i]) for i in keep),
    }
    if units is not None:
        out["units"] = tuple(str(units[i]) for i in keep)
    return out


def span_depth(data: np.ndarray, layer: Any, axis: int,
               geometry: dict[str, Any]) -> tuple[np.ndarray, dict[str, Any]]:
    """Insert the projected *axis* back as one slice covering the stack's whole depth.

    napari lines up layers of different dimensionality by their last axes; a (t, y, x)
    projection of a (t, z, y, x) stack would otherwise step with the z slider. The slice
    has scale ``n * step`` and sits at the stack's centre, so it is shown at every z.
    """
    n, step = int(layer.data.shape[axis]), float(layer.scale[axis])
    out = dict(geometry)
    out["scale"] = list(geometry["scale"])
    out["scale"].insert(axis, n * step)
    out["translate"] = list(geometry["translate"])
    out["translate"].insert(axis, float(layer.translate[axis]) + (n - 1) * step / 2.0)
    out["axis_labels"] = list(geometry["axis_labels"])
    out["axis_labels"].insert(axis, str(leading_axis_labels(layer)[axis]))
    if "units" in geometry:
        out["units"] = list(geometry["units"])
        out["units"].insert(axis, str(layer.units[axis]))
    return np.expand_dims(data, axis), out


def preview_step(shape: tuple[int, ...], axis: int, *, voxels: int = PREVIEW_VOXELS) -> int:
    """Step in y and x for a preview: 4, or more so the copy stays below *voxels*."""
    total = float(np.prod(shape, dtype=np.float64))
    step = 4
    while total / (step * step) > voxels:
        step *= 2
    return step


def downsampled(data: Any, axis: int, step: int) -> tuple[Any, tuple[int, ...]]:
    """Every *step*-th pixel along the last two non-depth axes (a view, no copy)."""
    others = [i for i in range(data.ndim) if i != axis][-2:]
    index = tuple(slice(None, None, step) if i in others else slice(None) for i in range(data.ndim))
    return data[index], tuple(others)


class ProjectionWidget(Container):
    """Base of the projection dock widgets: stack, depth axis, z-step, run controls.

    Subclasses set ``title``, add their options with :meth:`_add_options`, and
    implement :meth:`_job` (runs in the worker) and :meth:`_show` (GUI thread).
    """

    title = "Projection"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        super().__init__(labels=True)
        self.viewer = napari_viewer
        self.task = BackgroundTask(label=self.title)
        self.last_worker: Any = None
        self._layer_connected: Any = None
        self.layer_combo = ComboBox(label="Stack", choices=self._layer_choices,
                                    tooltip="An image layer with 3 or more dimensions")
        self.axis_combo = ComboBox(label="Depth axis", choices=self._axis_choices,
                                   tooltip="Axis along which slices are stacked (z)")
        self.override_z = CheckBox(text="Override z-step", value=False,
                                   tooltip="Use your own z-step instead of the layer's scale")
        self.z_step = FloatSpinBox(label="z-step (\u00b5m)", value=1.0, min=1e-4, max=1e5,
                                   step=0.1, enabled=False,
                                   tooltip="Distance between slices in \u00b5m; read from the layer scale")
        self.z_hint = Label(value="")
        self.extend([self.layer_combo, self.axis_combo, self.z_step, self.override_z, self.z_hint])
        self._add_options()
        self.compute_button = PushButton(text="Compute")
        self.cancel_button = PushButton(text="Cancel", enabled=False)
        self.status = Label(value="")
        self.extend([self.compute_button, self.cancel_button, self.status])
        for widget in self:
            if isinstance(widget, Label):  # long messages wrap instead of widening the dock
                widget.native.setWordWrap(True)
        self.compute_button.changed.connect(self.compute)
        self.cancel_button.changed.connect(self.cancel)
        self.task.started.append(self._on_started)
        self.task.finished.append(self._on_finished)
        self.layer_combo.changed.connect(self._on_layer_changed)
        self.axis_combo.changed.connect(self._on_axis_changed)
        self.override_z.changed.connect(self._on_override)
        self.z_step.changed.connect(self._on_parameter_changed)
        connect_layer_events(self.viewer, self._refresh_layers)
        self.native.destroyed.connect(self._disconnect_viewer)
        self._on_layer_changed(self.layer_combo.value)
        start_warm_up()

    # ----------------------------------------------------------- subclasses
    def _add_options(self) -> None:
        """Append the widget's own option widgets (called once in ``__init__``)."""

    def _job(self, data: Any, axis: int, z_step: float, options: dict[str, Any],
             progress: Callable[[int, int], None]) -> Any:
        raise NotImplementedError

    def _show(self, layer: Any, axis: int, z_step: float, options: dict[str, Any], result: Any) -> None:
        raise NotImplementedError

    def _options(self, layer: Any) -> dict[str, Any]:
        """Options read from the dock (GUI thread), handed to :meth:`_job`."""
        return {}

    def _on_parameter_changed(self, *_: Any) -> None:
        """Hook for previews."""

    def _layer_changed_hook(self, layer: Any) -> None:
        """Hook for subclasses when another stack is picked."""

    # ----------------------------------------------------------- layers
    def _layer_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        return [(layer.name, layer) for layer in image_layer_choices(self.viewer, min_ndim=3)]

    def _axis_choices(self, _widget: Any = None) -> list[tuple[str, int]]:
        layer = self.layer_combo.value if hasattr(self, "layer_combo") else None
        if layer is None:
            return []
        labels = leading_axis_labels(layer)
        return [(f"{i}: {labels[i]}", i) for i in range(layer.ndim)]

    def _refresh_layers(self, *_: Any) -> None:
        before = self.layer_combo.value
        self.layer_combo.reset_choices()
        if self.layer_combo.value is before and before is not None:
            return
        self._on_layer_changed(self.layer_combo.value)

    def _disconnect_viewer(self, *_: Any) -> None:
        disconnect_layer_events(self.viewer, self._refresh_layers)
        self._watch_layer(None)
        self._on_close()

    def _on_close(self) -> None:
        """Hook: the dock widget is being destroyed (stop timers, previews)."""

    @property
    def layer(self) -> Any:
        return self.layer_combo.value

    def _watch_layer(self, layer: Any) -> None:
        """Follow the source layer's scale and contrast (for the z-step and previews)."""
        old = self._layer_connected
        if old is not None:
            for name in ("scale", "contrast_limits"):
                try:
                    getattr(old.events, name).disconnect(self._on_source_event)
                except (RuntimeError, TypeError, ValueError):
                    pass
        self._layer_connected = layer
        if layer is not None:
            layer.events.scale.connect(self._on_source_event)
            layer.events.contrast_limits.connect(self._on_source_event)

    def _on_source_event(self, event: Any = None) -> None:
        if getattr(event, "type", "") == "scale":
            self._sync_z_step()
        self._on_parameter_changed()

    def _on_layer_changed(self, layer: Any) -> None:
        self._watch_layer(layer)
        with self.axis_combo.changed.blocked():
            self.axis_combo.reset_choices()
        if layer is None:
            self.compute_button.enabled = False
            self.status.value = "Open or pick a z-stack (an image layer with 3 or more dimensions)."
            return
        with self.axis_combo.changed.blocked():
            self.axis_combo.value = default_depth_axis(layer)
        self.compute_button.enabled = not self.task.running
        self.status.value = ""
        self._sync_z_step()
        self._layer_changed_hook(layer)

    def _on_axis_changed(self, *_: Any) -> None:
        self._sync_z_step()
        self._layer_changed_hook(self.layer)

    def _on_override(self, value: bool) -> None:
        self.z_step.enabled = bool(value)
        self._sync_z_step()
        self._on_parameter_changed()

    def _sync_z_step(self) -> None:
        layer, axis = self.layer, self.axis_combo.value
        if layer is None or axis is None:
            return
        step = layer_step(layer, axis)
        if not self.override_z.value:
            with self.z_step.changed.blocked():
                self.z_step.value = step
        units = getattr(layer, "units", None)
        unit = str(units[axis]) if units is not None else "pixel"
        if self.override_z.value:
            self.z_hint.value = f"layer scale along depth: {step:g} ({unit})"
        elif unit in ("pixel", "px") and step == 1.0:
            self.z_hint.value = ("z-step 1 from a layer without physical units: "
                                 "check the voxel size and override if needed")
        else:
            self.z_hint.value = ""

    def current_z_step(self) -> float:
        return float(self.z_step.value)

    # ----------------------------------------------------------- running
    def compute(self, *_: Any, start_thread: bool = True) -> Any:
        """Run the full computation on the picked stack; returns the napari worker."""
        from napari.utils.notifications import show_error

        layer = self.layer
        if layer is None:
            show_error(f"{self.title}: no stack picked; open a z-stack first")
            return None
        from .._shared.validation import check_number

        axis = int(self.axis_combo.value)
        try:
            z_step = check_number(self.current_z_step(), name="z-step (\u00b5m)", low=0.0,
                                  low_open=True)
            options = self._options(layer)
        except ValueError as exc:
            show_error(f"{self.title}: {exc}")
            return None
        data = layer_data(layer)

        def job(progress: Callable[[int, int], None]) -> Any:
            return self._job(data, axis, z_step, options, progress)

        def on_result(result: Any) -> None:
            self._show(layer, axis, z_step, options, result)

        def on_stopped(exc: BaseException) -> None:  # the runner has shown the notification
            self.status.value = "cancelled" if isinstance(exc, Cancelled) else f"stopped: {exc}"

        worker = self.task.start(job, on_result=on_result, on_stopped=on_stopped,
                                 start_thread=start_thread)
        self.last_worker = worker
        return worker

    def cancel(self, *_: Any) -> None:
        """Stop the running computation at its next chunk; nothing is added."""
        if self.task.running:
            self._cancelling = True
            self.task.cancel()

    def _on_started(self) -> None:
        self._cancelling = False
        self.compute_button.enabled = False
        self.cancel_button.enabled = True
        self.status.value = "Computing\u2026"

    def _on_finished(self) -> None:
        self.compute_button.enabled = self.layer is not None
        self.cancel_button.enabled = False
        if getattr(self, "_cancelling", False):
            self.status.value = "Cancelled: no layer added."
            self._cancelling = False
        elif self.status.value == "Computing\u2026":
            self.status.value = ""

    def add_result(self, data: Any, layer: Any, axis: int, *, name: str, **kwargs: Any) -> Any:
        """Add *data* (the projection of *layer* along *axis*) as a new image layer.

        A projection of a 3-D stack is a 2-D layer. With more axes (time, channel) the
        depth axis is kept as one slice spanning the whole stack (see :func:`span_depth`),
        so that napari lines the result's time axis up with the source's, not with z.
        """
        geometry = geometry_without(layer, axis)
        if layer.ndim >= 4:
            data, geometry = span_depth(np.asarray(data), layer, axis, geometry)
        geometry.update(kwargs)
        return self.viewer.add_image(data, name=name, **geometry)
