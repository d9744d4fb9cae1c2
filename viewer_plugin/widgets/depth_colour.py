"""The "Depth colour projection" dock (colour = depth in µm, brightness = signal)."""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSlider, FloatSpinBox, Label, PushButton

from ..jobs.choices import (
    CMAP_NOTE,
    COLOUR_MAPS,
    DEFAULT_CMAP,
    DEPTH_CODED,
    METHOD_LABELS,
    PROJECTION_CAVEAT,
    WEIGHTED_NOTE,
    cmap_caution,
    labelled,
    saturation_warning,
)
from ._dock import in_dock_words, layer_data, layer_stack
from ._projection_base import ProjectionDock

if TYPE_CHECKING:  # pragma: no cover
    import napari

#: Milliseconds without a parameter change before a preview starts.
PREVIEW_DELAY_MS = 300
#: Largest number of voxels of a preview (downsampled copy).
PREVIEW_VOXELS = 8_000_000


def preview_step(shape: tuple[int, ...], *, voxels: int = PREVIEW_VOXELS) -> int:
    """Step in y and x for a preview: 4, or more so the copy stays below *voxels*."""
    total = float(np.prod(shape, dtype=np.float64))
    step = 4
    while total / (step * step) > voxels:
        step *= 2
    return step


def preview_level(layer: Any, lateral: list[int], step: int) -> tuple[Any, int]:
    """The data a preview reads and its lateral factor (1: the full-resolution data).

    For a multiscale layer, the coarsest level whose y and x are downsampled
    by a factor that divides *step* and whose other axes (depth, time) are
    whole: reading it costs a factor² less than taking every *step*-th pixel
    of the full resolution, which reads every chunk.
    """
    full = layer_data(layer)
    best: tuple[Any, int] = (full, 1)
    if not getattr(layer, "multiscale", False):
        return best
    for level in list(layer.data)[1:]:
        shape = tuple(level.shape)
        factor = max(1, round(full.shape[lateral[-1]] / shape[lateral[-1]]))
        whole = all(shape[i] == full.shape[i] for i in range(full.ndim) if i not in lateral)
        fits = all(shape[i] == -(-full.shape[i] // factor) for i in lateral)
        if whole and fits and step % factor == 0 and factor > best[1]:
            best = (level, factor)
    return best


class DepthColourWidget(ProjectionDock):
    """Colours every pixel by the depth (µm) of its signal, in one RGB image.

    The full result is a new RGB layer ``"<source> depth colour"``; while
    parameters move, a preview on every 4th pixel (or coarser for big stacks)
    is shown as ``"<source> depth colour (preview)"``. The key (depth in µm x
    brightness) is drawn in the dock; "Export figure…" saves a figure for a paper.
    """

    title = "Depth colour projection"
    tab_title = "Depth colour"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        from qtpy.QtCore import QTimer

        self.result_layer: Any = None
        self.preview_layer: Any = None
        self.preview_worker: Any = None
        self._preview_pending = False
        self._timer = QTimer()
        self._timer.setSingleShot(True)
        self._timer.setInterval(PREVIEW_DELAY_MS)
        self._timer.timeout.connect(self.update_preview)
        super().__init__(napari_viewer)

    # ----------------------------------------------------------- dock
    def _add_options(self) -> None:
        self.method = ComboBox(label="Method", choices=labelled(METHOD_LABELS, DEPTH_CODED),
                               value="peak")
        self.cmap = ComboBox(label="Colour map", choices=list(COLOUR_MAPS), value=DEFAULT_CMAP,
                             tooltip=CMAP_NOTE)
        self.cmap_hint = Label(value="")
        self.whole_depth = CheckBox(text="Whole stack depth", value=True)
        self.depth_from = FloatSpinBox(label="Depth from (\u00b5m)", value=0.0, min=-1e6, max=1e6,
                                       step=1.0, enabled=False)
        self.depth_to = FloatSpinBox(label="Depth to (\u00b5m)", value=1.0, min=-1e6, max=1e6,
                                     step=1.0, enabled=False)
        self.auto_contrast = CheckBox(text="Automatic contrast (percentiles)", value=False,
                                      tooltip="Otherwise the layer's contrast limits set brightness")
        self.clim_label = Label(value="")
        self.method_hint = Label(value="")
        self.gamma = FloatSlider(label="Gamma", value=1.0, min=0.2, max=3.0, step=0.05)
        self.live = CheckBox(text="Live preview (downsampled)", value=True)
        self.legend = Label(value="")  # shows the 2-D key (depth x brightness) as a pixmap
        self.legend_image: np.ndarray | None = None
        self.legend_label = Label(value="")
        self.saturation = Label(value="")
        self.saturation.native.setStyleSheet("color: #f0a040")  # a warning, when there is one
        self.export_button = PushButton(text="Export figure\u2026", enabled=False)
        self.caveat = Label(value=PROJECTION_CAVEAT)
        for label in (self.cmap_hint, self.clim_label, self.method_hint, self.legend_label,
                      self.saturation, self.caveat):
            label.native.setWordWrap(True)
        self.extend([self.method, self.cmap, self.cmap_hint, self.whole_depth, self.depth_from,
                     self.depth_to, self.auto_contrast, self.clim_label, self.method_hint,
                     self.gamma, self.live, self.legend, self.legend_label, self.saturation,
                     self.caveat])
        for widget in (self.method, self.cmap, self.depth_from, self.depth_to, self.auto_contrast,
                       self.gamma, self.live):
            widget.changed.connect(self._on_parameter_changed)
        self.whole_depth.changed.connect(self._on_whole_depth)
        self.export_button.changed.connect(self._ask_export)
        super()._add_options()

    def _add_bottom(self) -> None:
        self.extend([*self.action_buttons, self.cancel_button, self.export_button, self.status])

    def _layer_changed_hook(self, layer: Any) -> None:
        if layer is None:
            return
        self._reset_depth_range()
        self._show_clim()

    def _reset_depth_range(self) -> None:
        layer, axis = self.layer, self.axis_combo.value
        if layer is None or axis is None or not self.whole_depth.value:
            return
        deepest = float(self.z_step.value) * max(1, layer.data.shape[axis] - 1)
        with self.depth_from.changed.blocked(), self.depth_to.changed.blocked():
            self.depth_from.value = 0.0
            self.depth_to.value = deepest

    def _on_whole_depth(self, value: bool) -> None:
        self.depth_from.enabled = self.depth_to.enabled = not value
        self._reset_depth_range()
        self._on_parameter_changed()

    def _show_clim(self) -> None:
        weighted = self.method.value == "weighted"
        self.method_hint.value = WEIGHTED_NOTE if weighted else ""
        self.cmap_hint.value = cmap_caution(self.cmap.value)
        layer = self.layer
        if layer is None or self.auto_contrast.value:
            low = "background + 3 SD" if weighted else "0.1 percentile"
            self.clim_label.value = f"contrast: automatic ({low} / 99.9 percentile)" \
                if layer is not None else ""
            return
        lo, hi = (float(v) for v in layer.contrast_limits)
        self.clim_label.value = f"contrast from the layer: {lo:g} \u2013 {hi:g}"

    # ----------------------------------------------------------- options and results
    def _projection_options(self, layer: Any) -> Any:
        from .._shared.validation import check_interval
        from ..jobs import ProjectionOptions

        depth_range = None
        if not self.whole_depth.value:
            depth_range = check_interval((float(self.depth_from.value), float(self.depth_to.value)),
                                         name="depth range (\u00b5m)")
        clim = None if self.auto_contrast.value else tuple(float(v) for v in layer.contrast_limits)
        return ProjectionOptions(method=self.method.value, cmap=self.cmap.value,
                                 depth_range=depth_range, clim=clim, gamma=float(self.gamma.value))

    def _show(self, layer: Any, projected: Any) -> None:
        self._remove_preview()
        info = in_dock_words(projected.provenance)
        self.result_layer = self.add_result(
            projected.rgb, projected.geometry.with_samples(), source=layer,
            depth_axis=info["depth_axis"], name=f"{layer.name} depth colour", rgb=True,
            metadata={"stackdepth": info})
        self._draw_legend(projected.result)
        self.export_button.enabled = True
        d0, d1 = projected.result.depth_range
        self.status.value = f"Added '{self.result_layer.name}' (depth {d0:g}\u2013{d1:g} \u00b5m)"

    def _draw_legend(self, result: Any) -> None:
        """The 2-D key of *result* (as the exported figure draws it) and its saturation warning."""
        from qtpy.QtGui import QImage, QPixmap

        from ..figures import KEY_STEPS, colour_bar_image
        from ..kernels import depth_legend

        key = depth_legend(result, brightness_steps=KEY_STEPS)
        image = np.ascontiguousarray(colour_bar_image(key, width_px=300, height_px=110))
        self.legend_image = image
        height, width = image.shape[:2]
        qimage = QImage(image.data, width, height, 4 * width, QImage.Format.Format_RGBA8888)
        self.legend.native.setPixmap(QPixmap.fromImage(qimage.copy()))
        self.legend_label.value = ("Key: colour = depth (\u00b5m below the first slice), "
                                   "brightness = signal between the contrast limits")
        self.saturation.value = saturation_warning(getattr(result, "saturated_fraction", None))

    # ----------------------------------------------------------- preview
    def _on_parameter_changed(self, *_: Any) -> None:
        if getattr(self, "live", None) is None:  # still building the dock
            return
        self._reset_depth_range()  # follows a new z-step
        self._show_clim()
        if self.live.value and self.layer is not None:
            self._timer.start()

    def update_preview(self, *, start_thread: bool = True) -> Any:
        """Compute the downsampled preview now; returns its worker (or None)."""
        from napari.qt.threading import create_worker

        from ..jobs import Selection, project_stack

        layer = self.layer
        if layer is None or self.axis_combo.value is None:
            return None
        if self.preview_worker is not None:
            self._preview_pending = True
            return None
        axis = int(self.axis_combo.value)
        try:
            options = dataclasses.replace(self._projection_options(layer), z_step=self.step_value())
        except ValueError as exc:
            self.status.value = f"preview: {exc}"
            return None
        step = preview_step(tuple(layer_data(layer).shape))
        lateral = [i for i in range(layer.ndim) if i != axis][-2:]
        data, factor = preview_level(layer, lateral, step)
        index = tuple(slice(None, None, step // factor) if i in lateral else slice(None)
                      for i in range(data.ndim))
        stack = layer_stack(layer)
        small = dataclasses.replace(stack, data=data[index], scale=tuple(
            s * step if i in lateral else s for i, s in enumerate(stack.scale)), translate=tuple(
            t + (factor - 1) / 2 * s if i in lateral else t
            for i, (t, s) in enumerate(zip(stack.translate, stack.scale))))

        def job() -> Any:
            from ._runner import dask_threads

            with dask_threads():
                return project_stack(Selection(small), options, depth_axis=axis)

        worker = create_worker(job, _start_thread=False, _ignore_errors=True)
        worker.returned.connect(lambda out: self._show_preview(layer, step, out))
        worker.errored.connect(lambda exc: setattr(self.status, "value", f"preview: {exc}"))
        worker.finished.connect(self._preview_done)
        self.preview_worker = worker
        if start_thread:
            worker.start()
        return worker

    def _on_close(self) -> None:
        self._preview_pending = False
        try:
            self._timer.stop()
        except RuntimeError:  # the Qt timer is already gone (application shutting down)
            pass

    def _preview_done(self) -> None:
        self.preview_worker = None
        if self._preview_pending:
            self._preview_pending = False
            self._timer.start()

    def _show_preview(self, layer: Any, step: int, projected: Any) -> None:
        name = f"{layer.name} depth colour (preview)"
        axis = projected.provenance["depth_axis"]
        old = self.preview_layer
        if old is not None and old in self.viewer.layers:
            self.viewer.layers.remove(old)
        self.preview_layer = self.add_result(projected.rgb, projected.geometry.with_samples(),
                                             source=layer, depth_axis=axis, name=name, rgb=True)
        self._draw_legend(projected.result)
        self.status.value = f"preview: every {step}th pixel; press Compute for the full result"

    def _remove_preview(self) -> None:
        if self.preview_layer is not None and self.preview_layer in self.viewer.layers:
            self.viewer.layers.remove(self.preview_layer)
        self.preview_layer = None

    # ----------------------------------------------------------- export
    def _ask_export(self, *_: Any) -> None:
        from qtpy.QtWidgets import QFileDialog

        if self.projected is None:
            return
        base = self.projected.provenance.get("source_name", "projection")
        path, chosen = QFileDialog.getSaveFileName(
            self.native, "Export depth-colour figure", f"{base} depth colour.png",
            "PNG (*.png);;TIFF (*.tif *.tiff);;PDF (*.pdf)")
        if path and Path(path).suffix.lower() not in (".png", ".tif", ".tiff", ".pdf"):
            path += {"T": ".tif", "P": ".pdf"}.get(chosen[:1], ".png")
        if path:
            # the dialog already asked whether to replace an existing figure
            self.export_figure(path, overwrite=Path(path).exists(), background=True)

    def _current_index(self) -> tuple[int, ...]:
        """The index of the plane shown now, for results with time or channel axes."""
        rgb = np.asarray(self.projected.result.rgb)
        if rgb.ndim <= 3 or self.result_layer is None:
            return ()
        layer = self.result_layer
        position = np.asarray(layer.world_to_data(self.viewer.dims.point[-layer.ndim:]))
        position = np.delete(position, int(self.projected.provenance["depth_axis"]))
        return tuple(int(np.clip(round(float(position[j])), 0, rgb.shape[j] - 1))
                     for j in range(rgb.ndim - 3))

    def _current_plane(self, result: Any = None) -> Any:
        """The 2-D plane of the last result shown in the viewer now (what a figure draws)."""
        from ..jobs import figure_plane

        return figure_plane(self.projected, self._current_index())

    def export_figure(self, path: str | Path, *, overwrite: bool = False, title: str | None = None,
                      background: bool = False) -> Any:
        """Save the last full result as a figure with its key, scale bar and sidecars.

        Returns the written files, or None after an error (shown as a
        notification). With *background* the figure is drawn and written in a
        worker thread and the napari worker is returned instead; the button
        stays disabled until it is done.
        """
        from napari.utils.notifications import show_error

        from ..jobs import write_figure

        if self.projected is None:
            show_error(f"{self.title}: compute the full result before exporting a figure")
            return None
        projected = dataclasses.replace(self.projected, provenance=self.result_info)
        kwargs = {"index": self._current_index(), "title": title, "overwrite": overwrite}
        if background:
            from napari.qt.threading import create_worker

            # errors go to _export_failed; without _ignore_errors napari re-raises them
            worker = create_worker(write_figure, projected, path, **kwargs,
                                   _start_thread=False, _ignore_errors=True)
            worker.returned.connect(self._exported)
            worker.errored.connect(self._export_failed)
            worker.finished.connect(lambda: setattr(self.export_button, "enabled",
                                                    self.projected is not None))
            self.export_button.enabled = False
            self.status.value = f"Exporting {Path(path).name}\u2026"
            worker.start()
            return worker
        try:
            files = write_figure(projected, path, **kwargs)
        except (ValueError, OSError) as exc:
            self._export_failed(exc)
            return None
        self._exported(files)
        return files

    def _exported(self, files: Any) -> None:
        from napari.utils.notifications import show_info

        show_info(f"{self.title}: saved {files.figure.name} with {files.sidecar.name} and "
                  f"{files.methods.name}")
        self.status.value = f"Exported {files.figure}"

    def _export_failed(self, exc: BaseException) -> None:
        from napari.utils.notifications import show_error

        text = str(exc) if isinstance(exc, (ValueError, OSError)) else f"{type(exc).__name__}: {exc}"
        show_error(f"{self.title}: {text}")
        self.status.value = f"Export failed: {text}"
