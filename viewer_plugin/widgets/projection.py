"""The three projection docks: depth colour, peak depth map, occlusion.

They only translate between layers and :func:`viewer_plugin.jobs.project_stack`
(and :func:`viewer_plugin.jobs.save_movie` for the turning movies of the peak
and occlusion docks): every result is a new layer or file, the source layer
and its data are never changed, and whole-stack work runs off the GUI thread.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Any

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSpinBox, Label, PushButton, SpinBox

from ..jobs.choices import (
    COLOUR_MAPS,
    DEFAULT_CMAP,
    DEFAULT_FRAMES,
    MOVIE_NOTE,
    MOVIE_SUFFIXES,
    OCCLUSION_NOTE,
    TURN_LABELS,
    labelled,
)
from ._dock import StackDock, in_dock_words, layer_data, layer_letters, layer_stack

__all__ = ["DepthColourWidget", "OcclusionWidget", "PeakDepthWidget", "ProjectionDock"]

#: Colour maps of the depth map and the occlusion colour, from the shared list (no rainbow maps).
DEPTH_MAP_COLOURS = tuple(name for label, name in COLOUR_MAPS if "rainbow" not in label)


class ProjectionDock(StackDock):
    """Base of the projection docks: a Compute button running the projection job.

    Docks that set :attr:`movie_method` also get "Save turning movie…": the
    stack seen from angles through 360 degrees, rendered with that method and
    the dock's display settings, saved as MP4 or GIF in the background.
    """

    title = "Projection"
    #: Method of the turning movie ("peak", "occlusion"); None: no movie button.
    movie_method: str | None = None

    def __init__(self, napari_viewer: Any) -> None:
        self.projected: Any = None
        self.saved_movie: Any = None
        self.compute_button = PushButton(text="Compute")
        super().__init__(napari_viewer)
        self.compute_button.changed.connect(self.compute)
        from ._warm import start_warm_up

        start_warm_up()

    def _add_options(self) -> None:
        self.action_buttons.append(self.compute_button)
        if self.movie_method is None:
            return
        self.movie_frames = SpinBox(label="Movie frames", value=DEFAULT_FRAMES, min=2, max=720,
                                    tooltip="Views at angles evenly spaced through 360\u00b0")
        self.movie_turn = ComboBox(label="Movie turns about", choices=labelled(TURN_LABELS),
                                   value="y")
        self.movie_button = PushButton(text="Save turning movie\u2026", tooltip=MOVIE_NOTE)
        self.movie_button.changed.connect(self._ask_movie)
        self.extend([self.movie_frames, self.movie_turn])
        self.action_buttons.append(self.movie_button)

    def _projection_options(self, layer: Any) -> Any:
        """The job's options from the dock's widgets (GUI thread)."""
        raise NotImplementedError

    def _show(self, layer: Any, projected: Any) -> None:
        """Add the result's layers (GUI thread)."""
        raise NotImplementedError

    @property
    def result(self) -> Any:
        """The kernel result of the last full computation (None before)."""
        return None if self.projected is None else self.projected.result

    @property
    def result_info(self) -> dict[str, Any]:
        """Provenance of the last full computation, in the dock's words."""
        return {} if self.projected is None else in_dock_words(self.projected.provenance)

    def job_inputs(self) -> tuple[Any, Any, int] | None:
        """(layer, options, depth axis) checked on the GUI thread; None after a notification."""
        layer = self.layer
        if layer is None:
            self.notify_error(ValueError("Stack: expected a z-stack, got none; open one first"))
            return None
        try:
            options = dataclasses.replace(self._projection_options(layer), z_step=self.step_override())
        except ValueError as exc:
            self.notify_error(exc)
            return None
        return layer, options, int(self.axis_combo.value)

    def compute(self, *_: Any, start_thread: bool = True) -> Any:
        """Run the full projection of the picked stack; returns the napari worker."""
        from ..jobs import Selection, project_stack

        inputs = self.job_inputs()
        if inputs is None:
            return None
        layer, options, axis = inputs
        selection = Selection(layer_stack(layer))

        def job(progress: Any) -> Any:
            return project_stack(selection, options, depth_axis=axis, progress=progress)

        def show(projected: Any) -> None:
            self.projected = projected
            self._show(layer, projected)

        return self.run_job(job, show, start_thread=start_thread)


    # ----------------------------------------------------------- turning movie
    def _movie_settings(self, layer: Any) -> dict[str, Any]:
        """The movie's display options from the dock's widgets (GUI thread)."""
        return {}

    def _ask_movie(self, *_: Any) -> None:
        from qtpy.QtWidgets import QFileDialog

        layer = self.layer
        if layer is None:
            return
        path, chosen = QFileDialog.getSaveFileName(
            self.native, "Save turning movie", f"{layer.name} turning.mp4",
            "MP4 video (*.mp4);;GIF animation (*.gif)")
        if path and Path(path).suffix.lower() not in MOVIE_SUFFIXES:
            path += ".gif" if chosen.startswith("GIF") else ".mp4"
        if path:
            # the dialog already asked whether to replace an existing file
            self.save_movie(path, overwrite=Path(path).exists(), background=True)

    def save_movie(self, path: str | Path, *, overwrite: bool = False,
                   background: bool = False) -> Any:
        """Save the picked stack turning through 360\u00b0 as a movie (.mp4 or .gif).

        Frames use this dock's method and display settings; a layer with time
        points or channels turns at the time point and channel shown in the
        viewer. Returns the :class:`~viewer_plugin.jobs.SavedMovie`, or None
        after a problem (shown as a notification). With *background* the movie
        is made in a worker thread with progress and cancel, and the napari
        worker is returned instead.
        """
        from ..jobs import save_movie

        inputs = self._movie_inputs(path, overwrite)
        if inputs is None:
            return None
        selection, options, axis = inputs

        def job(progress: Any) -> Any:
            return save_movie(selection, options, path, depth_axis=axis, overwrite=overwrite,
                              progress=progress)

        if background:
            return self.run_job(job, self._movie_saved)
        try:
            saved = job(None)
        except (ValueError, OSError) as exc:
            self.notify_error(exc)
            return None
        self._movie_saved(saved)
        return saved

    def _movie_inputs(self, path: str | Path, overwrite: bool) -> tuple[Any, Any, int] | None:
        """(selection, options, depth axis), checked before any work; None after a notification."""
        from ..jobs import MovieOptions, check_movie_options, movie_path, select

        layer = self.layer
        if layer is None:
            self.notify_error(ValueError("Stack: expected a z-stack, got none; open one first"))
            return None
        try:
            movie_path(path, overwrite=overwrite)
            options = check_movie_options(MovieOptions(
                method=self.movie_method, frames=int(self.movie_frames.value),
                turn=self.movie_turn.value, z_step=self.step_override(),
                **self._movie_settings(layer)))
            shown = self._shown_planes(layer)
            axis = int(self.axis_combo.value)
            selection = select(layer_stack(layer), channel=shown.get("C"), time=shown.get("T"))
        except (ValueError, OSError) as exc:
            self.notify_error(exc)
            return None
        letters = layer_letters(layer)
        removed = sum(1 for i, letter in enumerate(letters) if letter in shown and i < axis)
        return selection, options, axis - removed

    def _shown_planes(self, layer: Any) -> dict[str, int]:
        """The time point and channel the viewer shows now (for layers that have them)."""
        letters = layer_letters(layer)
        if not any(letter in "TC" for letter in letters):
            return {}
        position = np.asarray(layer.world_to_data(self.viewer.dims.point[-layer.ndim:]))
        shape = layer_data(layer).shape
        return {letter: int(np.clip(round(float(position[i])), 0, shape[i] - 1))
                for i, letter in enumerate(letters) if letter in "TC"}

    def _movie_saved(self, saved: Any) -> None:
        from napari.utils.notifications import show_info

        self.saved_movie = saved
        height, width = saved.size
        show_info(f"{self.title}: saved {saved.path.name} ({saved.frames} frames)")
        self.status.value = (f"Saved {saved.path} ({saved.frames} frames, "
                             f"{width} \u00d7 {height} px)"
                             + "".join(f"; {note}" for note in saved.movie.notes))


