"""The "Depth colour projection" dock widget (colour = depth in µm, brightness = signal)."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSlider, FloatSpinBox, Label, PushButton

from ._proj_base import (
    ProjectionWidget,
    downsampled,
    geometry_without,
    layer_data,
    preview_step,
    span_depth,
)

if TYPE_CHECKING:  # pragma: no cover
    import napari

#: (label, matplotlib name): perceptually uniform, colour-vision-deficiency friendly maps first.
COLOUR_MAPS = (
    ("viridis", "viridis"),
    ("cividis (for red\u2013green colour-blindness)", "cividis"),
    ("plasma", "plasma"),
    ("inferno", "inferno"),
    ("magma", "magma"),
    ("turbo (rainbow-like)", "turbo"),
    ("gist_rainbow (rainbow-like)", "gist_rainbow"),
    ("hsv (rainbow-like, cyclic)", "hsv"),
)

METHODS = (
    ("peak: depth of the strongest voxel", "peak"),
    ("weighted: intensity-weighted mean depth", "weighted"),
    ("tinted: slices tinted by depth, then maximum", "tinted"),
)

CAVEAT = ("Colour = depth below the first slice; brightness = display contrast, "
          "relative and not calibrated.")

#: Milliseconds without a parameter change before a preview starts.
PREVIEW_DELAY_MS = 300


class DepthColourWidget(ProjectionWidget):
    """Colours every pixel by the depth (µm) of its signal, in one RGB image.

    The full result is a new RGB layer ``"<source> depth colour"``; while
    parameters move, a preview on every 4th pixel (or coarser for big stacks)
    is shown as ``"<source> depth colour (preview)"``. The colour bar in µm is
    drawn in the dock; "Export figure…" saves a figure for a paper.
    """

    title = "Depth colour projection"

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        from qtpy.QtCore import QTimer

        self.result: Any = None
        self.result_info: dict[str, Any] = {}
        self.result_layer: Any = None
        self.preview_layer: Any = None
        self.preview_worker: Any = None
        self._preview_pending = False
        self._timer = QTimer()
        self._timer.setSingleShot(True)
        self._timer.setInterval(PREVIEW_DELAY_MS)
        self._timer.timeout.connect(self.update_preview)
        super().__init__(napari_viewer)
        self.insert(self.index(self.cancel_button) + 1, self.export_button)

    # ----------------------------------------------------------- dock
    def _add_options(self) -> None:
        self.method = ComboBox(label="Method", choices=list(METHODS), value="peak")
        self.cmap = ComboBox(label="Colour map", choices=list(COLOUR_MAPS), value="viridis",
                             tooltip="The first five are perceptually uniform and readable with "
                                     "colour-vision deficiency; rainbow-like maps distort depth")
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
        self.legend = Label(value="")  # shows the colour bar as a pixmap
        self.legend_image: np.ndarray | None = None
        self.legend_label = Label(value="")
        self.export_button = PushButton(text="Export figure\u2026", enabled=False)
        self.caveat = Label(value=CAVEAT)
        self.extend([self.method, self.cmap, self.whole_depth, self.depth_from, self.depth_to,
                     self.auto_contrast, self.clim_label, self.method_hint, self.gamma, self.live,
                     self.legend, self.legend_label, self.caveat])
        for widget in (self.method, self.cmap, self.depth_from, self.depth_to, self.auto_contrast,
                       self.gamma, self.live):
            widget.changed.connect(self._on_parameter_changed)
        self.whole_depth.changed.connect(self._on_whole_depth)
        self.export_button.changed.connect(self._ask_export)

    def _layer_changed_hook(self, layer: Any) -> None:
        if layer is None:
            return
        self._reset_depth_range()
        self._show_clim()

    def _reset_depth_range(self) -> None:
        layer, axis = self.layer, self.axis_combo.value
        if layer is None or axis is None:
            return
        deepest = self.current_z_step() * max(1, layer.data.shape[axis] - 1)
        if self.whole_depth.value:
            with self.depth_from.changed.blocked(), self.depth_to.changed.blocked():
                self.depth_from.value = 0.0
                self.depth_to.value = deepest

    def _on_whole_depth(self, value: bool) -> None:
        self.depth_from.enabled = self.depth_to.enabled = not value
        self._reset_depth_range()
        self._on_parameter_changed()

    def _show_clim(self) -> None:
        weighted = self.method.value == "weighted"
        self.method_hint.value = (
            "weighted: the lower contrast limit must be at or above the background, or the "
            "background pulls every depth towards mid-stack; automatic contrast does this "
            "(background + 3 SD)" if weighted and not self.auto_contrast.value else "")
        layer = self.layer
        if layer is None or self.auto_contrast.value:
            low = "background + 3 SD" if weighted else "0.1 percentile"
            self.clim_label.value = f"contrast: automatic ({low} / 99.9 percentile)" \
                if layer is not None else ""
            return
        lo, hi = (float(v) for v in layer.contrast_limits)
        self.clim_label.value = f"contrast from the layer: {lo:g} \u2013 {hi:g}"

    # ----------------------------------------------------------- options
    def _options(self, layer: Any) -> dict[str, Any]:
        from .._shared.validation import check_interval

        depth_range = None
        if not self.whole_depth.value:
            depth_range = check_interval((float(self.depth_from.value), float(self.depth_to.value)),
                                         name="depth range (\u00b5m)")
        clim = None if self.auto_contrast.value else tuple(float(v) for v in layer.contrast_limits)
        return {"method": self.method.value, "cmap": self.cmap.value, "depth_range": depth_range,
                "clim": clim, "gamma": float(self.gamma.value)}

    def _job(self, data: Any, axis: int, z_step: float, options: dict[str, Any],
             progress: Callable[[int, int], None]) -> Any:
        from ..kernels.projection import depth_coded_projection, depth_legend

        result = depth_coded_projection(data, z_step=z_step, axis=axis, progress=progress, **options)
        return result, depth_legend(result)

    def _show(self, layer: Any, axis: int, z_step: float, options: dict[str, Any], result: Any) -> None:
        result, legend = result
        self.result = result
        self.result_info = self._provenance(layer, axis, z_step, options, result)
        self._remove_preview()
        self.result_layer = self.add_result(
            np.asarray(result.rgb), layer, axis, name=f"{layer.name} depth colour", rgb=True,
            metadata={"stackdepth": self.result_info})
        self._draw_legend(legend)
        self.export_button.enabled = True
        d0, d1 = result.depth_range
        self.status.value = f"Added '{self.result_layer.name}' (depth {d0:g}\u2013{d1:g} \u00b5m)"

    def _provenance(self, layer: Any, axis: int, z_step: float, options: dict[str, Any],
                    result: Any) -> dict[str, Any]:
        source = getattr(getattr(layer, "source", None), "path", None)
        keep = [i for i in range(layer.ndim) if i != axis]
        return {
            "method": options["method"], "cmap": options["cmap"],
            "depth_range_um": [float(v) for v in result.depth_range],
            "depth_range_requested_um": options["depth_range"],
            "clim": options["clim"], "auto_contrast": options["clim"] is None,
            "clim_used": [float(v) for v in result.clim],
            "gamma": options["gamma"], "z_step_um": z_step,
            "z_step_from": "override" if self.override_z.value else "layer scale",
            "voxel_size_um": [z_step] + [float(layer.scale[i]) for i in keep[-2:]],
            "depth_axis": axis, "source_layer": layer.name,
            "source_file": str(source) if source else None,
            "computed_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        }

    def _draw_legend(self, legend: Any) -> None:
        from ..figures import colour_bar_image

        from qtpy.QtGui import QImage, QPixmap

        image = np.ascontiguousarray(colour_bar_image(legend, width_px=300, height_px=60))
        self.legend_image = image
        height, width = image.shape[:2]
        qimage = QImage(image.data, width, height, 4 * width, QImage.Format.Format_RGBA8888)
        self.legend.native.setPixmap(QPixmap.fromImage(qimage.copy()))
        self.legend_label.value = "Depth colour bar (\u00b5m below the first slice)"

    # ----------------------------------------------------------- preview
    def _on_parameter_changed(self, *_: Any) -> None:
        if getattr(self, "live", None) is None:  # still building the dock
            return
        if self.whole_depth.value:
            self._reset_depth_range()  # follows a new z-step
        self._show_clim()
        if self.live.value and self.layer is not None:
            self._timer.start()

    def update_preview(self, *, start_thread: bool = True) -> Any:
        """Compute the downsampled preview now; returns its worker (or None)."""
        from napari.qt.threading import create_worker

        layer = self.layer
        if layer is None or self.axis_combo.value is None:
            return None
        if self.preview_worker is not None:
            self._preview_pending = True
            return None
        axis, z_step = int(self.axis_combo.value), self.current_z_step()
        try:
            options = self._options(layer)
        except ValueError as exc:
            self.status.value = f"preview: {exc}"
            return None
        data = layer_data(layer)
        step = preview_step(tuple(data.shape), axis)
        small, others = downsampled(data, axis, step)

        def job() -> Any:
            return self._job(small, axis, z_step, options, lambda done, total: None)

        worker = create_worker(job, _start_thread=False, _ignore_errors=True)
        worker.returned.connect(lambda out: self._show_preview(layer, axis, step, others, out))
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

    def _show_preview(self, layer: Any, axis: int, step: int, others: tuple[int, ...], out: Any) -> None:
        result, legend = out
        geometry = geometry_without(layer, axis)
        keep = [i for i in range(layer.ndim) if i != axis]
        geometry["scale"] = tuple(s * step if keep[j] in others else s
                                  for j, s in enumerate(geometry["scale"]))
        rgb = np.asarray(result.rgb)
        if layer.ndim >= 4:  # time/channel axes lined up with the source's
            rgb, geometry = span_depth(rgb, layer, axis, geometry)
        name = f"{layer.name} depth colour (preview)"
        if self.preview_layer is not None and self.preview_layer in self.viewer.layers \
                and self.preview_layer.data.shape == rgb.shape:
            self.preview_layer.data = rgb
            self.preview_layer.scale = geometry["scale"]
        else:
            self._remove_preview()
            self.preview_layer = self.viewer.add_image(rgb, name=name, rgb=True, **geometry)
        self._draw_legend(legend)
        self.status.value = f"preview: every {step}th pixel; press Compute for the full result"

    def _remove_preview(self) -> None:
        if self.preview_layer is not None and self.preview_layer in self.viewer.layers:
            self.viewer.layers.remove(self.preview_layer)
        self.preview_layer = None

    # ----------------------------------------------------------- export
    def _ask_export(self, *_: Any) -> None:
        from qtpy.QtWidgets import QFileDialog

        if self.result is None:
            return
        base = self.result_info.get("source_layer", "projection")
        path, chosen = QFileDialog.getSaveFileName(
            self.native, "Export depth-colour figure", f"{base} depth colour.png",
            "PNG (*.png);;TIFF (*.tif *.tiff);;PDF (*.pdf)")
        if path and Path(path).suffix.lower() not in (".png", ".tif", ".tiff", ".pdf"):
            path += {"T": ".tif", "P": ".pdf"}.get(chosen[:1], ".png")
        if path:
            # the dialog already asked whether to replace an existing figure
            self.export_figure(path, overwrite=Path(path).exists(), background=True)

    def export_figure(self, path: str | Path, *, overwrite: bool = False, title: str | None = None,
                      background: bool = False) -> Any:
        """Save the last full result as a figure with colour bar, scale bar and sidecars.

        Returns the written files, or None after an error (shown as a
        notification). With *background* the figure is drawn and written in a
        worker thread (matplotlib Agg, no pyplot) and the napari worker is
        returned instead; the button stays disabled until it is done.
        """
        from napari.utils.notifications import show_error

        from ..figures import export_depth_figure

        if self.result is None:
            show_error(f"{self.title}: compute the full result before exporting a figure")
            return None
        info = self.result_info
        kwargs = {"pixel_size_um": tuple(info["voxel_size_um"][1:]), "title": title,
                  "source_name": info.get("source_file") or info["source_layer"],
                  "parameters": info, "overwrite": overwrite}
        figure_result = self._current_plane(self.result)  # reads the viewer: GUI thread
        if background:
            from napari.qt.threading import create_worker

            # errors go to _export_failed; without _ignore_errors napari re-raises them
            worker = create_worker(export_depth_figure, figure_result, path, **kwargs,
                                   _start_thread=False, _ignore_errors=True)
            worker.returned.connect(self._exported)
            worker.errored.connect(self._export_failed)
            worker.finished.connect(lambda: setattr(self.export_button, "enabled",
                                                    self.result is not None))
            self.export_button.enabled = False
            self.status.value = f"Exporting {Path(path).name}\u2026"
            worker.start()
            return worker
        try:
            files = export_depth_figure(figure_result, path, **kwargs)
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

    def _current_plane(self, result: Any) -> Any:
        """The 2-D plane of a result with extra axes (time, channel) shown in the viewer now."""
        rgb = np.asarray(result.rgb)
        if rgb.ndim <= 3:
            return result
        layer = self.result_layer
        position = np.asarray(layer.world_to_data(self.viewer.dims.point[-layer.ndim:]))
        axis = int(layer.metadata["stackdepth"]["depth_axis"])
        position = np.delete(position, axis)  # the depth axis is kept as one slice (span_depth)
        index = tuple(int(np.clip(round(float(position[j])), 0, rgb.shape[j] - 1))
                      for j in range(rgb.ndim - 3))
        return _Plane(rgb[index], result)


class _Plane:
    """One plane of a depth-coded result (same fields the figure code reads)."""

    def __init__(self, rgb: np.ndarray, result: Any) -> None:
        self.rgb = rgb
        self.depth_range = result.depth_range
        self.lut = result.lut
        self.clim = result.clim
