"""The "Depth colour projection" dock (colour = depth in µm, brightness = signal)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSlider, FloatSpinBox, Label

from ..jobs.choices import (
    LIVE_NOTE,
    RECOLOURABLE,
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
from ._dock import in_dock_words
from ._projection_base import ProjectionDock

if TYPE_CHECKING:  # pragma: no cover
    import napari

class DepthColourWidget(ProjectionDock):
    """Colours every pixel by the depth (µm) of its signal, in one RGB image.

    The result is the RGB layer ``"<source> depth colour"``. With "Live
    update" on, it follows every change without Compute: a stack expected to
    take at most :data:`~viewer_plugin.widgets._projection_base.LIVE_SECONDS`
    is projected at full resolution, and a change of colour map, depth range,
    contrast or gamma only recolours the kept result (no new pass over the
    stack); a bigger stack gets a preview on every 4th pixel (or coarser),
    ``"<source> depth colour (preview)"``, until Compute. The key (depth in µm
    x brightness) is drawn in the dock; "Export figure…" saves a figure for a
    paper; the status bar shows the depth and peak under the cursor.
    """

    title = "Depth colour projection"
    tab_title = "Depth colour"
    figure_name = "depth colour"
    slab_capable = True
    previews = True

    def __init__(self, napari_viewer: "napari.Viewer") -> None:
        self.result_layer: Any = None
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
        self.live = CheckBox(text="Live update", value=True, tooltip=LIVE_NOTE)
        self.legend = Label(value="")  # shows the 2-D key (depth x brightness) as a pixmap
        self.legend_image: np.ndarray | None = None
        self.legend_label = Label(value="")
        self.saturation = Label(value="")
        self.saturation.native.setStyleSheet("color: #f0a040")  # a warning, when there is one
        self.caveat = Label(value=PROJECTION_CAVEAT)
        for label in (self.cmap_hint, self.clim_label, self.method_hint, self.legend_label,
                      self.saturation, self.caveat):
            label.native.setWordWrap(True)
        self.extend([self.method, self.cmap, self.cmap_hint, self.whole_depth, self.depth_from,
                     self.depth_to, self.auto_contrast, self.clim_label, self.method_hint,
                     self.gamma, self.live])
        for widget in (self.method, self.cmap, self.depth_from, self.depth_to, self.auto_contrast,
                       self.gamma, self.live):  # base: recolour, or update live
            widget.changed.connect(self._on_parameter_changed)
        self.whole_depth.changed.connect(self._on_whole_depth)
        super()._add_options()  # the slab, then the key below it
        self.extend([self.legend, self.legend_label, self.saturation, self.caveat])

    def _layer_changed_hook(self, layer: Any) -> None:
        if layer is None:
            return
        self._reset_depth_range()
        self._show_clim()
        self.request_live()

    def live_wanted(self) -> bool:
        return bool(self.live.value) or super().live_wanted()

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
        from ._depth_layer import DepthLookup

        info = in_dock_words(projected.provenance)
        result = projected.result
        lookup = DepthLookup(np.asarray(result.depth_um), result.peak,
                             None if result.method == "weighted" else result.z_step / 2)
        self.result_layer = self.add_result(
            projected.rgb, projected.geometry.with_samples(), source=layer,
            depth_axis=info["depth_axis"], name=f"{layer.name} depth colour", rgb=True,
            metadata={"stackdepth": info}, replace=self.result_layer, lookup=lookup)
        self._draw_legend(result)
        self.export_button.enabled = True
        d0, d1 = result.depth_range
        slab = info.get("slab")
        where = "" if slab is None else (f"; slab {slab['depths_um'][0]:g}\u2013"
                                         f"{slab['depths_um'][1]:g} \u00b5m")
        self.status.value = (f"'{self.result_layer.name}': full resolution, colours "
                             f"{d0:g}\u2013{d1:g} \u00b5m{where}")

    def _restyled(self) -> bool:
        """Recolour the kept result when only colour map, depth range, contrast or gamma changed."""
        from ..jobs import recolour_projected

        layer = self.layer
        if layer is None or self.axis_combo.value is None:
            return False
        try:
            options = self.job_options(layer)
        except ValueError as exc:
            self.status.value = f"{exc}"
            return True
        if self._stack_key(layer, options, int(self.axis_combo.value)) != self._shown_key:
            return False
        if options.method not in RECOLOURABLE or (self.result_layer not in self.viewer.layers):
            return False
        self.projected = recolour_projected(self.projected, options)
        self._show(layer, self.projected)
        return True

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
        super()._on_parameter_changed()

    def _show_preview(self, layer: Any, step: int, seconds: float, projected: Any) -> None:
        name = f"{layer.name} depth colour (preview)"
        axis = projected.provenance["depth_axis"]
        self.preview_layer = self.add_result(projected.rgb, projected.geometry.with_samples(),
                                             source=layer, depth_axis=axis, name=name, rgb=True,
                                             replace=self.preview_layer)
        self._draw_legend(projected.result)
        self.status.value = (f"Preview on every {step}th pixel: the full stack would take about "
                             f"{seconds:.1f} s each time; press Compute for the full result")
