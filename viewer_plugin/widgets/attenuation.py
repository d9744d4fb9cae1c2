"""The "Depth attenuation" dock widget: how strongly does the signal fade with depth?

It only translates between layers and :mod:`viewer_plugin.jobs.attenuation`:
"Fit" runs :func:`~viewer_plugin.jobs.measure_attenuation` off the GUI thread
and shows the profile, the model and the gain in a plot with the length and
its 95 % interval; "Correct" adds a new float32 layer
"<source> attenuation-corrected" with the same scale and translate. The
source layer and its data are never changed.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSpinBox, Label, PushButton

from .._shared.validation import fail
from ..jobs.choices import ATTENUATION_MODEL_LABELS, DEFAULT_MAX_GAIN, labelled
from ._common import result_text
from ._dock import StackDock, in_dock_words, layer_stack

if TYPE_CHECKING:  # pragma: no cover
    import napari

__all__ = ["AttenuationWidget", "labels_mask", "shapes_mask"]

NO_MASK = "(none)"


def shapes_mask(shapes: Any, image: Any, axis: int) -> np.ndarray:
    """A lateral mask (the image's shape without *axis*) from a shapes layer, True inside.

    A 2-D shapes layer on the image's lateral grid is rasterised by napari
    (``Shapes.to_masks``); otherwise each closed shape's vertices are taken
    through world coordinates into the image's pixels and filled here.
    """
    from skimage.draw import ellipse, polygon

    lateral = [i for i in range(image.ndim) if i != axis]
    shape2d = tuple(int(image.data.shape[i]) for i in lateral)
    same_grid = (shapes.ndim == 2
                 and np.allclose(shapes.scale, [image.scale[i] for i in lateral])
                 and np.allclose(shapes.translate, [image.translate[i] for i in lateral]))
    if same_grid and len(shapes.data):  # napari's own rasterisation on the image's lateral grid
        mask = np.asarray(shapes.to_masks(mask_shape=shape2d)).any(axis=0)
        if mask.any():
            return mask
    mask = np.zeros(shape2d, dtype=bool)
    for vertices, kind in zip(shapes.data, shapes.shape_type):
        world = np.array([shapes.data_to_world(v) for v in np.asarray(vertices)])
        if world.shape[1] < image.ndim:  # 2-D shapes over a 3-D image: pad the depth axis
            world = np.insert(world, axis, 0.0, axis=1) if world.shape[1] == image.ndim - 1 else world
        data = np.array([image.world_to_data(w) for w in world])[:, lateral]
        if kind == "ellipse":
            center = data.mean(axis=0)
            radii = (data.max(axis=0) - data.min(axis=0)) / 2
            rr, cc = ellipse(center[0], center[1], max(radii[0], 0.5), max(radii[1], 0.5), shape=shape2d)
        elif kind in ("line", "path"):
            continue
        else:
            rr, cc = polygon(data[:, 0], data[:, 1], shape=shape2d)
        mask[rr, cc] = True
    if not mask.any():
        fail("Mask", "a shapes layer with at least one closed shape over the image",
             f"<{len(shapes.data)} shape(s), none covering the image>")
    return mask


def labels_mask(labels: Any, image: Any, axis: int) -> np.ndarray:
    """A mask from a labels layer of the image's shape (or of its lateral shape)."""
    data = np.asarray(labels.data)
    if data.shape == tuple(image.data.shape):
        return data != 0
    lateral = tuple(int(image.data.shape[i]) for i in range(image.ndim) if i != axis)
    if data.shape == lateral:
        return np.expand_dims(data != 0, axis)
    fail("Mask", f"a labels layer of shape {tuple(image.data.shape)} or {lateral}",
         f"<shape {data.shape}>")


class AttenuationWidget(StackDock):
    """Dock widget "Depth attenuation" (see the module docstring)."""

    title = "Depth attenuation"
    tab_title = "Attenuation"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        self.fit_result: Any = None
        self.fit_source: Any = None
        self.measured: Any = None
        super().__init__(napari_viewer)
        self._add_canvas()
        self.native.layout().addWidget(self._caution.native)
        self.fit_button.changed.connect(self.fit)
        self.correct_button.changed.connect(self.correct)
        self.log_scale.changed.connect(lambda *_: self._draw())
        self.max_gain.changed.connect(lambda *_: self._draw())
        self.mask_combo.reset_choices()

    # ------------------------------------------------------------ building
    def _add_options(self) -> None:
        from ..jobs.choices import ATTENUATION_CAVEAT

        self.model = ComboBox(label="Model", choices=labelled(ATTENUATION_MODEL_LABELS),
                              value="exponential")
        self.max_gain = FloatSpinBox(label="Max gain", value=DEFAULT_MAX_GAIN, min=1.0, max=1e4,
                                     step=1.0)
        self.max_gain.tooltip = "Gains above this are capped: deep slices mostly gain noise"
        self.mask_combo = ComboBox(label="Mask (optional)", choices=self._mask_choices)
        self.fit_button = PushButton(text="Fit")
        self.correct_button = PushButton(text="Correct", enabled=False)
        self.log_scale = CheckBox(text="log scale", value=True)
        self.result_label = Label(value="Pick a z-stack and press Fit.")
        self.truth_label = Label(value="")
        self.notes_label = result_text(lines=3)
        self._caution = Label(value=ATTENUATION_CAVEAT + " The original layer is kept.")
        for label in (self.result_label, self.truth_label, self._caution):
            label.native.setWordWrap(True)
        # length and interval, then how the interval was made: room for seven wrapped lines
        self.result_label.native.setMinimumHeight(7 * self.result_label.native.fontMetrics().lineSpacing())
        self.extend([self.model, self.max_gain, self.mask_combo])
        self.action_buttons += [self.fit_button, self.correct_button]

    def _add_bottom(self) -> None:
        self.extend([*self.action_buttons, self.cancel_button, self.status, self.result_label,
                     self.truth_label, self.notes_label, self.log_scale])

    def _add_canvas(self) -> None:
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
        from matplotlib.figure import Figure

        self.figure = Figure(figsize=(4.4, 3.8), dpi=90, layout="constrained")
        self.canvas = FigureCanvasQTAgg(self.figure)
        self.canvas.setMinimumHeight(320)
        self.canvas.setMinimumWidth(360)
        self.native.layout().addWidget(self.canvas)

    def _mask_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        from napari.layers import Labels, Shapes

        masks = [(layer.name, layer) for layer in self.viewer.layers
                 if isinstance(layer, (Labels, Shapes))]
        return [(NO_MASK, None)] + masks

    def _refresh_hook(self) -> None:
        self.mask_combo.reset_choices()

    def _can_run(self, button: Any) -> bool:
        return button is not self.correct_button or self.fit_result is not None

    # ------------------------------------------------------------ state
    def _layer_changed_hook(self, layer: Any) -> None:
        self.truth_label.value = self._truth_line(layer)
        if self.fit_result is not None and layer is not self.fit_source:
            self._clear_fit()

    def _clear_fit(self) -> None:
        """A fit belongs to its layer: picking another one clears it (and disables Correct)."""
        self.fit_result = None
        self.fit_source = None
        self.measured = None
        self.correct_button.enabled = False
        self.result_label.value = "Press Fit to measure this layer."
        self.notes_label.value = ""
        if hasattr(self, "figure"):
            self.figure.clear()
            self.canvas.draw_idle()

    # ------------------------------------------------------------ actions
    def _inputs(self) -> tuple[Any, Any, int, Any]:
        """(layer, options, depth axis, mask) for a fit, checked on the GUI thread."""
        from ..jobs import AttenuationOptions

        layer = self.layer
        if layer is None:
            fail("Stack", "an image layer with a z-stack (3-D)", "<no image layer>")
        if layer.ndim != 3:
            fail("Stack", "a 3-D image layer (open channels as separate layers; time series: "
                 "use the bleaching check)", f"<a {layer.ndim}-D layer>")
        axis = int(self.axis_combo.value)
        options = AttenuationOptions(model=str(self.model.value), max_gain=float(self.max_gain.value),
                                     z_step=self.step_override())
        mask_layer = self.mask_combo.value
        mask = None
        if mask_layer is not None:
            from napari.layers import Shapes

            if isinstance(mask_layer, Shapes):
                mask = np.expand_dims(shapes_mask(mask_layer, layer, axis), axis)
            else:
                mask = labels_mask(mask_layer, layer, axis)
        return layer, options, axis, mask

    def fit(self, *_: Any, start_thread: bool = True) -> Any:
        """Estimate the attenuation of the chosen layer; returns the napari worker."""
        from ..jobs import Selection, measure_attenuation

        try:
            layer, options, axis, mask = self._inputs()
        except ValueError as exc:
            self.notify_error(exc)
            return None
        selection = Selection(layer_stack(layer))

        def job(progress: Any) -> Any:
            return measure_attenuation(selection, options, depth_axis=axis, mask=mask,
                                       progress=progress)

        def show(measured: Any) -> None:
            self.measured = measured
            self.fit_result = measured.fit
            self.fit_source = layer
            self._show(layer, list(measured.notes))

        return self.run_job(job, show, start_thread=start_thread)

    def correct(self, *_: Any, start_thread: bool = True) -> Any:
        """Add the corrected layer for the last fit; returns the napari worker."""
        from ..jobs import correct_measured

        measured, layer = self.measured, self.fit_source
        if measured is None or layer is None or layer not in self.viewer.layers:
            self.notify_error(ValueError("Correct: expected a fit of an image layer, got none; "
                                         "press Fit first"))
            return None
        max_gain = float(self.max_gain.value)

        def job(progress: Any) -> Any:
            return correct_measured(measured, max_gain=max_gain, progress=progress)

        def add(corrected: Any) -> None:
            from napari.utils.notifications import show_warning

            for message in corrected.notes:
                show_warning(f"{self.title}: {message}")
            self.corrected_layer = self.add_result(
                corrected.data, corrected.geometry, source=layer,
                name=f"{layer.name} attenuation-corrected", colormap=layer.colormap.name,
                blending=layer.blending,
                metadata={"stackdepth": in_dock_words(corrected.provenance)})

        return self.run_job(job, add, start_thread=start_thread)

    # ------------------------------------------------------------ display
    @staticmethod
    def _truth_line(layer: Any) -> str:
        from ..plots.attenuation import truth_text

        return truth_text(layer_stack(layer).truth) if layer is not None else ""

    def _show(self, layer: Any, notes: list[str]) -> None:
        from ..plots.attenuation import interval_text, length_text

        fit = self.fit_result
        self.result_label.value = (f"Estimate: {length_text(fit)}; exponential fit r² = "
                                   f"{fit.r_squared:.3f}\n{interval_text(fit)}")
        self.truth_label.value = self._truth_line(layer)
        capped = int(np.sum(np.where(np.isfinite(fit.gain), fit.gain, 1.0) > self.max_gain.value))
        if capped:
            notes = notes + [f"{capped} slice(s) need a gain above the max gain and will be capped"]
        self.notes_label.value = "\n".join(f"\u2022 {n}" for n in notes)
        self.correct_button.enabled = True
        self._draw()

    def _draw(self) -> None:
        if self.fit_result is None:
            return
        from ..plots.attenuation import attenuation_figure

        layer = self.fit_source
        max_gain = float(self.max_gain.value)
        attenuation_figure(self.fit_result, log_scale=bool(self.log_scale.value),
                           max_gain=max_gain if math.isfinite(max_gain) else None,
                           truth=layer_stack(layer).truth if layer is not None else None,
                           title=getattr(layer, "name", None), figure=self.figure,
                           annotate=False)
        self.canvas.draw_idle()
