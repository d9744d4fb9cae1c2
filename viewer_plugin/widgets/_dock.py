"""The one base of the five dock widgets: stack and axis pickers, step, background runs.

Every dock has the same top (which stack, which axis, its step in µm or s,
with an override) and the same plumbing (a background task with progress and
cancel, a status line, results added as new layers with the right geometry).
Subclasses add their options and their actions; the work itself is a call of
:mod:`viewer_plugin.jobs`.
"""

from __future__ import annotations

import logging
import math
from typing import TYPE_CHECKING, Any, Callable

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, Container, FloatSpinBox, Label, PushButton

from .._shared.progress import Cancelled
from .._shared.stack import Stack
from .._shared.validation import fail
from ._common import connect_layer_events, disconnect_layer_events, image_layer_choices, wrapped
from ._runner import BackgroundTask

if TYPE_CHECKING:  # pragma: no cover
    import napari

    from ..jobs import Geometry

logger = logging.getLogger(__name__)

#: Axis labels napari users type, and the letter each stands for.
_LETTERS = {"t": "T", "time": "T", "c": "C", "channel": "C", "z": "Z", "depth": "Z",
            "y": "Y", "x": "X"}
_DEFAULT_AXES = {3: "ZYX", 4: "TZYX", 5: "TCZYX"}

#: How a job's step source reads in a dock.
_STEP_WORDS = {"given": "override", "file": "layer scale"}


def layer_letters(layer: Any) -> str:
    """One axis letter per dimension of *layer*: from its axis labels, else the usual order.

    Labels t/time, c/channel, z/depth, y, x (any case) name their axes; a layer
    without such labels is read as ZYX, TZYX or TCZYX.
    """
    labels = [str(label).strip().lower() for label in (getattr(layer, "axis_labels", None) or ())]
    letters = [_LETTERS.get(label) for label in labels]
    if len(letters) == layer.ndim and all(letters) and len(set(letters)) == len(letters):
        return "".join(letters)
    default = _DEFAULT_AXES.get(layer.ndim)
    if default is None:  # more axes than usual: leading ones count as time, then channels
        default = ("T" * (layer.ndim - 3))[:1] + "C" * max(0, layer.ndim - 4) + "ZYX"
    return default[-layer.ndim:]


def default_axis(layer: Any, role: str = "depth") -> int:
    """The one default-axis rule: the depth (Z) axis, or for "acquisition" the time axis if any."""
    letters = layer_letters(layer)
    if role == "acquisition" and "T" in letters:
        return letters.index("T")
    return letters.index("Z") if "Z" in letters else max(0, layer.ndim - 3)


def layer_data(layer: Any) -> Any:
    """Full-resolution data of an image layer (level 0 of a multiscale layer)."""
    return layer.data[0] if getattr(layer, "multiscale", False) else layer.data


def layer_stack(layer: Any) -> Stack:
    """A :class:`~viewer_plugin._shared.stack.Stack` of *layer* (its data is not copied)."""
    source = getattr(getattr(layer, "source", None), "path", None)
    metadata = dict(layer.metadata) if isinstance(layer.metadata, dict) else {}
    if source is None and metadata.get("source_path"):
        source = metadata["source_path"]
    from pathlib import Path

    return Stack(layer_data(layer), layer_letters(layer), tuple(float(s) for s in layer.scale),
                 metadata=metadata, path=Path(source) if source else None, name=layer.name,
                 translate=tuple(float(t) for t in layer.translate))


def in_dock_words(record: dict[str, Any]) -> dict[str, Any]:
    """A job's provenance with the step source in the dock's words ("override", "layer scale")."""
    out = dict(record)
    for key in ("z_step_from", "interval_from"):
        if key in out:
            out[key] = _STEP_WORDS.get(out[key], out[key])
    return out


