"""The "Depth attenuation" dock widget: how strongly does the signal fade with depth?

It only translates between layers and :mod:`viewer_plugin.kernels.attenuation`:
"Fit" runs :func:`estimate_attenuation` off the GUI thread (BackgroundTask)
and shows the profile, the model and the gain in a plot with the length and
its 95 % interval; "Correct" adds a new float32 layer
"<source> attenuation-corrected" with the same scale and translate. The
source layer and its data are never changed.
"""

from __future__ import annotations

import math
import warnings
from typing import TYPE_CHECKING, Any, Callable

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, Container, FloatSpinBox, Label, PushButton

from .._shared.validation import check_number, fail
from ._common import (
    connect_layer_events,
    disconnect_layer_events,
    image_layer_choices,
    leading_axis_labels,
    result_text,
    same_geometry,
)
from ._runner import BackgroundTask, TaskWidgetMixin

if TYPE_CHECKING:  # pragma: no cover
    import napari

__all__ = ["AttenuationWidget", "CAUTION_SHORT"]

CAUTION_SHORT = ("Corrected intensities are relative, not calibrated, and deep slices carry "
                 "amplified noise. One stack cannot separate attenuation from bleaching. "
                 "The original layer is kept.")
NO_MASK = "(none)"
MODELS = ("exponential", "smooth", "quantile")


def default_depth_axis(layer: Any) -> int:
    """The axis labelled z / depth, else axis 0."""
    for i, label in enumerate(leading_axis_labels(layer)):
        if str(label).strip().lower() in ("z", "depth"):
            return i
    return 0


def layer_pixels(layer: Any) -> Any:
    """The full-resolution data of an image layer (level 0 of a multiscale layer)."""
    return layer.data[0] if getattr(layer, "multiscale", False) else layer.data


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


