"""``stackdepth project INPUT -o OUTPUT``: a projection along depth, written as OME-TIFF.

Methods: ``peak`` / ``weighted`` / ``tinted`` (depth colour-coded RGB),
``occlusion`` (emission-absorption rendering, front to back) and ``max``
(maximum-intensity projection in the input dtype). The z-step comes from the
file's voxel size unless ``--z-step`` is given; the output keeps the xy pixel
size. Time points are projected one by one; a file with several channels
needs ``--channel``. The work itself is :func:`viewer_plugin.jobs.project_stack`.
"""

from __future__ import annotations

import argparse
import dataclasses
from pathlib import Path
from typing import Any

from ..jobs.choices import (
    PROJECTION_CMAP_HELP,
    DEFAULT_METHOD,
    DEPTH_CODED,
    PROJECTION_METHODS,
    VIEWS,
)
from ._common import (
    CommandError,
    TerminalProgress,
    check_output_path,
    finish_parser,
    in_cli_words,
    print_notes,
    read_input,
    refuse_set,
    write_image,
)


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "project", help="project a z-stack along depth (depth colour, occlusion, max)",
        description="Project a z-stack along depth and write the result as OME-TIFF with the xy "
        f"pixel size. {'/'.join(DEPTH_CODED)} colour-code depth in um (RGB, 8 bits per colour); "
        "occlusion composites front to back (emission-absorption, a rendering); max is the "
        "maximum-intensity projection in the input dtype. Brightness is display contrast, not a "
        "calibrated intensity.")
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF z-stack")
    parser.add_argument("-o", "--output", required=True, metavar="OUTPUT",
                        help="output OME-TIFF (.ome.tif)")
    parser.add_argument("--method", default=DEFAULT_METHOD, choices=PROJECTION_METHODS,
                        help=f"projection (default: {DEFAULT_METHOD})")
    parser.add_argument("--cmap", default=None, metavar="NAME",
                        help=PROJECTION_CMAP_HELP)
    parser.add_argument("--depth-range", nargs=2, type=float, metavar=("D0", "D1"),
                        help="depths in um at the two ends of the colour map (default: whole "
                             "stack); with max, of the figure's depth map")
    parser.add_argument("--clim", nargs=2, type=float, metavar=("LO", "HI"),
                        help="display limits in input units (default: 0.1 and 99.9 percentiles)")
    parser.add_argument("--gamma", type=float, default=1.0, help="brightness gamma (default 1)")
    parser.add_argument("--density", type=float, default=None, metavar="D",
                        help="occlusion: extinction per um of a fully bright voxel "
                             "(default 10 / stack depth)")
    parser.add_argument("--view", default="top", choices=VIEWS,
                        help="occlusion: composite from the first (top) or last (bottom) slice")
    parser.add_argument("--z-step", type=float, default=None, metavar="UM",
                        help="slice spacing in um (default: from the file's voxel size)")
    parser.add_argument("--figure", default=None, metavar="FIG",
                        help="also save a figure (.png/.tif/.pdf/.svg) with a scale bar in um and "
                             "its key: depth in um x signal (depth-coded methods), the depth map "
                             "of each maximum with its colour bar in um (max), or a rendering "
                             "note and, with --cmap, the colour bar of depth (occlusion); plus "
                             "FIG.json (parameters) and FIG.methods.txt")
    parser.add_argument("--blank", type=float, default=None, metavar="LO",
                        help="with max and --figure: pixels whose maximum is at or below LO "
                             "(input units) are drawn black, without a depth")
    finish_parser(parser, run, channel_help="channel index for files with several channels")


def _check_options(args: argparse.Namespace) -> None:
    """Options that do not fit the method: say so instead of ignoring them."""
    if args.method != "occlusion":
        refuse_set(args, "only used with --method occlusion", density=None, view="top")
    else:
        refuse_set(args, "not used with --method occlusion", depth_range=None)
    if args.method != "max":
        refuse_set(args, "only used with --method max", blank=None)
    else:
        refuse_set(args, "not used with --method max", clim=None, gamma=1.0)
        if args.figure is None:
            refuse_set(args, "with --method max only used by --figure (the colours of the depth "
                       "map)", cmap=None, depth_range=None, blank=None)


def _check_figure_paths(figure: str, *, overwrite: bool) -> Path:
    from ..jobs.figure import FIGURE_SUFFIXES

    path = Path(figure)
    if path.suffix.lower() not in FIGURE_SUFFIXES:
        raise CommandError(f"--figure: expected a file name ending in {', '.join(FIGURE_SUFFIXES)}, "
                           f"got {path.name}")
    for target in (path, path.with_name(path.name + ".json"), path.with_name(path.name + ".methods.txt")):
        check_output_path(target, overwrite=overwrite, name="--figure")
    return path


def options_from(args: argparse.Namespace) -> Any:
    """The job's options from the command line's arguments."""
    from ..jobs import ProjectionOptions

    return ProjectionOptions(
        method=args.method, cmap=args.cmap,
        depth_range=tuple(args.depth_range) if args.depth_range else None,
        clim=tuple(args.clim) if args.clim else None, gamma=args.gamma, density=args.density,
        view=args.view, z_step=args.z_step)


def run(args: argparse.Namespace) -> int:
    from ..jobs import project_stack, select, write_figure

    _check_options(args)
    output = check_output_path(args.output, overwrite=args.overwrite)
    figure = _check_figure_paths(args.figure, overwrite=args.overwrite) if args.figure else None
    selection = select(read_input(args.input), channel=args.channel,
                       several_times="error" if figure is not None else "keep")
    with TerminalProgress(f"{args.method} projection") as progress:
        projected = project_stack(selection, options_from(args), progress=progress)
    projected = dataclasses.replace(projected, provenance=in_cli_words(projected.provenance))
    pixels, geometry = projected.file_image()
    write_image(output, pixels, geometry, metadata={"projection": projected.provenance},
                overwrite=args.overwrite)
    print_notes(selection.notes + projected.notes)
    d_range = projected.provenance.get("depth_range_um")
    print(f"{output}: {args.method} projection, {geometry.axes} {tuple(pixels.shape)} {pixels.dtype}"
          + (f", depth {d_range[0]:g}-{d_range[1]:g} um" if d_range else ""))
    if figure is not None:
        files = write_figure(projected, figure, overwrite=args.overwrite,
                             blank_at_or_below=args.blank)
        print(f"{files.figure}: figure; parameters in {files.sidecar.name}, methods sentence in "
              f"{files.methods.name}")
    return 0
