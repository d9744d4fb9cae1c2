"""The "Bleaching check" dock widget: did the signal fade, by how much, within tolerance?

It only translates between layers and :mod:`viewer_plugin.jobs.bleaching`: the
check runs off the GUI thread, shows a plot, the verdict in words on a
coloured badge (within tolerance, inconclusive, exceeds tolerance) and the
verdict sentence, and a correction is added as a new layer; the source layer
and its data are never changed. A two-pass mode separates bleaching from
attenuation.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from magicgui.widgets import ComboBox, FloatSpinBox, Label, PushButton

from ..jobs.choices import (
    BLEACHING_CAVEAT,
    DEFAULT_TOLERANCE,
    RESCALE_LABELS,
    TOLERANCE_NOTE,
    TWO_PASS_HELP,
    VERDICT_COLOURS,
    VERDICT_WORDS,
    labelled,
)
from ._common import result_text, wrapped
from ._dock import StackDock, in_dock_words, layer_letters, layer_stack

if TYPE_CHECKING:  # pragma: no cover
    import napari

__all__ = ["BleachingWidget", "SINGLE", "TWO_PASS", "verdict_badge_style"]

SINGLE, TWO_PASS = "single", "two-pass"


def verdict_badge_style(verdict: str) -> str:
    """Qt style sheet of the verdict badge: the verdict's own background and text colour."""
    background, text = VERDICT_COLOURS[verdict]
    return (f"QLabel {{ background-color: {background}; color: {text}; font-weight: bold; "
            "padding: 4px 8px; border-radius: 3px; }")


