"""The movie job: a stack turning through 360 degrees, or a top view per time point, as MP4 or GIF.

The frames are rendered by the projection kernels (:func:`~viewer_plugin.kernels.turning_views`,
:func:`~viewer_plugin.kernels.series_views`) with one display range, density and
depth range for all of them; each frame gets a scale bar and, for depth colour,
the depth key, drawn once with matplotlib (Agg, no pyplot) by the same code as
the figures. MP4 is written through imageio with the imageio-ffmpeg back end (a
packaged ffmpeg), GIF through imageio; both atomically.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator

import numpy as np

from .._shared.atomic import atomic_write
from .._shared.progress import Progress, sub_progress
from .._shared.validation import (
    check_choice,
    check_int,
    check_interval,
    check_number,
    depth_first,
    fail,
)
from .choices import (
    DEFAULT_CMAP,
    DEFAULT_FPS,
    DEFAULT_FRAMES,
    DEFAULT_MOVIE_METHOD,
    MAX_SIDE,
    MOVIE_METHODS,
    MOVIE_OVER,
    MOVIE_SUFFIXES,
    TURN_AXES,
)
from .provenance import provenance
from .stack import Selection, axis_step, check_some_finite, depth_axis_of, describe_voxel

__all__ = ["Movie", "MovieOptions", "SavedMovie", "check_movie_options", "make_movie",
           "movie_path", "save_movie", "write_movie"]

#: Frames whose longest side is shorter than this (pixels) are enlarged by a whole factor
#: (nearest neighbour), so that the scale bar and the depth key stay legible.
MIN_FRAME_PX = 240
#: Frame sides are padded with black to a multiple of this (the H.264 codec's block).
BLOCK_PX = 16
#: Highest frame rate accepted.
MAX_FPS = 120.0


@dataclass(frozen=True)
class MovieOptions:
    """What to render and how (the command line's options, the docks' widgets).

    Attributes
    ----------
    method : str or None
        One of :data:`~viewer_plugin.jobs.choices.MOVIE_METHODS`; None takes
        "occlusion" for a turning movie and "depth-colour" for a time series.
    frames : int
        Views through 360 degrees (>= 2); a time series has one per time point.
    fps : float
        Frames per second.
    turn : str
        Turn about "y" (the image's vertical axis) or "x".
    over : str
        "angle" (a turning movie) or "t" (one top view per time point).
    cmap : str or None
        Colour map of depth ("depth-colour", default the depth colour map of
        :mod:`~viewer_plugin.jobs.choices`; "occlusion":
        each voxel emits the colour of its depth, default grey).
    clim : (float, float) or None
        Display limits in input units (default: percentiles, shared by all frames).
    density : float or None
        Occlusion extinction per µm (default 10 / stack depth).
    max_side : int
        Cap on the voxels along the longest side of the resampled stack.
    z_step : float or None
        Slice spacing in µm; None takes it from the stack's scale.
    """

    method: str | None = None
    frames: int = DEFAULT_FRAMES
    fps: float = DEFAULT_FPS
    turn: str = "y"
    over: str = "angle"
    cmap: str | None = None
    clim: tuple[float, float] | None = None
    density: float | None = None
    max_side: int = MAX_SIDE
    z_step: float | None = None


@dataclass(frozen=True)
class Movie:
    """A movie ready to render (from :func:`make_movie`).

    Attributes
    ----------
    views : Views
        The kernels' frames: ``views.render(k)`` is frame k before overlays
        (float32 RGB), ``views.clim``, ``views.density`` and
        ``views.depth_range`` the settings all frames share.
    pixel_um : (float, float)
        Size of one pixel of the rendered frames (rows, cols), in µm.
    options : MovieOptions
        The options, checked and with defaults filled in.
    provenance : dict
        Everything needed to make it again.
    notes : tuple of str
        What the user should know (resampling, the picked time point, ...).
    """

    views: Any
    pixel_um: tuple[float, float]
    options: MovieOptions
    provenance: dict[str, Any]
    notes: tuple[str, ...] = ()

    @property
    def count(self) -> int:
        """Number of frames."""
        return int(self.views.count)


@dataclass(frozen=True)
class SavedMovie:
    """What :func:`write_movie` wrote.

    Attributes
    ----------
    path : Path
    frames : int
    size : (int, int)
        Height and width of the frames in pixels (padded to a multiple of 16).
    fps : float
        Frame rate as written (a GIF stores delays in 1/100 s).
    movie : Movie
    display_max : float
        Rendered value shown as white: 1, or for occlusion the brightest value
        of frame 0 (as the occlusion dock displays its layer), for all frames.
    """

    path: Path
    frames: int
    size: tuple[int, int]
    fps: float
    movie: Movie
    display_max: float = 1.0


def check_movie_options(options: MovieOptions) -> MovieOptions:
    """The options checked, with the method filled in; call it before any work.

    Raises
    ------
    ParameterError
        For an unknown method, turning axis or ``over``, fewer than 2 frames,
        a frame rate outside (0, 120], a colour map with "peak", a density
        without "occlusion", bad display limits or a cap below 8.
    """
    over = check_choice(options.over, name="over", choices=MOVIE_OVER)
    method = check_choice(options.method or DEFAULT_MOVIE_METHOD[over], name="method",
                          choices=MOVIE_METHODS)
    frames = check_int(options.frames, name="frames", low=2)
    fps = check_number(options.fps, name="fps", low=0.0, low_open=True, high=MAX_FPS)
    if method == "peak" and options.cmap is not None:
        fail("cmap", "no colour map with method 'peak' (grey frames)", options.cmap)
    if method != "occlusion" and options.density is not None:
        fail("density", "no density except with method 'occlusion'", options.density)
    return dataclasses.replace(
        options, method=method, over=over, frames=frames, fps=fps,
        turn=check_choice(options.turn, name="turn", choices=TURN_AXES),
        clim=check_interval(options.clim, name="clim"),
        max_side=check_int(options.max_side, name="max_side", low=8))


def movie_path(path: str | Path, *, overwrite: bool = False) -> Path:
    """The movie file to write, checked before any work.

    Raises
    ------
    ParameterError
        When the name does not end in .mp4 or .gif.
    FileNotFoundError
        When its folder does not exist.
    FileExistsError
        When it exists and *overwrite* is False.
    """
    target = Path(path)
    if target.suffix.lower() not in MOVIE_SUFFIXES:
        fail("output", "a movie file name ending in " + " or ".join(MOVIE_SUFFIXES),
             f"<{target.name}>")
    if not target.parent.is_dir():
        raise FileNotFoundError(f"output: folder {target.parent} does not exist")
    if target.exists() and not overwrite:
        raise FileExistsError(f"output: {target} exists; choose another name or allow "
                              "overwriting (--overwrite)")
    return target


def _lateral_steps(selection: Selection, skip: tuple[int, ...]) -> tuple[float, float]:
    """Pixel size (rows, cols) in µm: the steps of the two image axes, checked."""
    stack = selection.stack
    lateral = [i for i in range(len(stack.axes)) if i not in skip][-2:]
    steps = []
    for i in lateral:
        step = float(stack.scale[i])
        if not (math.isfinite(step) and step > 0):
            fail(f"voxel size along {stack.axes[i]}", "a positive size in µm from the file", step)
        steps.append(step)
    return steps[0], steps[1]


def _turning(selection: Selection, options: MovieOptions, depth_axis: int | None,
             progress: Progress) -> Movie:
    from ..kernels import turn_volume, turning_views

    stack = selection.stack
    axis = depth_axis_of(selection, depth_axis)
    if stack.data.ndim != 3:
        fail("INPUT", "a single z-stack (Z, Y, X) to turn", f"<axes {stack.axes}>",
             hint="pick a channel (--channel), or make one frame per time point (--over t)")
    z_step, z_from, notes = axis_step(stack, axis, options.z_step)
    voxel = (z_step,) + _lateral_steps(selection, (axis,))
    check_some_finite(stack.data)
    volume = turn_volume(stack.data, voxel_um=voxel, turn=options.turn, max_side=options.max_side,
                         axis=axis, progress=progress)
    views = turning_views(volume, frames=options.frames, method=options.method, cmap=options.cmap,
                          clim=options.clim, density=options.density)
    if volume.capped:
        notes += (f"resampled to {volume.step_um:.3g} \u00b5m cubic voxels (finest voxel edge "
                  f"{min(voxel):g} \u00b5m): a movie holds at most {options.max_side} voxels along "
                  "its longest side (--max-side)",)
    entries = {"turn": options.turn, "frames": options.frames, "angles_deg": list(views.angles_deg),
               "cubic_voxel_um": volume.step_um, "block_factors": list(volume.factors),
               "capped": volume.capped, "max_side": options.max_side}
    return _movie(selection, options, views, (volume.step_um,) * 2,
                  (axis, z_step, z_from, describe_voxel(stack, axis, z_step)), entries, notes)


def _series(selection: Selection, options: MovieOptions, depth_axis: int | None) -> Movie:
    from ..kernels import series_views

    stack = selection.stack
    time = stack.axis("T")
    if time is None:
        fail("--over", "a time series (a T axis) for one frame per time point",
             f"<axes {stack.axes}>")
    axis = depth_axis_of(selection, depth_axis)
    if stack.data.ndim != 4:
        fail("INPUT", "a time series of z-stacks (T, Z, Y, X)", f"<axes {stack.axes}>",
             hint="pick a channel with --channel")
    z_step, z_from, notes = axis_step(stack, axis, options.z_step)
    pixel = _lateral_steps(selection, (axis, time))
    check_some_finite(stack.data)
    views = series_views(depth_first(stack.data, time), z_step=z_step, method=options.method,
                         cmap=options.cmap, clim=options.clim, density=options.density,
                         axis=axis + (1 if axis < time else 0))
    entries = {"time_points": views.count, "interval_s": float(stack.scale[time])}
    voxel = describe_voxel(stack, axis, z_step)
    return _movie(selection, options, views, pixel, (axis, z_step, z_from, voxel), entries, notes)


def _movie(selection: Selection, options: MovieOptions, views: Any, pixel: tuple[float, float],
           depth: tuple, entries: dict[str, Any], notes: tuple[str, ...]) -> Movie:
    """The Movie with its provenance: the settings every frame shares."""
    axis, z_step, z_from, voxel = depth
    record = provenance(
        "movie", selection, method=options.method, over=options.over, fps=options.fps,
        depth_axis=axis, z_step_um=z_step, z_step_from=z_from, voxel_size_um=voxel,
        pixel_size_um=list(pixel), clim=options.clim, clim_used=[float(v) for v in views.clim],
        density_per_um=views.density, cmap=_cmap_name(options, views),
        depth_range_um=None if options.method != "depth-colour" else list(views.depth_range),
        depth_from="viewer" if options.over == "angle" else "first slice",
        caveat="a rendering for showing, not a measurement", **entries)
    return Movie(views, pixel, options, record, selection.notes + tuple(notes))


def _cmap_name(options: MovieOptions, views: Any) -> str | None:
    if views.lut is None:
        return None
    return options.cmap if isinstance(options.cmap, str) else DEFAULT_CMAP


def make_movie(selection: Selection, options: MovieOptions, *, depth_axis: int | None = None,
               progress: Progress = None) -> Movie:
    """Prepare a turning movie (or a time series' top views): resample, fix the shared settings.

    Parameters
    ----------
    selection : Selection
        The stack (see :func:`~viewer_plugin.jobs.stack.select`): a ZYX stack
        to turn, or a TZYX series for ``options.over == "t"``.
    options : MovieOptions
        What to render.
    depth_axis : int, optional
        Index of the depth axis in ``selection.stack``; default its "Z" axis.
    progress : callable, optional
        ``progress(done, total)`` while the stack is resampled; may raise Cancelled.

    Returns
    -------
    Movie
        Frames are rendered when written (:func:`write_movie`).

    Raises
    ------
    ParameterError
        For bad options, a stack that does not fit ``over``, an unusable
        voxel size or a stack without any finite value.
    """
    options = check_movie_options(options)
    if options.over == "t":
        return _series(selection, options, depth_axis)
    return _turning(selection, options, depth_axis, progress)


# --- frames with their overlays --------------------------------------------------------------

class _Overlay:
    """The scale bar (and depth key) drawn once and laid over every frame, padded to BLOCK_PX."""

    def __init__(self, movie: Movie) -> None:
        rows, cols = movie.views.shape
        self.zoom = max(1, math.ceil(MIN_FRAME_PX / max(rows, cols)))
        self.image = (rows * self.zoom, cols * self.zoom)
        key = movie.views.method == "depth-colour"
        key_px = max(56, round(0.2 * self.image[1])) if key else 0
        self.size = (_block(self.image[0] + key_px), _block(self.image[1]))
        rgba = _draw_overlay(movie, self.image, self.size, key_px)
        self.alpha = rgba[..., 3:] / np.float32(255)
        self.colour = rgba[..., :3] / np.float32(255) * self.alpha

    def __call__(self, frame: np.ndarray, display_max: float = 1.0) -> np.ndarray:
        base = np.zeros(self.size + (3,), np.float32)
        if display_max != 1.0:
            frame = frame / np.float32(display_max)
        if self.zoom > 1:
            frame = np.repeat(np.repeat(frame, self.zoom, axis=0), self.zoom, axis=1)
        base[:self.image[0], :self.image[1]] = frame
        out = base * (1 - self.alpha) + self.colour
        return np.rint(np.clip(out, 0.0, 1.0) * 255).astype(np.uint8)


def _block(n: int) -> int:
    return int(math.ceil(n / BLOCK_PX) * BLOCK_PX)


def _draw_overlay(movie: Movie, image: tuple[int, int], size: tuple[int, int],
                  key_px: int) -> np.ndarray:
    """RGBA (uint8) of the scale bar over the image area and the depth key below it."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from ..figures import draw_colour_bar, draw_scale_bar, legend_parts, nice_length
    from ..kernels import depth_legend

    (h, w), (height, width) = image, size
    dpi = max(72.0, width / 3.2)  # text about 4 % of the width
    fig = Figure(figsize=(width / dpi, height / dpi), dpi=dpi)
    fig.patch.set_alpha(0.0)
    canvas = FigureCanvasAgg(fig)
    rows, cols = movie.views.shape
    height_um, width_um = rows * movie.pixel_um[0], cols * movie.pixel_um[1]
    ax = fig.add_axes((0.0, 1.0 - h / height, w / width, h / height))
    ax.set_axis_off()
    ax.set_xlim(0.0, width_um)
    ax.set_ylim(height_um, 0.0)
    draw_scale_bar(ax, width_um, height_um, nice_length(width_um))
    if key_px:
        views = movie.views
        parts = legend_parts(depth_legend(views.depth_range, cmap=views.lut))
        bar = 0.22 * key_px
        kax = fig.add_axes((0.08 * w / width, 1.0 - (h + 0.12 * key_px + bar) / height,
                            0.84 * w / width, bar / height))
        draw_colour_bar(kax, parts, vertical=False, colour="white")
        where = "from the viewer" if movie.options.over == "angle" else "below the first slice"
        kax.set_xlabel(f"depth {where} (\u00b5m)", color="white", fontsize=8, labelpad=1)
    canvas.draw()
    return np.asarray(canvas.buffer_rgba()).astype(np.float32)


def _gif_delay_cs(fps: float) -> int:
    """GIF stores delays in hundredths of a second (2 at least: viewers slow shorter ones)."""
    return max(2, round(100.0 / fps))


def _writer(fmt: str, fps: float, frames: Iterator[np.ndarray]) -> Callable[[Path], None]:
    def write(tmp: Path) -> None:
        # every frame is rendered before the encoder starts: a cancel then never races an
        # encoder process that is still finishing the temporary file
        rendered = list(frames)
        if fmt == "mp4":
            import imageio.v2 as iio

            with iio.get_writer(tmp, format="FFMPEG", mode="I", fps=fps, codec="libx264",
                                quality=8, pixelformat="yuv420p", macro_block_size=BLOCK_PX,
                                ffmpeg_log_level="error") as writer:
                for frame in rendered:
                    writer.append_data(frame)
        else:
            import imageio.v3 as iio

            iio.imwrite(tmp, np.stack(rendered), extension=".gif", loop=0,
                        duration=10 * _gif_delay_cs(fps))
    return write


def write_movie(movie: Movie, path: str | Path, *, overwrite: bool = False,
                progress: Progress = None) -> SavedMovie:
    """Render every frame with its overlays and write the movie atomically.

    Occlusion frames are shown from 0 to the brightest value of frame 0 (the
    occlusion dock's display of its layer), the same stretch for every frame;
    the other methods map their display limits to black and white.

    Parameters
    ----------
    movie : Movie
        From :func:`make_movie`.
    path : str or Path
        ``.mp4`` (H.264 through imageio-ffmpeg's packaged ffmpeg) or ``.gif``.
    overwrite : bool
        Replace an existing file.
    progress : callable, optional
        ``progress(done, total)`` after each frame; may raise Cancelled (nothing
        is written then).

    Returns
    -------
    SavedMovie
        The path, the number of frames, their size (height, width) in pixels
        and the frame rate as written (a GIF stores delays in 1/100 s).

    Raises
    ------
    ParameterError
        For a name not ending in .mp4 or .gif.
    FileExistsError, FileNotFoundError
        For an existing file without *overwrite*, or a missing folder.
    """
    target = movie_path(path, overwrite=overwrite)
    fmt = MOVIE_SUFFIXES[target.suffix.lower()]
    fps = movie.options.fps if fmt == "mp4" else 100.0 / _gif_delay_cs(movie.options.fps)
    overlay = _Overlay(movie)
    shown = {"max": 1.0}

    def frames() -> Iterator[np.ndarray]:
        for k, frame in enumerate(movie.views.frames(progress=progress)):
            if k == 0 and movie.options.method == "occlusion":  # one stretch for every frame
                shown["max"] = max(float(np.max(frame)), 1e-6)
            yield overlay(frame, shown["max"])

    atomic_write(target, _writer(fmt, movie.options.fps, frames()))
    return SavedMovie(target, movie.count, overlay.size, fps, movie, shown["max"])


def save_movie(selection: Selection, options: MovieOptions, path: str | Path, *,
               depth_axis: int | None = None, overwrite: bool = False,
               progress: Progress = None) -> SavedMovie:
    """The movie job: check the options and the file, prepare, render and write.

    Parameters
    ----------
    selection, options, depth_axis
        As for :func:`make_movie`.
    path, overwrite
        As for :func:`write_movie`; checked before any work.
    progress : callable, optional
        One bar for the whole job: ``progress(done, frames + 1)``, the first
        step being the resampling; may raise Cancelled (nothing is written).

    Returns
    -------
    SavedMovie
    """
    movie_path(path, overwrite=overwrite)
    options = check_movie_options(options)
    count = options.frames
    if options.over == "t" and selection.stack.axis("T") is not None:
        count = int(selection.stack.data.shape[selection.stack.axis("T")])
    movie = make_movie(selection, options, depth_axis=depth_axis,
                       progress=sub_progress(progress, 0, count + 1, resolution=count + 1))
    frames = None if progress is None else (lambda done, total: progress(done + 1, total + 1))
    return write_movie(movie, path, overwrite=overwrite, progress=frames)
