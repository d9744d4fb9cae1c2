"""The base of the three projection docks: Compute, live updates, slabs, a figure for a paper,
a turning movie.

They only translate between layers and :func:`viewer_plugin.jobs.project_stack`
(and :func:`viewer_plugin.jobs.save_movie` for the turning movies of the peak
and occlusion docks): every result is a new layer or file, the source layer
and its data are never changed, and whole-stack work runs off the GUI thread.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path
from typing import Any

import numpy as np
from magicgui.widgets import CheckBox, ComboBox, FloatSpinBox, PushButton, SpinBox

from ..jobs.choices import (
    DEFAULT_FRAMES,
    DEFAULT_SLAB_UM,
    MOVIE_NOTE,
    MOVIE_SUFFIXES,
    SLAB_NOTE,
    TURN_LABELS,
    labelled,
)
from ._dock import StackDock, in_dock_words, layer_data, layer_letters, layer_stack

__all__ = ["LIVE_SECONDS", "ProjectionDock", "START_RATE", "live_seconds", "preview_level",
           "preview_step"]

#: A live update (no Compute press) reads the whole stack, or the slab, at full
#: resolution when that is expected to take at most this long.
LIVE_SECONDS = 0.5
#: Projection speed (bytes of stack read per second) assumed before the dock has
#: timed a projection of its own; each full projection then replaces the figure for
#: its kind of data. Cautious starts: machine A (2 cores) projects 1.3-7.5 GB/s of
#: in-memory uint16 (docs/projections.md); lazily read data is bounded by the disk.
START_RATE = {"memory": 1.0e9, "lazy": 1.0e8}
#: Smallest projection (bytes read) whose time updates the dock's speed figure.
LEARN_BYTES = 32 * 2**20
#: Milliseconds without a change before a live update starts.
LIVE_DELAY_MS = 150
#: Largest number of voxels of a downsampled preview.
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


def live_seconds(nbytes: float, kind: str, rates: dict[str, float] | None = None) -> float:
    """Expected seconds to project *nbytes* of "memory" or "lazy" data at *rates* (bytes/s)."""
    return float(nbytes) / (rates or START_RATE)[kind]


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
    #: Whether the dock offers "Slab around the current slice" (and follows the z slider).
    slab_capable = False
    #: Whether a stack too big for a live update gets a downsampled preview instead.
    previews = False

    def __init__(self, napari_viewer: Any) -> None:
        from qtpy.QtCore import QTimer

        self.projected: Any = None
        self.saved_movie: Any = None
        self.live_worker: Any = None
        self.preview_layer: Any = None
        self._live_pending = False
        self._shown_key: Any = None
        self._generation = self._shown_generation = 0
        self.rates = dict(START_RATE)
        self._timed: dict[str, int] = {}
        self._live_timer = QTimer()
        self._live_timer.setSingleShot(True)
        self._live_timer.setInterval(LIVE_DELAY_MS)
        self._live_timer.timeout.connect(self._live_tick)
        self.compute_button = PushButton(text="Compute")
        self.export_button = PushButton(text="Export figure\u2026", enabled=False)
        super().__init__(napari_viewer)
        self.compute_button.changed.connect(self.compute)
        self.export_button.changed.connect(self._ask_export)
        if self.slab_capable:
            self.viewer.dims.events.current_step.connect(self._on_dims)
        from ._warm import start_warm_up

        start_warm_up()

    def _add_options(self) -> None:
        if self.slab_capable:
            self.slab = CheckBox(text="Slab around the current slice", value=False,
                                 tooltip=SLAB_NOTE)
            self.slab_thickness = FloatSpinBox(label="Slab thickness (\u00b5m)",
                                               value=DEFAULT_SLAB_UM, min=0.001, max=1e7,
                                               step=1.0, enabled=False, tooltip=SLAB_NOTE)
            self.slab.changed.connect(self._on_slab)
            self.slab_thickness.changed.connect(self._on_parameter_changed)
            self.extend([self.slab, self.slab_thickness])
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

    def compute(self, *_: Any, start_thread: bool = True) -> Any:
        """Run the full projection of the picked stack; returns the napari worker."""
        from ..jobs import Selection, project_stack

        inputs = self.job_inputs()
        if inputs is None:
            return None
        layer, options, axis = inputs
        self._live_timer.stop()
        generation = self._next_generation()
        selection = Selection(layer_stack(layer))
        key = self._stack_key(layer, options, axis)
        nbytes, kind = self._bytes_to_read(layer, axis, options)

        def job(progress: Any) -> Any:
            start = time.perf_counter()
            projected = project_stack(selection, options, depth_axis=axis, progress=progress)
            return projected, time.perf_counter() - start

        def show(out: Any) -> None:
            projected, seconds = out
            self._learn_rate(kind, nbytes, seconds)
            self._show_full(layer, key, projected, generation)

        return self.run_job(job, show, start_thread=start_thread)

    # ----------------------------------------------------------- live updates and slabs
    def job_options(self, layer: Any) -> Any:
        """The job's options from the widgets, with the step override and the slab (GUI thread)."""
        options = dataclasses.replace(self._projection_options(layer), z_step=self.step_override())
        if self.slab_capable and self.slab.value:
            options = dataclasses.replace(options, slab_um=float(self.slab_thickness.value),
                                          slab_centre=self.current_slice(layer))
        return options

    def job_inputs(self) -> tuple[Any, Any, int] | None:
        """(layer, options, depth axis) checked on the GUI thread; None after a notification."""
        layer = self.layer
        if layer is None:
            self.notify_error(ValueError("Stack: expected a z-stack, got none; open one first"))
            return None
        try:
            options = self.job_options(layer)
        except ValueError as exc:
            self.notify_error(exc)
            return None
        return layer, options, int(self.axis_combo.value)

    def current_slice(self, layer: Any) -> int:
        """Index along the picked depth axis of the slice the viewer shows now."""
        axis = int(self.axis_combo.value)
        position = np.asarray(layer.world_to_data(self.viewer.dims.point[-layer.ndim:]))
        n = int(layer_data(layer).shape[axis])
        return int(np.clip(round(float(position[axis])), 0, n - 1))

    def _stack_key(self, layer: Any, options: Any, axis: int) -> tuple:
        """What a result depends on beyond its display options (recolouring keeps these)."""
        return (id(layer), axis, options.method, options.z_step, options.clim is None,
                options.slab_um, options.slab_centre, options.density, options.view,
                options.side_views)

    def _bytes_to_read(self, layer: Any, axis: int, options: Any) -> tuple[float, str]:
        """(bytes the projection reads, "memory" or "lazy")."""
        data = layer_data(layer)
        kind = "memory" if isinstance(data, np.ndarray) else "lazy"
        nbytes = float(np.prod(data.shape, dtype=np.float64)) * np.dtype(data.dtype).itemsize
        if options.slab_um is not None:
            step = options.z_step or float(layer.scale[axis])
            slices = min(int(data.shape[axis]), 2 * int(options.slab_um / (2 * step)) + 1)
            nbytes *= slices / max(1, int(data.shape[axis]))
        return nbytes, kind

    def _learn_rate(self, kind: str, nbytes: float, seconds: float) -> None:
        """Keep the speed of the latest projection of *kind*, from the second one on.

        The first may include compiling the kernels or a first read from disk;
        below :data:`LEARN_BYTES` the time is mostly fixed overheads, not speed.
        """
        count = self._timed[kind] = self._timed.get(kind, 0) + 1
        if count >= 2 and seconds > 0 and nbytes >= LEARN_BYTES:
            self.rates[kind] = nbytes / seconds

    def _on_parameter_changed(self, *_: Any) -> None:
        """An option changed: restyle the result if that is enough, else update it live."""
        if getattr(self, "compute_button", None) is None:  # still building the dock
            return
        if self.projected is not None and self._restyled():
            return
        self.request_live()

    def _restyled(self) -> bool:
        """Show the last result with the new display options, if only those changed."""
        return False

    def live_wanted(self) -> bool:
        """Whether changes update the result without Compute (slab mode always does)."""
        return bool(self.slab_capable and self.slab.value)

    def _on_slab(self, value: bool) -> None:
        self.slab_thickness.enabled = bool(value)
        self._on_parameter_changed()

    def _on_dims(self, *_: Any) -> None:
        if self.slab_capable and self.slab.value and self.layer is not None:
            self.request_live()

    def request_live(self) -> None:
        """Start a live update after a short pause (changes in between make one update)."""
        if self.layer is not None and self.live_wanted():
            self._live_timer.start()

    def _live_tick(self) -> None:
        if self.live_wanted():  # the option may have been switched off during the pause
            self.update_live()

    def update_live(self, *, start_thread: bool = True, downsample: bool | None = None) -> Any:
        """Update the result now, in a worker; returns it (None when nothing to do).

        At full resolution when the stack (or slab) is expected to take at
        most :data:`LIVE_SECONDS` at the speed this dock measured; else a
        downsampled preview in docks that have one (*downsample* forces
        either way), or nothing but a status line asking for Compute.
        """
        from napari.qt.threading import create_worker

        from ..jobs import Selection, project_stack

        self._live_timer.stop()
        layer = self.layer
        if layer is None or self.axis_combo.value is None:
            return None
        if self.live_worker is not None:
            self._live_pending = True
            return None
        axis = int(self.axis_combo.value)
        try:
            options = self.job_options(layer)
        except ValueError as exc:
            self.status.value = f"live update: {exc}"
            return None
        nbytes, kind = self._bytes_to_read(layer, axis, options)
        seconds = live_seconds(nbytes, kind, self.rates)
        if downsample is None:
            downsample = seconds > LIVE_SECONDS
        if downsample and not self.previews:
            self.status.value = (f"Too big to follow live (about {seconds:.1f} s each time): "
                                 "press Compute")
            return None
        stack, step = layer_stack(layer), 1
        if downsample:
            step = preview_step(tuple(layer_data(layer).shape))
            lateral = [i for i in range(layer.ndim) if i != axis][-2:]
            data, factor = preview_level(layer, lateral, step)
            if factor == 1 and kind == "lazy":  # every n-th pixel would still read every chunk
                self.status.value = (f"Too big to follow live (about {seconds:.1f} s each time) "
                                     "and no coarser level to preview: press Compute")
                return None
            index = tuple(slice(None, None, step // factor) if i in lateral else slice(None)
                          for i in range(data.ndim))
            stack = dataclasses.replace(stack, data=data[index], scale=tuple(
                s * step if i in lateral else s for i, s in enumerate(stack.scale)), translate=tuple(
                t + (factor - 1) / 2 * s if i in lateral else t
                for i, (t, s) in enumerate(zip(stack.translate, stack.scale))))
        key = self._stack_key(layer, options, axis)
        generation = self._next_generation()

        def job() -> Any:
            from ._runner import dask_threads

            start = time.perf_counter()
            with dask_threads():
                projected = project_stack(Selection(stack), options, depth_axis=axis)
            return projected, time.perf_counter() - start

        def returned(out: Any) -> None:
            projected, took = out
            if step == 1:
                self._learn_rate(kind, nbytes, took)
                self._show_full(layer, key, projected, generation)
            elif self._current(generation):
                self._show_preview(layer, step, seconds, projected)

        worker = create_worker(job, _start_thread=False, _ignore_errors=True)
        worker.returned.connect(returned)
        worker.errored.connect(lambda exc: setattr(self.status, "value", f"live update: {exc}"))
        worker.finished.connect(self._live_done)
        self.live_worker = worker
        if start_thread:
            worker.start()
        return worker

    def _live_done(self) -> None:
        self.live_worker = None
        if self._live_pending:
            self._live_pending = False
            self._live_timer.start()

    def _next_generation(self) -> int:
        self._generation += 1
        return self._generation

    def _current(self, generation: int) -> bool:
        """Whether a result asked for as *generation* may be shown: nothing newer was shown since."""
        return generation > self._shown_generation

    def _show_full(self, layer: Any, key: tuple, projected: Any, generation: int) -> None:
        """Show a full-resolution result (from Compute or a live update), unless a newer one was."""
        if not self._current(generation):
            return
        self._shown_generation = generation
        self._remove_preview()
        self.projected, self._shown_key = projected, key
        self._show(layer, projected)
        self.export_button.enabled = True

    def _show_preview(self, layer: Any, step: int, seconds: float, projected: Any) -> None:
        """Show a downsampled preview (docks with :attr:`previews`)."""
        raise NotImplementedError

    def _remove_preview(self) -> None:
        if self.preview_layer is not None and self.preview_layer in self.viewer.layers:
            self.viewer.layers.remove(self.preview_layer)
        self.preview_layer = None

    def _on_close(self) -> None:
        self._live_pending = False
        try:
            self._live_timer.stop()
        except RuntimeError:  # the Qt timer is already gone (application shutting down)
            pass
        if self.slab_capable:
            try:
                self.viewer.dims.events.current_step.disconnect(self._on_dims)
            except (RuntimeError, TypeError, ValueError):
                pass


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
