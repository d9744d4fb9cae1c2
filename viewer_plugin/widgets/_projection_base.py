"""The base of the three projection docks: Compute, a figure for a paper, a turning movie.

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
from magicgui.widgets import ComboBox, PushButton, SpinBox

from ..jobs.choices import (
    DEFAULT_FRAMES,
    MOVIE_NOTE,
    MOVIE_SUFFIXES,
    TURN_LABELS,
    labelled,
)
from ._dock import StackDock, in_dock_words, layer_data, layer_letters, layer_stack

__all__ = ["ProjectionDock"]


class ProjectionDock(StackDock):
    """Base of the projection docks: a Compute button running the projection job.

    "Export figure…" saves the last full result as a figure for a paper
    (:func:`~viewer_plugin.jobs.write_figure`, in the background). Docks that
    set :attr:`movie_method` also get "Save turning movie…": the stack seen
    from angles through 360 degrees, rendered with that method and the dock's
    display settings, saved as MP4 or GIF in the background.
    """

    title = "Projection"
    #: Method of the turning movie ("peak", "occlusion"); None: no movie button.
    movie_method: str | None = None
    #: The default name of a figure: "<source> <figure_name>.png".
    figure_name = "projection"

    def __init__(self, napari_viewer: Any) -> None:
        self.projected: Any = None
        self.saved_movie: Any = None
        self.compute_button = PushButton(text="Compute")
        self.export_button = PushButton(text="Export figure\u2026", enabled=False)
        super().__init__(napari_viewer)
        self.compute_button.changed.connect(self.compute)
        self.export_button.changed.connect(self._ask_export)
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

    def _add_bottom(self) -> None:
        self.extend([*self.action_buttons, self.cancel_button, self.export_button, self.status])

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
            self.export_button.enabled = True

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

    # ----------------------------------------------------------- figure
    def _figure_options(self) -> dict[str, Any]:
        """Options of :func:`~viewer_plugin.jobs.write_figure` that follow the dock's display."""
        return {}

    def _ask_export(self, *_: Any) -> None:
        import re

        from qtpy.QtWidgets import QFileDialog

        from ..jobs.figure import FIGURE_SUFFIXES

        if self.projected is None:
            return
        base = self.projected.provenance.get("source_name", "projection")
        path, chosen = QFileDialog.getSaveFileName(
            self.native, f"Export figure: {self.title.lower()}", f"{base} {self.figure_name}.png",
            "PNG (*.png);;TIFF (*.tif *.tiff);;PDF (*.pdf);;SVG (*.svg)")
        named = bool(path) and Path(path).suffix.lower() in FIGURE_SUFFIXES
        if path and not named:
            suffix = re.search(r"\*(\.\w+)", chosen or "")  # the chosen filter's first suffix
            path += suffix.group(1) if suffix else ".png"
        if path:
            # the dialog asked whether to replace the file it named (not one we added a suffix to)
            self.export_figure(path, overwrite=named and Path(path).exists(), background=True)

    def _current_index(self) -> tuple[int, ...]:
        """The index of the plane shown now, for results with time or channel axes."""
        from ..jobs import figure_planes

        sizes = figure_planes(self.projected)
        if not sizes:
            return ()
        geometry = self.projected.geometry  # the result layers keep depth as one slice
        point = np.asarray(self.viewer.dims.point[-(len(geometry.axes) + 1):], dtype=float)
        point = np.delete(point, int(self.projected.provenance["depth_axis"]))
        return tuple(int(np.clip(round((point[j] - geometry.translate[j]) / geometry.scale[j]),
                                 0, size - 1)) for j, size in enumerate(sizes))

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
        kwargs = {"index": self._current_index(), "title": title, "overwrite": overwrite,
                  **self._figure_options()}
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
