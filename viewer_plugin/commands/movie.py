"""``stackdepth movie INPUT -o OUT.mp4|OUT.gif``: the stack turning through 360 degrees, as a movie.

Frames are views from angles evenly spaced about the image's vertical (y) or
horizontal (x) axis, rendered by the projection kernels on the stack
resampled to cubic voxels (so the object keeps its true shape), with a scale
bar and, for depth colour, the depth key. ``--over t`` makes one top view per
time point of a series instead. The work itself is
:func:`viewer_plugin.jobs.save_movie`.
"""

from __future__ import annotations

import argparse
from typing import Any

from ..jobs.choices import (
    DEFAULT_CMAP,
    DEFAULT_FPS,
    DEFAULT_FRAMES,
    DEFAULT_MOVIE_METHOD,
    MAX_SIDE,
    MOVIE_METHOD_LABELS,
    MOVIE_METHODS,
    MOVIE_NOTE,
    MOVIE_OVER,
    MOVIE_SUFFIXES,
    TURN_AXES,
)
from ._common import CommandError, TerminalProgress, add_compute_options, print_notes, read_input


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "movie", help="a movie of the stack turning through 360 degrees (MP4 or GIF)",
        description="Write a movie of the stack seen from angles evenly spaced through 360 degrees "
        "about the image's y or x axis (frame 0: the top view), or with --over t one top view per "
        "time point. The stack is resampled to cubic voxels so it keeps its true shape (at most "
        f"--max-side voxels along its longest side, default {MAX_SIDE}); every frame has a scale "
        "bar and, for depth-colour, the depth key. All frames share one display range (and one "
        "depth range and density), so brightness and colour mean the same in each. " + MOVIE_NOTE)
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF, TIFF or OME-Zarr z-stack")
    parser.add_argument("-o", "--output", required=True, metavar="OUTPUT",
                        help="movie file: " + " or ".join(f"OUT{s}" for s in MOVIE_SUFFIXES))
    parser.add_argument("--method", default=None, choices=MOVIE_METHODS,
                        help="; ".join(MOVIE_METHOD_LABELS.values())
                        + f" (default {DEFAULT_MOVIE_METHOD['angle']}, with --over t "
                          f"{DEFAULT_MOVIE_METHOD['t']})")
    parser.add_argument("--frames", type=int, default=None, metavar="N",
                        help=f"views through 360 degrees (>= 2, default {DEFAULT_FRAMES})")
    parser.add_argument("--fps", type=float, default=DEFAULT_FPS,
                        help=f"frames per second (default {DEFAULT_FPS:g}; a GIF stores delays "
                             "in 1/100 s)")
    parser.add_argument("--turn", default=None, choices=TURN_AXES,
                        help="turn about the image's vertical (y, default) or horizontal (x) axis")
    parser.add_argument("--over", default="angle", choices=MOVIE_OVER,
                        help="angle: turn the stack (default); t: one top view per time point")
    parser.add_argument("--cmap", default=None, metavar="NAME",
                        help=f"colour map of depth (depth-colour: default {DEFAULT_CMAP}; "
                             "occlusion: colour each voxel by its depth)")
    parser.add_argument("--z-step", type=float, default=None, metavar="UM",
                        help="slice spacing in um (default: from the file's voxel size)")
    parser.add_argument("--channel", type=int, default=None, metavar="N",
                        help="channel index for files with several channels")
    parser.add_argument("--max-side", type=int, default=MAX_SIDE, metavar="N",
                        help="at most N voxels along the longest side of the resampled stack "
                             f"(default {MAX_SIDE}; larger stacks are averaged to coarser voxels)")
    parser.add_argument("--overwrite", action="store_true", help="replace an existing movie")
    add_compute_options(parser)
    parser.set_defaults(func=run)


def options_from(args: argparse.Namespace) -> Any:
    """The job's options from the command line's arguments (checked before any work)."""
    from ..jobs import MovieOptions, check_movie_options

    if args.over == "t":
        for name in ("frames", "turn"):
            if getattr(args, name) is not None:
                raise CommandError(f"--{name}: not used with --over t (one frame per time point)")
    options = MovieOptions(
        method=args.method, frames=DEFAULT_FRAMES if args.frames is None else args.frames,
        fps=args.fps, turn=args.turn or TURN_AXES[0], over=args.over, cmap=args.cmap,
        max_side=args.max_side, z_step=args.z_step)
    return check_movie_options(options)


def run(args: argparse.Namespace) -> int:
    from ..jobs import movie_path, save_movie, select

    options = options_from(args)
    movie_path(args.output, overwrite=args.overwrite)
    selection = select(read_input(args.input), channel=args.channel,
                       several_times="keep" if options.over == "t" else "first")
    with TerminalProgress(f"{options.method} movie") as progress:
        saved = save_movie(selection, options, args.output, overwrite=args.overwrite,
                           progress=progress)
    movie = saved.movie
    record = movie.provenance
    print_notes(movie.notes + _time_hint(selection, options))
    height, width = saved.size
    what = (f"turning about {options.turn}, cubic voxels {record['cubic_voxel_um']:.3g} um"
            if options.over == "angle" else "one top view per time point")
    print(f"{saved.path}: {saved.frames} frames, {width} x {height} px, {saved.fps:g} fps, "
          f"{options.method}, {what}")
    return 0


def _time_hint(selection: Any, options: Any) -> tuple[str, ...]:
    """A turning movie of a series shows one time point: say how to see them all."""
    if options.over == "angle" and selection.time is not None:
        return ("--over t makes one frame per time point instead",)
    return ()
