"""The three projection docks: depth colour, peak depth map (with depth along a drawn path), occlusion.

What they share (Compute, live updates, slabs, figures, movies) is
:class:`~viewer_plugin.widgets._projection_base.ProjectionDock`; each dock here
only adds its own options and shows its own result layers.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSpinBox, Label, PushButton

from ..jobs.choices import (
    CMAP_KIND,
    COLOUR_MAPS,
    DEPTH_MAP_CMAPS,
    OCCLUSION_NOTE,
    PATH_CAVEAT,
    PATH_NOTE,
)
from ._common import wrapped
from ._dock import in_dock_words, layer_letters
from ._projection_base import ProjectionDock
from .depth_colour import DepthColourWidget

__all__ = ["DepthColourWidget", "OcclusionWidget", "PeakDepthWidget", "ProjectionDock"]

#: Colours of the occlusion rendering: grey, or depth through a map of the shared list
#: (constant lightness first, no rainbow-like maps).
OCCLUSION_COLOURS = [("grey", None)] + [
    (f"depth ({name})", name) for _, name in COLOUR_MAPS if CMAP_KIND[name] != "rainbow"]


class PeakDepthWidget(ProjectionDock):
    """Maximum-intensity projection plus the depth (µm) of each maximum.

    Adds two layers: ``"<source> peak"`` (the input dtype) and
    ``"<source> peak depth (µm)"`` (float32, µm below the first slice, with
    napari's colour bar), so hovering a pixel reads its depth in µm.
    "Export figure…" draws the depth map as that layer shows it, with its
    colour bar in µm.
    """

    title = "Peak depth map"
    tab_title = "Peak depth"
    movie_method = "peak"
    figure_name = "peak depth"
    #: The figure blanks pixels whose peak is at or below this (as the depth layer); None: none.
    blank_at_or_below: float | None = None
    slab_capable = True

    def __init__(self, napari_viewer: Any) -> None:
        self.max_layer: Any = None
        self.depth_layer: Any = None
        self.profile: Any = None
        self._path_layer: Any = None
        super().__init__(napari_viewer)
        self._add_path_canvas()

    def _add_options(self) -> None:
        self.depth_cmap = ComboBox(label="Depth map colours", choices=list(DEPTH_MAP_CMAPS),
                                   value=DEPTH_MAP_CMAPS[0],
                                   tooltip="The depth map shows one quantity: a map whose "
                                           "lightness rises steadily with depth suits it")
        self.hide_background = CheckBox(
            text="Blank depth where peak \u2264 lower contrast limit", value=False,
            tooltip="Pixels whose peak is at or below the layer's lower contrast limit get no "
                    "depth (NaN): their 'depth' would only be the depth of the strongest noise")
        self.note = Label(value="Depth is measured from the first slice (0 \u00b5m); "
                                "ties go to the shallowest slice.")
        self.extend([self.depth_cmap, self.hide_background, self.note])
        self.depth_cmap.changed.connect(self._on_parameter_changed)
        self.hide_background.changed.connect(self._on_parameter_changed)
        super()._add_options()

    def _add_bottom(self) -> None:
        super()._add_bottom()
        self.path_combo = ComboBox(label="Path", choices=self._path_choices,
                                   tooltip="A Shapes layer: its selected (or last) path or line")
        self.draw_path_button = PushButton(text="Draw a path\u2026",
                                           tooltip="Adds a Shapes layer in path mode: click "
                                                   "along a fibre, double-click to finish")
        self.path_text = wrapped(Label(value=PATH_NOTE))
        self.extend([self.path_combo, self.draw_path_button, self.path_text])
        self.path_combo.changed.connect(self._on_path_layer)
        self.draw_path_button.changed.connect(self.draw_path)

    def _add_path_canvas(self) -> None:
        from matplotlib.backends.backend_qtagg import FigureCanvasQTAgg
        from matplotlib.figure import Figure

        self.path_figure = Figure(figsize=(5.0, 3.4), dpi=90, layout="constrained")
        self.path_canvas = FigureCanvasQTAgg(self.path_figure)
        self.path_canvas.setMinimumHeight(260)
        self.path_canvas.setVisible(False)
        self.native.layout().addWidget(self.path_canvas)

    # ----------------------------------------------------------- depth along a path
    def _path_choices(self, _widget: Any = None) -> list[tuple[str, Any]]:
        from napari.layers import Shapes

        return [(layer.name, layer) for layer in self.viewer.layers if isinstance(layer, Shapes)]

    def _refresh_hook(self) -> None:
        if hasattr(self, "path_combo"):
            self.path_combo.reset_choices()

    def draw_path(self, *_: Any) -> Any:
        """Add a Shapes layer in path-drawing mode over the result (or the stack)."""
        layer = self.layer
        name = f"{layer.name} path" if layer is not None else "path"
        units = None if self.max_layer is None else tuple(self.max_layer.units)
        shapes = self.viewer.add_shapes(name=name, shape_type="path", edge_color="#ffffff",
                                        units=units,
                                        edge_width=2.0 * float(min(layer.scale[-2:]))
                                        if layer is not None else 1.0,
                                        ndim=2 if self.max_layer is None else self.max_layer.ndim)
        shapes.mode = "add_path"
        self.path_combo.reset_choices()
        self.path_combo.value = shapes
        return shapes

    def _on_path_layer(self, shapes: Any) -> None:
        old = self._path_layer
        if old is not None:
            try:
                old.events.data.disconnect(self._on_path_edited)
            except (RuntimeError, TypeError, ValueError):
                pass
        self._path_layer = shapes
        if shapes is not None:
            shapes.events.data.connect(self._on_path_edited)
            self.plot_path()

    def _on_path_edited(self, *_: Any) -> None:
        self.plot_path()

    def path_vertices(self) -> np.ndarray | None:
        """The chosen path in pixels (row, column) of the projected image, or None."""
        shapes, result_layer = self.path_combo.value, self.max_layer
        if shapes is None or result_layer is None or not len(shapes.data):
            return None
        kinds = list(shapes.shape_type)
        chosen = [i for i in sorted(shapes.selected_data) if kinds[i] in ("path", "line")]
        usable = chosen or [i for i, kind in enumerate(kinds) if kind in ("path", "line")]
        if not usable:
            return None
        vertices = np.asarray(shapes.data[usable[-1]], dtype=float)
        world = np.array([shapes.data_to_world(v) for v in vertices])[:, -2:]
        scale = np.asarray(result_layer.scale[-2:], float)
        translate = np.asarray(result_layer.translate[-2:], float)
        return (world - translate) / scale

    def plot_path(self, *_: Any) -> Any:
        """Plot depth and peak along the chosen path; returns the profile (None when none)."""
        from ..jobs import path_profile
        from ..plots.path import length_text, path_figure

        if self.projected is None:
            self.path_text.value = "Compute the peak depth map first, then draw a path over it."
            return None
        vertices = self.path_vertices()
        if vertices is None or len(vertices) < 2:
            self.path_text.value = PATH_NOTE
            return None
        try:
            self.profile = path_profile(self.projected, vertices,
                                        index=self._shown_index(self.max_layer))
        except ValueError as exc:
            self.path_text.value = f"Path: {exc}"
            self.path_canvas.setVisible(False)
            return None
        self.path_text.value = length_text(self.profile) + ". " + PATH_CAVEAT
        path_figure(self.profile, figure=self.path_figure, title=self.path_combo.value.name)
        self.path_canvas.setVisible(True)
        self.path_canvas.draw_idle()
        return self.profile

    def _shown_index(self, layer: Any) -> tuple[int, ...]:
        """The plane of a result with time or channel axes that the viewer shows now."""
        depth = np.asarray(self.projected.result.depth_um)
        if depth.ndim <= 2:
            return ()
        position = np.asarray(layer.world_to_data(self.viewer.dims.point[-layer.ndim:]))
        position = np.delete(position, int(self.projected.provenance["depth_axis"]))
        return tuple(int(np.clip(round(float(position[j])), 0, depth.shape[j] - 1))
                     for j in range(depth.ndim - 2))

    def _projection_options(self, layer: Any) -> Any:
        from ..jobs import ProjectionOptions

        return ProjectionOptions(method="max", cmap=self.depth_cmap.value)

    def _figure_options(self) -> dict[str, Any]:
        return {"blank_at_or_below": self.blank_at_or_below}

    def _movie_settings(self, layer: Any) -> dict[str, Any]:
        return {"clim": tuple(float(v) for v in layer.contrast_limits)}

    def _show(self, layer: Any, projected: Any) -> None:
        from ._depth_layer import DepthLookup

        result, axis = projected.result, projected.provenance["depth_axis"]
        geometry = projected.geometry
        depth_um = np.asarray(result.depth_um)
        low, high = (float(v) for v in layer.contrast_limits)
        self.blank_at_or_below = low if self.hide_background.value else None
        if self.hide_background.value:
            depth_um = np.where(np.asarray(result.peak) <= low, np.float32(np.nan), depth_um)
        z_step = projected.provenance["z_step_um"]
        deepest = max(z_step * (int(layer.data.shape[axis]) - 1), z_step)
        lookup = DepthLookup(depth_um, np.asarray(result.peak), z_step / 2)
        self.max_layer = self.add_result(
            result.peak, geometry, source=layer, depth_axis=axis, name=f"{layer.name} peak",
            colormap=getattr(layer.colormap, "name", "gray"),
            contrast_limits=(low, high) if high > low else None, replace=self.max_layer,
            lookup=lookup)
        self.depth_layer = self.add_result(
            depth_um, geometry, source=layer, depth_axis=axis,
            name=f"{layer.name} peak depth (\u00b5m)",
            colormap=projected.provenance["depth_map_cmap"],
            contrast_limits=(0.0, deepest), replace=self.depth_layer, lookup=lookup,
            metadata={"stackdepth": {**in_dock_words(projected.provenance), "quantity":
                                     "depth of the strongest voxel", "unit": "\u00b5m",
                                     "origin": "first slice = 0 \u00b5m"}})
        self.depth_layer.colorbar.visible = True
        slab = projected.provenance.get("slab")
        where = "" if slab is None else (f"; slab {slab['depths_um'][0]:g}\u2013"
                                         f"{slab['depths_um'][1]:g} \u00b5m")
        self.status.value = (f"'{self.max_layer.name}' and '{self.depth_layer.name}' "
                             f"(0\u2013{deepest:g} \u00b5m{where})")
        if getattr(self, "path_combo", None) is not None and self.path_combo.value is not None:
            self.plot_path()

    def _restyled(self) -> bool:
        """Colours of the depth map and blanked background need no new projection."""
        layer = self.layer
        if layer is None or self.axis_combo.value is None or self.depth_layer is None:
            return False
        try:
            options = self.job_options(layer)
        except ValueError:
            return False
        if self._stack_key(layer, options, int(self.axis_combo.value)) != self._shown_key \
                or self.depth_layer not in self.viewer.layers:
            return False
        record = {**self.projected.provenance, "depth_map_cmap": options.cmap}
        self.projected = dataclasses.replace(self.projected, provenance=record)
        self._show(layer, self.projected)
        return True


class OcclusionWidget(ProjectionDock):
    """Emission–absorption rendering (front-to-back "over"), plus optional side views.

    Nearer structures partly hide deeper ones. Side views look along y and
    along x with depth vertical; their layer scale uses the z-step so they are
    geometrically right, and they are placed below the top view.
    """

    title = "Occlusion projection"
    tab_title = "Occlusion"
    movie_method = "occlusion"
    figure_name = "occlusion"

    def _add_options(self) -> None:
        self.auto_density = CheckBox(text="Automatic density (from the stack's depth)", value=True)
        self.density = FloatSpinBox(label="Density (1/\u00b5m)", value=0.05, min=1e-5, max=100.0,
                                    step=0.01, enabled=False,
                                    tooltip="Extinction per \u00b5m at full brightness; higher "
                                            "hides deeper structures more")
        self.view = ComboBox(label="View from", choices=[("top (first slice)", "top"),
                                                        ("bottom (last slice)", "bottom")],
                             value="top")
        self.auto_contrast = CheckBox(text="Automatic contrast (percentiles)", value=False,
                                      tooltip="Otherwise the layer's contrast limits are used")
        self.colour = ComboBox(label="Colour", choices=OCCLUSION_COLOURS, value=None,
                               tooltip="Grey, or each slice emits the colour of its depth (top "
                                       "and side views)")
        self.side_views = CheckBox(text="Side views along y and along x", value=False)
        self.note = Label(value=OCCLUSION_NOTE)
        self.extend([self.auto_density, self.density, self.view, self.auto_contrast,
                     self.colour, self.side_views, self.note])
        self.auto_density.changed.connect(lambda v: setattr(self.density, "enabled", not v))
        super()._add_options()

    def _options(self, layer: Any) -> dict[str, Any]:
        """The rendering's options; the density is the kernel's default unless set by hand."""
        from ..kernels.projection import default_density

        if self.auto_density.value:
            axis = int(self.axis_combo.value)
            density = default_density(int(layer.data.shape[axis]), self.step_value())
        else:
            density = float(self.density.value)
        clim = None if self.auto_contrast.value else tuple(float(v) for v in layer.contrast_limits)
        return {"density": density, "clim": clim, "view": self.view.value,
                "cmap": self.colour.value, "side_views": bool(self.side_views.value)}

    def _projection_options(self, layer: Any) -> Any:
        from ..jobs import ProjectionOptions

        return ProjectionOptions(method="occlusion", **self._options(layer))

    def _movie_settings(self, layer: Any) -> dict[str, Any]:
        options = self._options(layer)
        return {key: options[key] for key in ("density", "clim", "cmap")}

    def _show(self, layer: Any, projected: Any) -> None:
        top = np.asarray(projected.result)
        rgb = projected.rgb is not None
        info = in_dock_words(projected.provenance)
        display: dict[str, Any] = {"rgb": True} if rgb else {"colormap": "gray"}
        high = max([float(np.nanmax(v)) for v in (top, *(s.image for s in projected.side_views))]
                   + [1e-6])
        if not rgb:  # one display scale for all views, so brightness compares across them
            display["contrast_limits"] = (0.0, high)
        geometry = projected.geometry.with_samples() if rgb else projected.geometry
        self.top_layer = self.add_result(
            top, geometry, source=layer, depth_axis=info["depth_axis"],
            name=f"{layer.name} occlusion ({info['view']})", metadata={"stackdepth": info},
            **display)
        self.side_layers = [self._add_side(layer, side, display) for side in projected.side_views]
        names = [self.top_layer.name] + [s.name for s in self.side_layers]
        self.status.value = ("Added " + ", ".join(f"'{n}'" for n in names)
                             + f" (density {info['density_per_um']:.3g}/\u00b5m)")

    def _add_side(self, layer: Any, side: Any, display: dict[str, Any]) -> Any:
        """Add a side view below (along y) or below and right of (along x) the top view."""
        from ..jobs import Geometry

        axis = int(self.axis_combo.value)
        lateral = [i for i in range(layer.ndim) if i != axis][-2:]
        y_axis, x_axis = lateral
        ty, tx = float(layer.translate[y_axis]), float(layer.translate[x_axis])
        height = layer.data.shape[y_axis] * float(layer.scale[y_axis])
        width = layer.data.shape[x_axis] * float(layer.scale[x_axis])
        gap = 0.05 * max(height, width)
        left = tx if side.along == layer_letter(layer, y_axis) else tx + width + gap
        geometry = side.geometry
        n_lead = len(geometry.axes) - 2
        placed = Geometry(geometry.axes, geometry.scale,
                          geometry.translate[:n_lead] + (ty + height + gap, left))
        if display.get("rgb"):
            placed = placed.with_samples()
        return self.add_result(side.image, placed, source=layer,
                               depth_axis=axis if n_lead else None,
                               name=f"{layer.name} occlusion side (along {side.along})", **display)


def layer_letter(layer: Any, axis: int) -> str:
    """The lower-case axis letter of *layer*'s axis number *axis*."""

    return layer_letters(layer)[axis].lower()

