"""The "Bleaching check" dock widget: did the signal fade, by how much, within tolerance?

It only translates between layers and :mod:`viewer_plugin.kernels.bleaching`:
the check runs off the GUI thread (BackgroundTask), shows a plot and a verdict
sentence, and a correction is added as a new layer; the source layer and its
data are never changed. A two-pass mode separates bleaching from attenuation.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any, Callable

from magicgui.widgets import ComboBox, Container, FloatSpinBox, Label, PushButton

from ._common import (
    connect_layer_events,
    disconnect_layer_events,
    image_layer_choices,
    leading_axis_labels,
    result_text,
    same_geometry,
    wrapped,
)
from ._runner import BackgroundTask, TaskWidgetMixin

if TYPE_CHECKING:  # pragma: no cover
    import napari

__all__ = ["BleachingWidget"]

SINGLE, TWO_PASS = "single", "two-pass"
CAUTION = ("Corrected intensities are relative, not calibrated, and correction amplifies the "
           "noise of late (faded) frames. The original layer is kept.")
TOLERANCE_NOTE = ("10 % is a common-practice default, not a published limit: set the loss you "
                  "can accept before quantifying.")
TWO_PASS_HELP = ("Two passes over the same stack, the second deepest-first (both stored "
                 "surface first). Needs one-photon data; see docs/bleaching.md.")


def _labels(layer: Any) -> list[str]:
    return [str(label).strip().lower() for label in leading_axis_labels(layer)]


def time_axis_of(layer: Any) -> int | None:
    """Index of the layer's time axis: labelled t/time, else axis 0 of a 4-D layer."""
    labels = _labels(layer)
    for i, label in enumerate(labels):
        if label in ("t", "time"):
            return i
    return 0 if layer.ndim >= 4 else None


def depth_axis_of(layer: Any) -> int:
    labels = _labels(layer)
    for i, label in enumerate(labels):
        if label in ("z", "depth"):
            return i
    return max(0, layer.ndim - 3)


def truth_of(layer: Any) -> dict[str, Any]:
    metadata = getattr(layer, "metadata", None) or {}
    truth = metadata.get("truth") if isinstance(metadata, dict) else None
    return truth if isinstance(truth, dict) else {}