class PeakDepthWidget(ProjectionDock):
    """Maximum-intensity projection plus the depth (µm) of each maximum.

    Adds two layers: ``"<source> peak"`` (the input dtype) and
    ``"<source> peak depth (µm)"`` (float32, µm below the first slice, with
    napari's colour bar), so hovering a pixel reads its depth in µm.
    """

    title = "Peak depth map"
    tab_title = "Peak depth"
    movie_method = "peak"

    def _add_options(self) -> None:
        self.depth_cmap = ComboBox(label="Depth map colours", choices=list(DEPTH_MAP_COLOURS),
                                   value=DEFAULT_CMAP)
        self.hide_background = CheckBox(
            text="Blank depth where peak \u2264 lower contrast limit", value=False,
            tooltip="Pixels whose peak is at or below the layer's lower contrast limit get no "
                    "depth (NaN): their 'depth' would only be the depth of the strongest noise")
        self.note = Label(value="Depth is measured from the first slice (0 \u00b5m); "
                                "ties go to the shallowest slice.")
        self.extend([self.depth_cmap, self.hide_background, self.note])
        super()._add_options()

    def _projection_options(self, layer: Any) -> Any:
        from ..jobs import ProjectionOptions

        return ProjectionOptions(method="max")

    def _movie_settings(self, layer: Any) -> dict[str, Any]:
        return {"clim": tuple(float(v) for v in layer.contrast_limits)}

    def _show(self, layer: Any, projected: Any) -> None:
        result, axis = projected.result, projected.provenance["depth_axis"]
        geometry = projected.geometry
        depth_um = np.asarray(result.depth_um)
        low, high = (float(v) for v in layer.contrast_limits)
        if self.hide_background.value:
            depth_um = np.where(np.asarray(result.peak) <= low, np.float32(np.nan), depth_um)
        z_step = projected.provenance["z_step_um"]
        deepest = max(z_step * (int(layer.data.shape[axis]) - 1), z_step)
        self.max_layer = self.add_result(
            result.peak, geometry, source=layer, depth_axis=axis, name=f"{layer.name} peak",
            colormap=getattr(layer.colormap, "name", "gray"),
            contrast_limits=(low, high) if high > low else None)
        self.depth_layer = self.add_result(
            depth_um, geometry, source=layer, depth_axis=axis,
            name=f"{layer.name} peak depth (\u00b5m)", colormap=self.depth_cmap.value,
            contrast_limits=(0.0, deepest),
            metadata={"stackdepth": {**in_dock_words(projected.provenance), "quantity":
                                     "depth of the strongest voxel", "unit": "\u00b5m",
                                     "origin": "first slice = 0 \u00b5m"}})
        self.depth_layer.colorbar.visible = True
        self.status.value = (f"Added '{self.max_layer.name}' and '{self.depth_layer.name}' "
                             f"(0\u2013{deepest:g} \u00b5m)")


class OcclusionWidget(ProjectionDock):
    """Emission–absorption rendering (front-to-back "over"), plus optional side views.

    Nearer structures partly hide deeper ones. Side views look along y and
    along x with depth vertical; their layer scale uses the z-step so they are
    geometrically right, and they are placed below the top view.
    """

    title = "Occlusion projection"
    tab_title = "Occlusion"
    movie_method = "occlusion"

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
    from ._dock import layer_letters

    return layer_letters(layer)[axis].lower()


from .depth_colour import DepthColourWidget  # noqa: E402  (the manifest names it here)
