"""``stackdepth figures INPUT... -o DIR``: one comparable figure per stack, many stacks at once.

For each input ``DIR/<stem>.<format>`` with its JSON sidecar and methods
sentence, for any projection method (depth-coded, the peak depth map "max",
the occlusion rendering); all figures of one call share one depth range (and
with ``--same-contrast`` one display range; occlusion figures one density);
``DIR/summary.csv`` has one row per input. One failing input does not stop
the others; the exit status is 2 when any failed. The work is
:mod:`viewer_plugin.jobs.batch`.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ..jobs.choices import (
    PROJECTION_CMAP_HELP,
    DEFAULT_METHOD,
    METHOD_LABELS,
    PROJECTION_METHODS,
    VIEWS,
)
from ._common import (
    EXIT_OK,
    EXIT_USAGE,
    CommandError,
    TerminalProgress,
    finish_parser,
    print_notes,
    refuse_set,
)

FORMATS = ("png", "pdf", "svg", "tif")


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "figures", help="one figure per stack, for many stacks at once (any projection)",
        description="Make a figure for a paper from each input stack (files, or folders of "
        "OME-TIFF/TIFF files and OME-Zarr folders), with a scale bar in um, its key, a JSON "
        "sidecar and a methods sentence each. All figures of one call share one depth range (the "
        "widest of the inputs unless --depth-range is given) so that panels compare; "
        "--same-contrast also shares one display range, and occlusion figures share one density. "
        "DIR/summary.csv lists every input. Exit status 2 when any input failed (the others are "
        "still made).")
    parser.add_argument("inputs", nargs="+", metavar="INPUT", help="stack files or folders")
    parser.add_argument("-o", "--output", required=True, metavar="DIR",
                        help="folder for the figures and summary.csv (created if missing)")
    parser.add_argument("--format", default="png", choices=FORMATS, help="figure format (default png)")
    parser.add_argument("--method", default=DEFAULT_METHOD, choices=PROJECTION_METHODS,
                        help="projection: " + "; ".join(METHOD_LABELS[m] for m in PROJECTION_METHODS)
                             + f" (default {DEFAULT_METHOD}). max draws the depth of each maximum "
                             "with a colour bar in um; occlusion is a rendering for showing, not "
                             "a measurement")
    parser.add_argument("--cmap", default=None, metavar="NAME",
                        help=PROJECTION_CMAP_HELP)
    parser.add_argument("--depth-range", nargs=2, type=float, metavar=("A", "B"),
                        help="depths in um at the two ends of the colour map (default: the widest "
                             "stack, for every figure); not with occlusion")
    parser.add_argument("--clim", nargs=2, type=float, metavar=("LO", "HI"),
                        help="display limits in input units for every figure; not with max")
    parser.add_argument("--same-contrast", action="store_true",
                        help="one automatic display range for all figures (the widest of the "
                             "inputs' 0.1-99.9 percentile ranges); not with max")
    parser.add_argument("--density", type=float, default=None, metavar="D",
                        help="occlusion: extinction per um of a fully bright voxel, for every "
                             "figure (default 10 / the depth of the deepest stack)")
    parser.add_argument("--view", default="top", choices=VIEWS,
                        help="occlusion: composite from the first (top) or last (bottom) slice")
    parser.add_argument("--blank", type=float, default=None, metavar="LO",
                        help="max: pixels whose maximum is at or below LO (input units) are "
                             "drawn black, without a depth")
    finish_parser(parser, run,
                  channel_help="channel of multi-channel inputs",
                  overwrite_help="replace existing figures")


def _check_options(args: argparse.Namespace) -> None:
    """Options that do not fit the method: say so instead of ignoring them."""
    if args.method != "occlusion":
        refuse_set(args, "only used with --method occlusion", density=None, view="top")
    else:
        refuse_set(args, "not used with --method occlusion (its colours span each stack's own "
                   "depth)", depth_range=None)
    if args.method != "max":
        refuse_set(args, "only used with --method max", blank=None)
    else:
        refuse_set(args, "not used with --method max (the figure shows depth only)", clim=None,
                   same_contrast=False)


def run(args: argparse.Namespace) -> int:
    from ..jobs import ProjectionOptions
    from ..jobs.batch import find_inputs, make_figures, planned_outputs, write_summary

    _check_options(args)
    outdir = Path(args.output)
    if outdir.exists() and not outdir.is_dir():
        raise CommandError(f"--output: {outdir} is a file; expected a folder")
    inputs = find_inputs(args.inputs)
    if not inputs:
        raise CommandError("INPUT: expected stack files or folders holding them, got none")
    outputs = planned_outputs(inputs, outdir, args.format)
    summary = outdir / "summary.csv"
    written = [summary] + [p.with_name(p.name + extra) for p in outputs.values()
                           for extra in ("", ".json", ".methods.txt")]
    taken = [path for path in written if path.exists()]
    if taken and not args.overwrite:
        raise CommandError(f"--output: {taken[0]} exists; pass --overwrite to replace it")
    outdir.mkdir(parents=True, exist_ok=True)
    options = ProjectionOptions(
        method=args.method, cmap=args.cmap, clim=tuple(args.clim) if args.clim else None,
        depth_range=tuple(args.depth_range) if args.depth_range else None,
        density=args.density, view=args.view)
    with TerminalProgress(f"figures ({len(inputs)} stacks)") as progress:
        rows = make_figures(inputs, outputs, options, channel=args.channel,
                            same_contrast=args.same_contrast, overwrite=args.overwrite,
                            blank_at_or_below=args.blank, progress=progress)
    write_summary(summary, rows)
    failed = [row for row in rows if row.status != "ok"]
    print_notes(f"{row.file}: {row.status}" for row in failed)
    print(f"{summary}: {len(rows) - len(failed)} figure(s) made, {len(failed)} failed")
    return EXIT_USAGE if failed else EXIT_OK
