"""The three projection dock widgets: depth colour, peak depth map, occlusion.

They only translate between layers and the kernels in
:mod:`viewer_plugin.kernels.projection`: every result is a new layer, the
source layer and its data are never changed, and whole-stack work runs off
the GUI thread through :class:`~viewer_plugin.widgets._runner.BackgroundTask`.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSpinBox, Label

from ._proj_base import ProjectionWidget, span_depth
from ._proj_colour import DepthColourWidget

__all__ = ["DepthColourWidget", "OcclusionWidget", "PeakDepthWidget"]

#: Colour maps offered for depth maps: perceptually uniform first, rainbow-like last.
DEPTH_MAP_COLOURS = ("viridis", "cividis", "plasma", "inferno", "magma", "turbo")


class PeakDepthWidget(ProjectionWidget):
    """Maximum-intensity projection plus the depth (µm) of each maximum.

    Adds two layers: ``"<source> peak"`` (the input dtype) and
    ``"<source> peak depth (µm)"`` (float32, µm below the first slice, with
    napari's colour bar), so hovering a pixel reads its depth in µm.
    """

    title = "Peak depth map"

    def _add_options(self) -> None:
        self.depth_cmap = ComboBox(label="Depth map colours", choices=list(DEPTH_MAP_COLOURS),
                                   value="viridis")
        self.hide_background = CheckBox(
            text="Blank depth where max \u2264 lower contrast limit", value=False,
            tooltip="Pixels whose maximum is at or below the layer's lower contrast limit get no "
                    "depth (NaN): their 'depth' would only be the depth of the brightest noise")
        self.note = Label(value="Depth is measured from the first slice (0 \u00b5m); "
                                "ties go to the shallowest slice.")
        self.extend([self.depth_cmap, self.hide_background, self.note])

    def _options(self, layer: Any) -> dict[str, Any]:
        low = float(layer.contrast_limits[0])
        return {"cmap": self.depth_cmap.value,
                "blank_below": low if self.hide_background.value else None,
                "contrast_limits": tuple(float(v) for v in layer.contrast_limits),
                "colormap": getattr(layer.colormap, "name", "gray")}

    def _job(self, data: Any, axis: int, z_step: float, options: dict[str, Any],
             progress: Callable[[int, int], None]) -> Any:
        from ..kernels.projection import peak_projection

        result = peak_projection(data, axis=axis, z_step=z_step, progress=progress)
        values = np.asarray(result.peak)
        depth_um = np.array(result.depth_um)
        if options["blank_below"] is not None:
            depth_um[values <= options["blank_below"]] = np.nan
        return values, depth_um

    def _show(self, layer: Any, axis: int, z_step: float, options: dict[str, Any], result: Any) -> None:
        values, depth_um = result
        deepest = max(float(z_step) * (layer.data.shape[axis] - 1), float(z_step))
        lo, hi = options["contrast_limits"]
        self.max_layer = self.add_result(values, layer, axis, name=f"{layer.name} peak",
                                         colormap=options["colormap"],
                                         contrast_limits=(lo, hi) if hi > lo else None)
        self.depth_layer = self.add_result(
            depth_um, layer, axis, name=f"{layer.name} peak depth (\u00b5m)",
            colormap=options["cmap"], contrast_limits=(0.0, deepest),
            metadata={"stackdepth": {"quantity": "depth of the strongest voxel", "unit": "\u00b5m",
                                     "z_step_um": z_step, "depth_axis": axis,
                                     "origin": "first slice = 0 \u00b5m"}})
        self.depth_layer.colorbar.visible = True
        self.status.value = (f"Added '{self.max_layer.name}' and '{self.depth_layer.name}' "
                             f"(0\u2013{deepest:g} \u00b5m)")


class OcclusionWidget(ProjectionWidget):
    """Emission–absorption (front-to-back 'over') projection, plus optional side views.

    Nearer structures partly hide deeper ones. Side views project along y and
    along x with depth vertical; their layer scale uses the z-step so they are
    geometrically right, and they are placed below the top view.
    """

    title = "Occlusion projection"

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
        self.colour = ComboBox(label="Colour", choices=[("grey", None)] + [
            (f"depth ({name})", name) for name in DEPTH_MAP_COLOURS[:5]], value=None,
            tooltip="Grey, or each slice emits the colour of its depth (top and side views)")
        self.side_views = CheckBox(text="Side views along y and along x", value=False)
        self.note = Label(value="A rendering for looking, not for measuring: "
                                "its brightness is not an intensity.")
        self.extend([self.auto_density, self.density, self.view, self.auto_contrast,
                     self.colour, self.side_views, self.note])
        self.auto_density.changed.connect(lambda v: setattr(self.density, "enabled", not v))

    def _options(self, layer: Any) -> dict[str, Any]:
        from .._shared.validation import check_number

        density = None
        if not self.auto_density.value:
            density = check_number(self.density.value, name="density", low=0.0, low_open=True)
        clim = None if self.auto_contrast.value else tuple(float(v) for v in layer.contrast_limits)
        pixel = (float(layer.scale[-2]), float(layer.scale[-1]))
        if density is None:  # the kernel's default for the depth axis, reused for the side views
            from ..kernels.projection import DEFAULT_OPTICAL_DEPTH

            axis = int(self.axis_combo.value)
            density = DEFAULT_OPTICAL_DEPTH / (layer.data.shape[axis] * self.current_z_step())
        return {"density": density, "clim": clim, "view": self.view.value, "cmap": self.colour.value,
                "side_views": bool(self.side_views.value), "pixel": pixel}

    def _job(self, data: Any, axis: int, z_step: float, options: dict[str, Any],
             progress: Callable[[int, int], None]) -> Any:
        from ..kernels.projection import depth_colours, display_limits, occlusion_projection

        passes = 3 if options["side_views"] else 1

        def part(k: int) -> Callable[[int, int], None]:
            return lambda done, total: progress(k * total + done, passes * total)

        clim = options["clim"]
        if clim is None and options["side_views"]:  # one contrast for all three views
            clim = display_limits(data, axis=axis)
        common = {"density": options["density"], "clim": clim}
        top = occlusion_projection(data, z_step=z_step, view=options["view"], axis=axis,
                                 cmap=options["cmap"], progress=part(0), **common)
        sides = []
        if options["side_views"]:
            others = [i for i in range(data.ndim) if i != axis][-2:]
            colours = None
            if options["cmap"] is not None:
                # a side-view ray runs at one depth: its colour is that depth's colour
                colours = depth_colours(data.shape[axis], z_step=z_step, cmap=options["cmap"])
                colours = colours.astype(np.float32)[:, None, :]
            for k, side_axis in enumerate(others, start=1):
                step = options["pixel"][k - 1]
                view = occlusion_projection(data, z_step=step, view="top", axis=side_axis,
                                          progress=part(k), **common)
                depth_pos = axis if axis < side_axis else axis - 1
                view = np.moveaxis(np.asarray(view), depth_pos, -2)
                sides.append(view if colours is None else view[..., None] * colours)
        return np.asarray(top), sides

    def _show(self, layer: Any, axis: int, z_step: float, options: dict[str, Any], result: Any) -> None:
        top, sides = result
        name = f"{layer.name} occlusion ({options['view']})"
        meta = {"stackdepth": {"density_per_um": options["density"], "view": options["view"],
                               "clim": options["clim"], "z_step_um": z_step,
                               "note": "a rendering, not a measurement"}}
        if top.ndim == layer.ndim:  # RGB: coloured by depth
            self.top_layer = self.add_result(top, layer, axis, name=name, rgb=True, metadata=meta)
        else:
            self.top_layer = self.add_result(top, layer, axis, name=name, colormap="gray",
                                             contrast_limits=(0.0, max(float(np.nanmax(top)), 1e-6)),
                                             metadata=meta)
        names = [self.top_layer.name]
        self.side_layers = []
        if sides:
            # one display scale for the three views, so brightness compares across them
            high = max([float(np.nanmax(v)) for v in (top, *sides)] + [1e-6])
            self.top_layer.contrast_limits = (0.0, high)
            display: dict[str, Any] = {"contrast_limits": (0.0, high)}
            display.update({"rgb": True} if top.ndim == layer.ndim else {"colormap": "gray"})
            for which, view in zip(("y", "x"), sides):
                self.side_layers.append(self._add_side(layer, axis, z_step, which, view, display))
                names.append(self.side_layers[-1].name)
        self.status.value = ("Added " + ", ".join(f"'{n}'" for n in names)
                             + f" (density {options['density']:.3g}/\u00b5m)")

    def _add_side(self, layer: Any, axis: int, z_step: float, along: str, view: np.ndarray,
                  display: dict[str, Any]) -> Any:
        """Add a side view below the top view; depth vertical, scale z-step × pixel size.

        *view* is grey (rows = depth) or RGB with a last axis of 3; *display*
        holds the napari display options (``rgb`` or colormap and contrast).
        """
        others = [i for i in range(layer.ndim) if i != axis]
        y_axis, x_axis = others[-2], others[-1]
        lead = others[:-2]
        across = x_axis if along == "y" else y_axis
        ty, tx = float(layer.translate[y_axis]), float(layer.translate[x_axis])
        height = layer.data.shape[y_axis] * float(layer.scale[y_axis])
        width = layer.data.shape[x_axis] * float(layer.scale[x_axis])
        gap = 0.05 * max(height, width)
        left = tx if along == "y" else tx + width + gap
        # the side view's rows (depth) and columns are drawn on the viewer's y and x axes
        geometry: dict[str, Any] = {
            "scale": [float(layer.scale[i]) for i in lead] + [z_step, float(layer.scale[across])],
            "translate": [float(layer.translate[i]) for i in lead] + [ty + height + gap, left],
            "axis_labels": [str(layer.axis_labels[i]) for i in lead]
            + [str(layer.axis_labels[axis]), str(layer.axis_labels[across])],
        }
        if getattr(layer, "units", None) is not None:
            geometry["units"] = [str(layer.units[i]) for i in (*lead, axis, across)]
        if lead:  # keep time/channel axes lined up with the source (see span_depth)
            view, geometry = span_depth(view, layer, len(lead), geometry)
        return self.viewer.add_image(view, name=f"{layer.name} occlusion side (along {along})",
                                     **display, **geometry)