class StackDock(Container):
    """Base of the dock widgets (see the module docstring).

    Subclasses set :attr:`title`, add their own widgets in :meth:`_add_options`
    and list their action buttons in :attr:`action_buttons`; they run jobs with
    :meth:`run_job` and add results with :meth:`add_result`.
    """

    title = ""
    #: A short name for the dock's tab when the docks are stacked.
    tab_title = ""
    #: "depth" (projections, attenuation) or "acquisition" (bleaching: time, else depth).
    axis_role = "depth"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        super().__init__(labels=True)
        self.viewer = napari_viewer
        self.task = BackgroundTask(label=self.title)
        self.last_worker: Any = None
        self._cancelling = False
        self._layer_connected: Any = None
        self.layer_combo = ComboBox(label="Stack", choices=self._layer_choices,
                                    tooltip="An image layer with 3 or more dimensions")
        self.axis_combo = ComboBox(label="Depth axis", choices=self._axis_choices,
                                   tooltip="Axis along which slices are stacked (z)")
        self.z_step = FloatSpinBox(label="z-step (\u00b5m)", value=1.0, min=0.0, max=1e7, step=0.1,
                                   enabled=False,
                                   tooltip="Distance between slices; read from the layer scale")
        self.override_z = CheckBox(text="Override z-step", value=False,
                                   tooltip="Use your own step instead of the layer's scale")
        self.z_hint = wrapped(Label(value=""))
        self.extend([self.layer_combo, self.axis_combo, self.z_step, self.override_z, self.z_hint])
        self.action_buttons: list[PushButton] = []
        self._add_options()
        self.cancel_button = PushButton(text="Cancel", enabled=False)
        self.status = wrapped(Label(value=""))
        self._add_bottom()
        self.cancel_button.changed.connect(self.cancel)
        self.task.started.append(lambda: self._set_running(True))
        self.task.finished.append(lambda: self._set_running(False))
        self.layer_combo.changed.connect(self._on_layer_changed)
        self.axis_combo.changed.connect(self._on_axis_changed)
        self.override_z.changed.connect(self._on_override)
        self.z_step.changed.connect(self._on_parameter_changed)
        connect_layer_events(self.viewer, self._refresh_layers)
        self.native.destroyed.connect(self._disconnect_viewer)
        self._on_layer_changed(self.layer_combo.value)
        self.fit_width()

    def fit_width(self) -> None:
        """Let the dock narrow: lists elide long entries, notes wrap.

        Without this a choice such as "CET-I1 (cyan–green–orange, constant
        lightness)" or one long note sets the dock's minimum width, and the
        image gets what is left of the window.
        """
        from qtpy.QtWidgets import QComboBox

        for widget in self:
            native = widget.native
            if isinstance(native, QComboBox):
                native.setSizeAdjustPolicy(
                    QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
                native.setMinimumContentsLength(16)
            elif isinstance(widget, Label):
                native.setWordWrap(True)

    # ----------------------------------------------------------- for subclasses
    def _add_options(self) -> None:
        """Append the dock's own widgets and action buttons (called once in ``__init__``)."""

    def _add_bottom(self) -> None:
        """Append the action buttons, Cancel and the status line (override to place them)."""
        self.extend([*self.action_buttons, self.cancel_button, self.status])

    def _layer_changed_hook(self, layer: Any) -> None:
        """Another stack (or axis) was picked."""

    def _on_parameter_changed(self, *_: Any) -> None:
        """An option changed (previews follow it)."""

    def _on_close(self) -> None:
        """The dock is being destroyed (stop timers)."""

    # ----------------------------------------------------------- layers and axes
    @property
    def layer(self) -> Any:
        return self.layer_combo.value

    def _layer_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        return [(layer.name, layer) for layer in image_layer_choices(self.viewer, min_ndim=3)]

    def _axis_choices(self, _widget: Any = None) -> list[tuple[str, int]]:
        layer = self.layer_combo.value if hasattr(self, "layer_combo") else None
        if layer is None:
            return []
        letters = layer_letters(layer)
        return [(f"{letter.lower()} (axis {i})", i) for i, letter in enumerate(letters)]

    def _refresh_layers(self, *_: Any) -> None:
        before = self.layer_combo.value
        self.layer_combo.reset_choices()
        self._refresh_hook()
        if self.layer_combo.value is before and before is not None:
            return
        self._on_layer_changed(self.layer_combo.value)

    def _refresh_hook(self) -> None:
        """Other pickers that list layers refresh here."""

    def _disconnect_viewer(self, *_: Any) -> None:
        disconnect_layer_events(self.viewer, self._refresh_layers)
        self._watch_layer(None)
        self._on_close()

    def _watch_layer(self, layer: Any) -> None:
        """Follow the source layer's scale and contrast (for the step and previews)."""
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
            self._sync_step()
        self._on_parameter_changed()

    def _on_layer_changed(self, layer: Any) -> None:
        self._watch_layer(layer)
        with self.axis_combo.changed.blocked():
            self.axis_combo.reset_choices()
            if layer is not None:
                self.axis_combo.value = default_axis(layer, self.axis_role)
        self._set_running(self.task.running)
        if layer is None:
            self.status.value = "Open or pick a z-stack (an image layer with 3 or more dimensions)."
            return
        self.status.value = ""
        self._sync_step()
        self._layer_changed_hook(layer)

    def _on_axis_changed(self, *_: Any) -> None:
        self._sync_step()
        self._layer_changed_hook(self.layer)

    def _on_override(self, value: bool) -> None:
        self.z_step.enabled = bool(value)
        self._sync_step()
        self._on_parameter_changed()

    def axis_letter(self) -> str:
        """The letter of the picked axis ("Z", "T", ...), or "" when none is picked."""
        layer, axis = self.layer, self.axis_combo.value
        if layer is None or axis is None:
            return ""
        return layer_letters(layer)[int(axis)]

    def _sync_step(self) -> None:
        layer, axis = self.layer, self.axis_combo.value
        if layer is None or axis is None:
            return
        time = self.axis_letter() == "T"
        self.z_step.label = "Interval (s)" if time else "z-step (\u00b5m)"
        self.override_z.text = "Override interval" if time else "Override z-step"
        step = float(layer.scale[int(axis)])
        if not self.override_z.value:
            with self.z_step.changed.blocked():
                self.z_step.value = step
        units = getattr(layer, "units", None)
        unit = str(units[int(axis)]) if units is not None else "pixel"
        if self.override_z.value:
            self.z_hint.value = f"layer scale along this axis: {step:g} ({unit})"
        elif unit in ("pixel", "px", "") and step == 1.0:
            what = "1 s between time points" if time else "a z-step of 1"
            self.z_hint.value = (f"The layer gives {what} without physical units (also the "
                                 "default when a file has none): check it and override if needed.")
        else:
            self.z_hint.value = ""

    def step_value(self) -> float:
        """The step along the picked axis (µm, or s for time), checked."""
        value = float(self.z_step.value)
        if not (math.isfinite(value) and value > 0):
            fail("Z-step", "a positive step", value,
                 hint="type the z-step (or interval) of the stack, or untick 'Override z-step'")
        return value

    def step_override(self) -> float | None:
        """The step to pass to a job: the user's when overridden (checked), else None."""
        if self.override_z.value or float(self.z_step.value) != float(
                self.layer.scale[int(self.axis_combo.value)]):
            return self.step_value()
        return None

    # ----------------------------------------------------------- running
    def run_job(self, job: Callable[[Callable[[int, int], None]], Any],
                on_result: Callable[[Any], None], *, start_thread: bool = True) -> Any:
        """Run *job(progress)* off the GUI thread; *on_result* gets its result on the GUI thread."""
        self._cancelling = False
        worker = self.task.start(job, on_result=on_result, on_stopped=self._stopped,
                                 start_thread=start_thread)
        self.last_worker = worker
        return worker

    def cancel(self, *_: Any) -> None:
        """Stop the running job at its next progress call; nothing is added."""
        if self.task.running:
            self._cancelling = True
            self.task.cancel()

    def notify_error(self, exc: BaseException) -> None:
        """Show a problem found before a job starts (bad option, no layer)."""
        from napari.utils.notifications import show_error

        show_error(f"{self.title}: {exc}")
        self._stopped(exc)

    def _stopped(self, exc: BaseException) -> None:
        """A job stopped on bad input or cancel (the runner has shown the notification)."""
        self.status.value = "Cancelled: nothing added." if isinstance(exc, Cancelled) \
            else f"Could not finish: {exc}"

    def _set_running(self, running: bool) -> None:
        for button in self.action_buttons:
            button.enabled = not running and self.layer is not None and self._can_run(button)
        self.cancel_button.enabled = running
        if running:
            self.status.value = "Computing\u2026"
        elif self.status.value == "Computing\u2026":
            self.status.value = ""

    def _can_run(self, button: PushButton) -> bool:
        """Whether *button* may be pressed now (e.g. Correct needs a fit)."""
        return True

    # ----------------------------------------------------------- results
    def add_result(self, data: Any, geometry: "Geometry", *, source: Any, name: str,
                   depth_axis: int | None = None, replace: Any = None, lookup: Any = None,
                   **kwargs: Any) -> Any:
        """Add *data* with *geometry* as a new image layer next to its *source* layer.

        For a projection (*depth_axis* given) of a layer with time or channel
        axes, the projected axis is kept as one slice spanning the stack's
        whole depth, so napari lines the result's time axis up with the
        source's, not with its z axis.

        *replace*: an earlier result layer of this dock; while it is still in
        the viewer, it gets the new data and geometry instead of a new layer
        being added (live updates). *lookup*: a
        :class:`~viewer_plugin.widgets._depth_layer.DepthLookup` (arrays shaped
        like the image) whose depth and peak the status bar shows under the cursor.
        """
        from ._depth_layer import DepthImage, DepthLookup

        rgb = kwargs.get("rgb", False)
        data, layout = _placed(data, geometry, source, depth_axis, rgb)
        if lookup is not None and depth_axis is not None and source.ndim >= 4:
            lookup = DepthLookup(*(None if a is None else np.expand_dims(np.asarray(a), depth_axis)
                                   for a in (lookup.depth_um, lookup.peak)), lookup.half_step_um)
        if replace is not None and replace in self.viewer.layers and replace.rgb == rgb:
            for key in ("metadata", "colormap", "contrast_limits"):
                if key in kwargs:
                    setattr(replace, key, kwargs[key])
            replace.data = data
            replace.scale, replace.translate = layout["scale"], layout["translate"]
            if isinstance(replace, DepthImage):
                replace.depth_lookup = lookup
            return replace
        layout.update(kwargs)
        if lookup is None:
            return self.viewer.add_image(data, name=name, **layout)
        layer = DepthImage(data, name=name, **layout)
        layer.depth_lookup = lookup
        return self.viewer.add_layer(layer)


def _placed(data: Any, geometry: "Geometry", source: Any, depth_axis: int | None,
            rgb: bool) -> tuple[Any, dict[str, Any]]:
    """(data, layer keywords) of a result: scale, translate, axis labels, units."""
    axes = geometry.axes[:-1] if rgb and geometry.axes.endswith("S") else geometry.axes
    n = len(axes)
    layout: dict[str, Any] = {
        "scale": list(geometry.scale[:n]), "translate": list(geometry.translate[:n]),
        "axis_labels": [a.lower() for a in axes], "units": _units(geometry, n)}
    if depth_axis is not None and source.ndim >= 4:
        data = np.expand_dims(np.asarray(data), depth_axis)
        depth = int(layer_data(source).shape[depth_axis])
        step = float(source.scale[depth_axis])
        layout["scale"].insert(depth_axis, depth * step)
        layout["translate"].insert(depth_axis,
                                   float(source.translate[depth_axis]) + (depth - 1) * step / 2)
        layout["axis_labels"].insert(depth_axis, layer_letters(source)[depth_axis].lower())
        layout["units"].insert(depth_axis, "micrometer")
    return data, layout


def _units(geometry: "Geometry", n: int) -> list[str]:
    names = {"\u00b5m": "micrometer", "s": "second"}
    return [names.get(unit, "pixel") for unit in geometry.units[:n]]