class AttenuationWidget(TaskWidgetMixin, Container):
    """Dock widget "Depth attenuation" (see the module docstring)."""

    failure_label = "notes_label"
    failure_prefix = "Could not finish"
    title = "Depth attenuation"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        self.viewer = napari_viewer
        self.task = BackgroundTask(label=self.title)
        self.fit_result: Any = None
        self.fit_source: Any = None
        self.last_worker: Any = None
        self._build()
        super().__init__(widgets=self._widgets, labels=True)
        self._add_canvas()
        self.native.layout().addWidget(self._caution.native)
        self._connect()
        self.layer_combo.reset_choices()
        self.mask_combo.reset_choices()
        self._on_layer(self.layer_combo.value)

    # ------------------------------------------------------------ building
    def _build(self) -> None:
        self.layer_combo = ComboBox(label="Image", choices=self._layer_choices)
        self.axis_combo = ComboBox(label="Depth axis", choices=self._axis_choices)
        self.z_step = FloatSpinBox(label="Z-step (µm)", value=1.0, min=0.0, max=1e6, step=0.1)
        self.z_step.tooltip = "Slice spacing along the depth axis; taken from the layer scale"
        self.model = ComboBox(label="Model", choices=list(MODELS), value="exponential")
        self.model.tooltip = ("exponential: Beer-Lambert fit; smooth: follows any smooth profile; "
                              "quantile: maps every slice's quantiles onto the first slice's")
        self.max_gain = FloatSpinBox(label="Max gain", value=10.0, min=1.0, max=1e4, step=1.0)
        self.max_gain.tooltip = "Gains above this are capped: deep slices mostly gain noise"
        self.mask_combo = ComboBox(label="Mask (optional)", choices=self._mask_choices)
        self.fit_button = PushButton(text="Fit")
        self.correct_button = PushButton(text="Correct", enabled=False)
        self.cancel_button = PushButton(text="Cancel", enabled=False)
        self.log_scale = CheckBox(text="log scale", value=True)
        self.result_label = Label(value="Pick a z-stack and press Fit.")
        self.truth_label = Label(value="")
        self.notes_label = result_text(lines=3)
        self._caution = Label(value=CAUTION_SHORT)
        for label in (self.result_label, self.truth_label, self._caution):
            label.native.setWordWrap(True)
        self._widgets = [self.layer_combo, self.axis_combo, self.z_step, self.model, self.max_gain,
                         self.mask_combo, self.fit_button, self.correct_button, self.cancel_button,
                         self.result_label, self.truth_label, self.notes_label, self.log_scale]

    def _add_canvas(self) -> None:
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
        from matplotlib.figure import Figure

        self.figure = Figure(figsize=(4.4, 3.8), dpi=90, layout="constrained")
        self.canvas = FigureCanvasQTAgg(self.figure)
        self.canvas.setMinimumHeight(320)
        self.canvas.setMinimumWidth(360)
        self.native.layout().addWidget(self.canvas)

    def _connect(self) -> None:
        self.layer_combo.changed.connect(self._on_layer)
        self.axis_combo.changed.connect(lambda *_: self._sync_step())
        self.fit_button.changed.connect(self.fit)
        self.correct_button.changed.connect(self.correct)
        self.cancel_button.changed.connect(self.task.cancel)
        self.log_scale.changed.connect(lambda *_: self._draw())
        self.max_gain.changed.connect(lambda *_: self._draw())
        self.task.started.append(lambda: self._set_running(True))
        self.task.finished.append(lambda: self._set_running(False))
        connect_layer_events(self.viewer, self._refresh_layers)
        self.native.destroyed.connect(self._disconnect_viewer)

    def _layer_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        return [(layer.name, layer) for layer in image_layer_choices(self.viewer, min_ndim=3)]

    def _axis_choices(self, _widget: Any = None) -> list[tuple[str, int]]:
        layer = getattr(self, "layer_combo", None)
        layer = None if layer is None else layer.value
        if layer is None:
            return [("axis 0", 0)]
        labels = leading_axis_labels(layer)
        return [(f"{labels[i]} (axis {i})", i) for i in range(layer.ndim)]

    def _mask_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        from napari.layers import Labels, Shapes

        masks = [(layer.name, layer) for layer in self.viewer.layers
                 if isinstance(layer, (Labels, Shapes))]
        return [(NO_MASK, None)] + masks

    def _refresh_layers(self, *_: Any) -> None:
        before = self.layer_combo.value
        self.layer_combo.reset_choices()
        self.mask_combo.reset_choices()
        if self.layer_combo.value is not before:
            self._on_layer(self.layer_combo.value)

    def _disconnect_viewer(self, *_: Any) -> None:
        disconnect_layer_events(self.viewer, self._refresh_layers)

    # ------------------------------------------------------------ state
    def _on_layer(self, layer: Any) -> None:
        if layer is None:
            return
        self.axis_combo.reset_choices()
        self.axis_combo.value = default_depth_axis(layer)
        self._sync_step()
        self.truth_label.value = self._truth_line(layer, None)
        if self.fit_result is not None and layer is not self.fit_source:
            self._clear_fit()

    def _clear_fit(self) -> None:
        """A fit belongs to its layer: picking another one clears it (and disables Correct)."""
        self.fit_result = None
        self.fit_source = None
        self.correct_button.enabled = False
        self.result_label.value = "Press Fit to measure this layer."
        self.notes_label.value = ""
        self.figure.clear()
        self.canvas.draw_idle()

    def _sync_step(self) -> None:
        layer = self.layer_combo.value
        axis = self.axis_combo.value
        if layer is not None and axis is not None and axis < layer.ndim:
            self.z_step.value = float(layer.scale[axis])

    def _set_running(self, running: bool) -> None:
        self.fit_button.enabled = not running
        self.cancel_button.enabled = running
        self.correct_button.enabled = not running and self.fit_result is not None

    # ------------------------------------------------------------ actions
    def _inputs(self) -> tuple[Any, int, float, str, Any]:
        layer = self.layer_combo.value
        if layer is None:
            fail("Image", "an image layer with a z-stack (3-D)", "<no image layer>")
        if layer.ndim != 3:
            fail("Image", "a 3-D image layer (open channels as separate layers; time series: "
                 "use the bleaching check)", f"<a {layer.ndim}-D layer>")
        axis = int(self.axis_combo.value)
        z_step = check_number(float(self.z_step.value), name="Z-step", low=0, low_open=True)
        mask_layer = self.mask_combo.value
        mask = None
        if mask_layer is not None:
            from napari.layers import Shapes

            if isinstance(mask_layer, Shapes):
                mask = np.expand_dims(shapes_mask(mask_layer, layer, axis), axis)
            else:
                mask = labels_mask(mask_layer, layer, axis)
        return layer, axis, z_step, str(self.model.value), mask

    def fit(self, *_: Any, start_thread: bool = True) -> Any:
        """Estimate the attenuation of the chosen layer; returns the napari worker."""
        from ..kernels import estimate_attenuation

        try:
            layer, axis, z_step, model, mask = self._inputs()
        except ValueError as exc:
            self._notify(exc)
            return None
        data = layer_pixels(layer)

        def job(progress: Callable[[int, int], None]) -> Any:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                result = estimate_attenuation(data, z_step=z_step, model=model, axis=axis,
                                              mask=mask, progress=progress)
            return result, [str(w.message) for w in caught]

        def show(payload: Any) -> None:
            result, caught = payload
            self.fit_result = result
            self.fit_source = layer
            notes = list(result.warnings) + [c for c in caught if c not in result.warnings]
            self._show(layer, notes)

        return self._start(job, show, start_thread)

    def correct(self, *_: Any, start_thread: bool = True) -> Any:
        """Add the corrected layer for the last fit; returns the napari worker."""
        from ..kernels import correct_attenuation

        fit, layer = self.fit_result, self.fit_source
        if fit is None or layer is None or layer not in self.viewer.layers:
            self._notify(ValueError("Correct: expected a fit of an image layer, got none; press Fit first"))
            return None
        max_gain = float(self.max_gain.value)
        data = layer_pixels(layer)

        def job(progress: Callable[[int, int], None]) -> Any:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                out = correct_attenuation(data, fit, max_gain=max_gain, progress=progress)
            return out, [str(w.message) for w in caught]

        def add(payload: Any) -> None:
            from napari.utils.notifications import show_warning

            out, caught = payload
            for message in caught:
                show_warning(f"{self.title}: {message}")
            extra = {key: tuple(getattr(layer, key)) for key in ("units", "axis_labels")
                     if getattr(layer, key, None) is not None}
            self.viewer.add_image(
                out, name=f"{layer.name} attenuation-corrected", colormap=layer.colormap.name,
                blending=layer.blending, **same_geometry(layer), **extra,
                metadata={"attenuation": {"length_um": fit.length_um, "model": fit.model,
                                          "max_gain": max_gain, "offset": fit.offset,
                                          "source": layer.name},
                          "caution": CAUTION_SHORT})

        return self._start(job, add, start_thread)

    # ------------------------------------------------------------ display
    @staticmethod
    def _truth_line(layer: Any, _fit: Any) -> str:
        from ..plots.attenuation import truth_text

        truth = getattr(layer, "metadata", {}).get("truth") if layer is not None else None
        return truth_text(truth)

    def _show(self, layer: Any, notes: list[str]) -> None:
        from ..plots.attenuation import length_text

        fit = self.fit_result
        self.result_label.value = (f"Estimate: {length_text(fit)}; exponential fit r² = "
                                   f"{fit.r_squared:.3f}")
        self.truth_label.value = self._truth_line(layer, fit)
        capped = int(np.sum(np.where(np.isfinite(fit.gain), fit.gain, 1.0) > self.max_gain.value))
        if capped:
            notes = notes + [f"{capped} slice(s) need a gain above the max gain and will be capped"]
        self.notes_label.value = "\n".join(f"• {n}" for n in notes)
        self.correct_button.enabled = True
        self._draw()

    def _draw(self) -> None:
        if self.fit_result is None:
            return
        from ..plots.attenuation import attenuation_figure

        layer = self.fit_source
        truth = getattr(layer, "metadata", {}).get("truth") if layer is not None else None
        max_gain = float(self.max_gain.value)
        attenuation_figure(self.fit_result, log_scale=bool(self.log_scale.value),
                           max_gain=max_gain if math.isfinite(max_gain) else None,
                           truth=truth, title=getattr(layer, "name", None), figure=self.figure,
                           annotate=False)
        self.canvas.draw_idle()