class BleachingWidget(StackDock):
    """Check a time series (or one stack) for photobleaching; correct it; or separate it.

    Parameters
    ----------
    napari_viewer : napari.Viewer
    """

    title = "Bleaching check"
    tab_title = "Bleaching"
    axis_role = "acquisition"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        self.report: Any = None
        self.checked: Any = None
        self.two_pass: Any = None
        self._report_key: Any = None
        super().__init__(napari_viewer)
        self.layer_combo.label = "Series or stack"
        self.axis_combo.visible = False  # chosen through the acquisition axis below
        self._add_canvas()
        self.mode.changed.connect(self._on_mode)
        self.axis_kind.changed.connect(self._on_axis_kind)
        self.check_button.changed.connect(self.check)
        self.correct_button.changed.connect(self.correct)
        self._on_mode(self.mode.value)
        self._on_layer_changed(self.layer_combo.value)

    # ------------------------------------------------------------ building
    @property
    def interval(self) -> Any:
        """The step along the acquisition axis (s between time points, or µm between slices)."""
        return self.z_step

    @property
    def interval_hint(self) -> Any:
        return self.z_hint

    def _add_options(self) -> None:
        self.mode = ComboBox(label="Mode", choices=[("One series or stack", SINGLE),
                                                    ("Two passes (forward + reverse)", TWO_PASS)],
                             value=SINGLE)
        self.axis_kind = ComboBox(label="Acquisition axis",
                                  choices=[("time (time points)", "time"),
                                           ("z (slices of one stack)", "depth")])
        self.tolerance = FloatSpinBox(label="Tolerance (% loss)", value=DEFAULT_TOLERANCE * 100,
                                      min=0.1, max=99.0, step=1.0, tooltip=TOLERANCE_NOTE)
        self.tolerance_note = wrapped(Label(value=TOLERANCE_NOTE))
        self.method = ComboBox(label="Rescale frames by", choices=labelled(RESCALE_LABELS),
                               value="model")
        self.forward_combo = ComboBox(label="Forward pass", choices=self._layer_choices)
        self.reverse_combo = ComboBox(label="Reverse pass", choices=self._layer_choices)
        self.two_pass_help = wrapped(Label(value=TWO_PASS_HELP))
        self.check_button = PushButton(text="Check")
        self.correct_button = PushButton(text="Correct (new layer)")
        self.badge = Label(value="")
        self.badge.visible = False
        self.verdict = result_text(lines=5)
        self.caveat = result_text(lines=4)
        self.caution = wrapped(Label(value=BLEACHING_CAVEAT + " The original layer is kept."))
        self.insert(0, self.mode)
        self.insert(3, self.axis_kind)
        self.extend([self.tolerance, self.tolerance_note, self.method, self.forward_combo,
                     self.reverse_combo, self.two_pass_help])
        self.action_buttons += [self.check_button, self.correct_button]

    def _add_bottom(self) -> None:
        self.extend([*self.action_buttons, self.cancel_button, self.status, self.badge,
                     self.verdict, self.caveat, self.caution])

    def _add_canvas(self) -> None:
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
        from matplotlib.figure import Figure

        self.figure = Figure(figsize=(5.0, 3.4), dpi=90, layout="constrained")
        self.canvas = FigureCanvasQTAgg(self.figure)
        self.canvas.setMinimumHeight(260)
        self.canvas.setMinimumWidth(380)  # the two-pass panels are stacked, not side by side
        self.native.layout().addWidget(self.canvas)

    def _refresh_hook(self) -> None:
        for combo in (self.forward_combo, self.reverse_combo):
            combo.reset_choices()
        self._pick_reverse()

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
        for widget in (self.layer_combo, self.axis_kind, self.z_step, self.override_z, self.method,
                       self.correct_button):
            widget.visible = single
        self.z_hint.visible = single and bool(self.z_hint.value)
        for widget in (self.forward_combo, self.reverse_combo, self.two_pass_help):
            widget.visible = not single
        if not single:
            self._pick_reverse()
        self.verdict.value = ""
        self.caveat.value = ""
        self._show_verdict(None)

    def _layer_changed_hook(self, layer: Any) -> None:
        if not hasattr(self, "verdict"):
            return
        if layer is None:
            self.verdict.value = "Open or pick a time series or z-stack (3 or more dimensions)."
            return
        with self.axis_kind.changed.blocked():
            self.axis_kind.value = "time" if self.axis_letter() == "T" else "depth"
        self.z_hint.visible = bool(self.z_hint.value) and self.mode.value == SINGLE
        self.verdict.value = ""
        self._show_verdict(None)

    def _on_axis_kind(self, kind: str) -> None:
        """Point the (hidden) axis picker at the time axis or the depth axis."""
        layer = self.layer
        if layer is None:
            return
        letters = layer_letters(layer)
        letter = "T" if kind == "time" else "Z"
        if letter in letters:
            self.axis_combo.value = letters.index(letter)
        self.z_hint.visible = bool(self.z_hint.value) and self.mode.value == SINGLE

    def _can_run(self, button: Any) -> bool:
        return True

    # ------------------------------------------------------------ inputs
    def _selection(self) -> tuple[Any, Any, str]:
        """(layer, selection, note) of the single-series mode, checked on the GUI thread."""
        from .._shared.validation import fail
        from ..jobs import Selection, select

        layer = self.layer
        if layer is None:
            fail("Series or stack", "an image layer", "<none>", hint="open one first")
        letters = layer_letters(layer)
        stack = layer_stack(layer)
        if self.axis_kind.value == "time":
            if "T" not in letters:
                fail("Acquisition axis", "a layer with a time axis",
                     f"<{layer.ndim}-D '{layer.name}' without one>", hint="choose z")
            return layer, Selection(stack), ""
        if "T" in letters:
            step = int(self.viewer.dims.current_step[letters.index("T")])
            return layer, select(stack, time=step, several_channels="first"), f" (time point {step})"
        return layer, Selection(stack), ""

    def _options(self, kind: str | None = None) -> Any:
        from ..jobs import BleachingOptions

        return BleachingOptions(axis_kind=kind or self.axis_kind.value, interval=self.step_override(),
                                tolerance=float(self.tolerance.value) / 100)

    def _inputs(self) -> tuple[Any, Any, str, Any] | None:
        """(layer, selection, note, options), or None after a notification."""
        try:
            return (*self._selection(), self._options())
        except ValueError as exc:
            self.notify_error(exc)
            return None

    # ------------------------------------------------------------ actions
    def check(self, *_: Any, start_thread: bool = True) -> Any:
        """Run the check (or the two-pass estimate); returns the napari worker."""
        if self.mode.value == TWO_PASS:
            return self.check_two_pass(start_thread=start_thread)
        from ..jobs import check_bleaching

        inputs = self._inputs()
        if inputs is None:
            return None
        layer, selection, note, options = inputs

        def job(progress: Any) -> Any:
            return check_bleaching(selection, options, progress=progress)

        def show(checked: Any) -> None:
            self._keep(checked, layer, options)
            self._show_report(checked, layer, note)

        return self.run_job(job, show, start_thread=start_thread)

    def _keep(self, checked: Any, layer: Any, options: Any) -> None:
        self.checked, self.report = checked, checked.report
        self._report_key = (id(layer), self.axis_kind.value, options)

    def correct(self, *_: Any, start_thread: bool = True) -> Any:
        """Add a bleaching-corrected copy of the picked layer; returns the napari worker."""
        from ..jobs import check_bleaching, correct_checked

        inputs = self._inputs()
        if inputs is None:
            return None
        layer, selection, note, options = inputs
        if note:
            self.notify_error(ValueError("Correct: expected a series along time or a single "
                                         "z-stack, got one time point of a series; check it "
                                         "along time"))
            return None
        key = (id(layer), self.axis_kind.value, options)
        cached = self.checked if key == self._report_key else None
        rescale = self.method.value

        def job(progress: Any) -> Any:
            checked = cached or check_bleaching(selection, options, progress=progress)
            return checked, correct_checked(checked, rescale=rescale, progress=progress)

        def show(result: Any) -> None:
            checked, corrected = result
            self._keep(checked, layer, options)
            self._show_report(checked, layer, "")
            self.corrected_layer = self.add_result(
                corrected.data, corrected.geometry, source=layer,
                name=f"{layer.name} bleaching-corrected",
                colormap=getattr(layer.colormap, "name", "gray"),
                contrast_limits=tuple(float(v) for v in layer.contrast_limits),
                metadata={"stackdepth": in_dock_words(corrected.provenance)})

        return self.run_job(job, show, start_thread=start_thread)

    def check_two_pass(self, *, start_thread: bool = True) -> Any:
        """Separate bleaching from attenuation with the two picked passes."""
        from ..jobs import Selection, separate_passes

        forward, reverse = self.forward_combo.value, self.reverse_combo.value
        if forward is None or reverse is None or forward is reverse:
            self.notify_error(ValueError("Reverse pass: expected a second layer, different from "
                                         "the forward pass; add both passes"))
            return None
        tolerance = float(self.tolerance.value) / 100
        fwd, rev = Selection(layer_stack(forward)), Selection(layer_stack(reverse))
        truth = fwd.stack.truth or rev.stack.truth or {}

        def job(progress: Any) -> Any:
            return separate_passes(fwd, rev, tolerance=tolerance, progress=progress)

        def show(two: Any) -> None:
            from ..plots.bleaching import two_pass_figure

            self.two_pass = two.result
            self._show_verdict(two.result.verdict)
            text = two.result.summary
            if "bleach_rate_per_exposure" in truth:
                text += (f" Demo truth: {truth['bleach_rate_per_exposure'] * 100:.3g} % per "
                         f"exposure, {truth.get('attenuation_length_um', math.nan):.3g} \u00b5m.")
            self.verdict.value = text
            self.caveat.value = two.result.caveat
            self.caveat.visible = True
            two_pass_figure(two.result, truth=truth, figure=self.figure, stacked=True)
            self.canvas.setMinimumHeight(520)
            self.canvas.draw_idle()

        return self.run_job(job, show, start_thread=start_thread)

    def _show_report(self, checked: Any, layer: Any, note: str) -> None:
        from ..plots.bleaching import bleaching_figure

        report = checked.report
        truth = checked.selection.stack.truth or {}
        truth_rate = truth.get("bleach_rate_per_frame") if report.axis_kind == "time" else None
        self._show_verdict(report.verdict)
        text = f"{layer.name}{note}: {report.summary}"
        if truth_rate is not None:
            text += f" Demo truth: {truth_rate * 100:.3g} % per frame."
        self.verdict.value = text
        self.caveat.value = report.caveat
        self.caveat.visible = bool(report.caveat)  # a time series has none: no empty box
        bleaching_figure(report, truth_rate=truth_rate, figure=self.figure)
        self.canvas.draw_idle()

    def _show_verdict(self, verdict: str | None) -> None:
        """The verdict badge: its words on its own colour (hidden when there is no result)."""
        if not hasattr(self, "badge"):
            return
        if verdict is None:
            self.badge.value = ""
            self.badge.visible = False
            return
        self.badge.value = VERDICT_WORDS[verdict]
        self.badge.native.setStyleSheet(verdict_badge_style(verdict))
        self.badge.visible = True