class BleachingWidget(TaskWidgetMixin, Container):
    """Check a time series (or one stack) for photobleaching; correct it; or separate it.

    Parameters
    ----------
    napari_viewer : napari.Viewer
    """

    failure_label = "verdict"
    failure_prefix = "Could not check"
    title = "Bleaching check"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        super().__init__(labels=True)
        self.viewer = napari_viewer
        self.task = BackgroundTask(label=self.title)
        self.report: Any = None
        self.two_pass: Any = None
        self.last_worker: Any = None
        self._report_key: Any = None
        self.mode = ComboBox(label="Mode", choices=[("One series or stack", SINGLE),
                                                    ("Two passes (forward + reverse)", TWO_PASS)],
                             value=SINGLE)
        self.layer_combo = ComboBox(label="Series or stack", choices=self._layer_choices)
        self.axis_kind = ComboBox(label="Acquisition axis",
                                  choices=[("time (time points)", "time"),
                                           ("z (slices of one stack)", "depth")])
        self.interval = FloatSpinBox(label="Interval (s)", value=1.0, min=1e-6, max=1e7, step=1.0)
        self.interval_hint = wrapped(Label(value=""))
        self.tolerance = FloatSpinBox(label="Tolerance (% loss)", value=10.0, min=0.1, max=99.0,
                                      step=1.0, tooltip=TOLERANCE_NOTE)
        self.tolerance_note = wrapped(Label(value=TOLERANCE_NOTE))
        self.method = ComboBox(label="Rescale frames by", choices=[
            ("fitted decay", "model"), ("measured signal", "measured")], value="model")
        self.forward_combo = ComboBox(label="Forward pass", choices=self._layer_choices)
        self.reverse_combo = ComboBox(label="Reverse pass", choices=self._layer_choices)
        self.two_pass_help = wrapped(Label(value=TWO_PASS_HELP))
        self.check_button = PushButton(text="Check")
        self.correct_button = PushButton(text="Correct (new layer)")
        self.cancel_button = PushButton(text="Cancel", enabled=False)
        self.verdict = result_text(lines=5)
        self.caveat = result_text(lines=4)
        self.caution = wrapped(Label(value=CAUTION))
        self.extend([self.mode, self.layer_combo, self.axis_kind, self.interval,
                     self.interval_hint, self.tolerance,
                     self.tolerance_note, self.method, self.forward_combo, self.reverse_combo,
                     self.two_pass_help, self.check_button, self.correct_button,
                     self.cancel_button, self.verdict, self.caveat, self.caution])
        self._add_canvas()
        self._connect()
        self._on_mode(self.mode.value)
        self._on_layer(self.layer_combo.value)

    # ------------------------------------------------------------ building
    def _add_canvas(self) -> None:
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
        from matplotlib.figure import Figure

        self.figure = Figure(figsize=(5.0, 3.4), dpi=90, layout="constrained")
        self.canvas = FigureCanvasQTAgg(self.figure)
        self.canvas.setMinimumHeight(260)
        self.canvas.setMinimumWidth(560)  # two panels side by side stay readable
        self.native.layout().addWidget(self.canvas)

    def _connect(self) -> None:
        self.mode.changed.connect(self._on_mode)
        self.layer_combo.changed.connect(self._on_layer)
        self.axis_kind.changed.connect(lambda *_: self._sync_interval())
        self.check_button.changed.connect(self.check)
        self.correct_button.changed.connect(self.correct)
        self.cancel_button.changed.connect(self.task.cancel)
        self.task.started.append(lambda: self._set_running(True))
        self.task.finished.append(lambda: self._set_running(False))
        connect_layer_events(self.viewer, self._refresh_layers)
        self.native.destroyed.connect(self._disconnect_viewer)

    def _layer_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        return [(layer.name, layer) for layer in image_layer_choices(self.viewer, min_ndim=3)]

    def _refresh_layers(self, *_: Any) -> None:
        before = self.layer_combo.value
        for combo in (self.layer_combo, self.forward_combo, self.reverse_combo):
            combo.reset_choices()
        self._pick_reverse()
        if self.layer_combo.value is not before:
            self._on_layer(self.layer_combo.value)

    def _disconnect_viewer(self, *_: Any) -> None:
        disconnect_layer_events(self.viewer, self._refresh_layers)

    def _pick_reverse(self) -> None:
        """Offer a second, different layer (preferably one named 'reverse') as reverse pass."""
        choices = [layer for _, layer in self._layer_choices()]
        if self.reverse_combo.value is not self.forward_combo.value or len(choices) < 2:
            return
        named = [layer for layer in choices if "reverse" in layer.name.lower()]
        others = [layer for layer in choices if layer is not self.forward_combo.value]
        pick = (named or others)[0]
        if pick is self.forward_combo.value:
            self.forward_combo.value = [layer for layer in choices if layer is not pick][0]
        self.reverse_combo.value = pick

    # ------------------------------------------------------------ reacting
    def _on_mode(self, mode: str) -> None:
        single = mode == SINGLE
        for widget in (self.layer_combo, self.axis_kind, self.interval, self.method,
                       self.correct_button):
            widget.visible = single
        self.interval_hint.visible = single and bool(self.interval_hint.value)
        for widget in (self.forward_combo, self.reverse_combo, self.two_pass_help):
            widget.visible = not single
        if not single:
            self._pick_reverse()
        self.verdict.value = ""
        self.caveat.value = ""

    def _on_layer(self, layer: Any) -> None:
        if layer is None:
            self.verdict.value = "Open or pick a time series or z-stack (3 or more dimensions)."
            return
        has_time = time_axis_of(layer) is not None
        with self.axis_kind.changed.blocked():
            self.axis_kind.value = "time" if has_time else "depth"
        self._sync_interval()
        self.verdict.value = ""

    def _sync_interval(self) -> None:
        layer = self.layer_combo.value
        if layer is None:
            return
        if self.axis_kind.value == "time":
            self.interval.label = "Interval (s)"
            axis = time_axis_of(layer)
            value = truth_of(layer).get("interval_s")
            if value is None and axis is not None:
                value = float(layer.scale[axis])
        else:
            self.interval.label = "z-step (\u00b5m)"
            value = float(layer.scale[depth_axis_of(layer)])
        self.interval.value = float(value) if value and value > 0 else 1.0
        axis = time_axis_of(layer) if self.axis_kind.value == "time" else depth_axis_of(layer)
        units = getattr(layer, "units", None)
        unit = str(units[axis]) if units is not None and axis is not None else "pixel"
        if self.interval.value == 1.0 and unit in ("pixel", "px", ""):
            what = "1 s between time points" if self.axis_kind.value == "time" else "1 \u00b5m z-step"
            self.interval_hint.value = (f"The layer gives {what} (also the default when a file "
                                        "has none): check it and type the real value.")
        else:
            self.interval_hint.value = ""
        self.interval_hint.visible = bool(self.interval_hint.value) and self.mode.value == SINGLE

    def _set_running(self, running: bool) -> None:
        self.check_button.enabled = not running
        self.correct_button.enabled = not running
        self.cancel_button.enabled = running

    # ------------------------------------------------------------ inputs
    def _series(self) -> tuple[Any, Any, int, str, str]:
        """(layer, data, axis, axis kind, note) of the single-series mode."""
        layer = self.layer_combo.value
        if layer is None:
            raise ValueError("Series or stack: expected an image layer, got none; open one first")
        data = layer.data[0] if getattr(layer, "multiscale", False) else layer.data
        kind = self.axis_kind.value
        note = ""
        if kind == "time":
            axis = time_axis_of(layer)
            if axis is None:
                raise ValueError(f"Acquisition axis: expected a layer with a time axis, got "
                                 f"{layer.ndim}-D '{layer.name}' without one; choose z")
        else:
            axis = depth_axis_of(layer)
            t_axis = time_axis_of(layer)
            if t_axis is not None and t_axis != axis:
                step = int(self.viewer.dims.current_step[t_axis])
                index = [slice(None)] * layer.ndim
                index[t_axis] = step
                data = data[tuple(index)]
                axis -= 1 if t_axis < axis else 0
                note = f" (time point {step})"
        return layer, data, axis, kind, note

    def _options(self) -> dict[str, Any]:
        from .._shared.validation import check_number

        return {
            "interval": check_number(float(self.interval.value), name="Interval", low=0,
                                     low_open=True),
            "tolerance": check_number(float(self.tolerance.value) / 100, name="Tolerance", low=0,
                                      high=1, low_open=True, high_open=True),
        }

    # ------------------------------------------------------------ actions
    def check(self, *_: Any, start_thread: bool = True) -> Any:
        """Run the check (or the two-pass estimate); returns the napari worker."""
        if self.mode.value == TWO_PASS:
            return self.check_two_pass(start_thread=start_thread)
        from ..kernels.bleaching import estimate_bleaching

        try:
            layer, data, axis, kind, note = self._series()
            options = self._options()
        except ValueError as exc:
            self._notify(exc)
            return None
        truth = truth_of(layer)

        def job(progress: Callable[[int, int], None]) -> Any:
            return estimate_bleaching(data, axis=axis, axis_kind=kind, progress=progress, **options)

        def show(report: Any) -> None:
            self.report = report
            self._report_key = (id(layer), axis, kind, tuple(sorted(options.items())))
            self._show_report(report, layer, truth, note)

        return self._start(job, show, start_thread)

    def correct(self, *_: Any, start_thread: bool = True) -> Any:
        """Add a bleaching-corrected copy of the picked layer; returns the napari worker."""
        from ..kernels.bleaching import correct_bleaching, estimate_bleaching

        try:
            layer, data, axis, kind, _ = self._series()
            options = self._options()
        except ValueError as exc:
            self._notify(exc)
            return None
        if data is not (layer.data[0] if getattr(layer, "multiscale", False) else layer.data):
            self._notify(ValueError("Correct: expected a series along time or a single z-stack, "
                                    "got one time point of a series; check it along time"))
            return None
        key = (id(layer), axis, kind, tuple(sorted(options.items())))
        cached = self.report if key == self._report_key else None
        method = self.method.value

        def job(progress: Callable[[int, int], None]) -> Any:
            report = cached or estimate_bleaching(data, axis=axis, axis_kind=kind,
                                                  progress=progress, **options)
            return report, correct_bleaching(data, report, rescale=method, axis=axis,
                                             progress=progress)

        def show(result: Any) -> None:
            report, corrected = result
            self.report, self._report_key = report, key
            self._show_report(report, layer, truth_of(layer), "")
            extra = {}
            if getattr(layer, "units", None) is not None:
                extra["units"] = tuple(str(u) for u in layer.units)
            if getattr(layer, "axis_labels", None) is not None:
                extra["axis_labels"] = tuple(str(a) for a in layer.axis_labels)
            self.corrected_layer = self.viewer.add_image(
                corrected, name=f"{layer.name} bleaching-corrected", **same_geometry(layer), **extra,
                colormap=getattr(layer.colormap, "name", "gray"),
                contrast_limits=tuple(float(v) for v in layer.contrast_limits),
                metadata={"stackdepth": {"bleaching_correction": method,
                                         "summary": report.summary,
                                         "note": CAUTION, "source": layer.name}})

        return self._start(job, show, start_thread)

    def check_two_pass(self, *, start_thread: bool = True) -> Any:
        from ..kernels.bleaching import separate_bleaching

        forward, reverse = self.forward_combo.value, self.reverse_combo.value
        if forward is None or reverse is None or forward is reverse:
            self._notify(ValueError("Reverse pass: expected a second layer, different from the "
                                    "forward pass; add both passes"))
            return None
        try:
            tolerance = self._options()["tolerance"]
        except ValueError as exc:
            self._notify(exc)
            return None
        z_axis = depth_axis_of(forward)
        z_step = float(forward.scale[z_axis])
        fwd_data, rev_data = forward.data, reverse.data
        truth = truth_of(forward) or truth_of(reverse)

        def job(progress: Callable[[int, int], None]) -> Any:
            return separate_bleaching(fwd_data, rev_data, z_step=z_step, axis=z_axis,
                                      progress=progress)

        def show(result: Any) -> None:
            from ..plots.bleaching import two_pass_figure

            self.two_pass = result
            verdict = "exceeds" if result.fraction_lost > tolerance else "is within"
            text = (f"{result.summary} That loss {verdict} the {tolerance * 100:.3g} % "
                    "tolerance.")
            if "bleach_rate_per_exposure" in truth:
                text += (f" Demo truth: {truth['bleach_rate_per_exposure'] * 100:.3g} % per "
                         f"exposure, {truth.get('attenuation_length_um', math.nan):.3g} \u00b5m.")
            self.verdict.value = text
            self.caveat.value = result.caveat
            two_pass_figure(result, truth=truth, figure=self.figure)
            self.canvas.draw_idle()

        return self._start(job, show, start_thread)

    def _show_report(self, report: Any, layer: Any, truth: dict[str, Any], note: str) -> None:
        from ..plots.bleaching import bleaching_figure

        rate_key = "bleach_rate_per_frame" if report.axis_kind == "time" else None
        truth_rate = truth.get(rate_key) if rate_key else None
        text = f"{layer.name}{note}: {report.summary}"
        if truth_rate is not None:
            text += f" Demo truth: {truth_rate * 100:.3g} % per frame."
        self.verdict.value = text
        self.caveat.value = report.caveat
        bleaching_figure(report, truth_rate=truth_rate, figure=self.figure)
        self.canvas.draw_idle()
