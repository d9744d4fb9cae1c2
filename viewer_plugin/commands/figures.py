"""``stackdepth figures INPUT... -o DIR``: one comparable figure per stack, many stacks at once.

For each input ``DIR/<stem>.<format>`` with its JSON sidecar and methods
sentence; all figures of one call share one depth range (and with
``--same-contrast`` one display range); ``DIR/summary.csv`` has one row per
input. One failing input does not stop the others; the exit status is 2 when
any failed. The work is :mod:`viewer_plugin.jobs.batch`.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ..jobs.choices import CMAP_HELP, DEPTH_CODED
from ._common import (
    EXIT_OK,
    EXIT_USAGE,
    CommandError,
    TerminalProgress,
    finish_parser,
    print_notes,
)

FORMATS = ("png", "pdf", "svg", "tif")


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "figures", help="one depth-coded figure per stack, for many stacks at once",
        description="Make a figure for a paper from each input stack (files, or folders of "
        "OME-TIFF/TIFF files and OME-Zarr folders), with a scale bar and depth key in um, a JSON "
        "sidecar and a methods sentence each. All figures of one call share one depth range (the "
        "widest of the inputs unless --depth-range is given) so that panels compare; "
        "--same-contrast also shares one display range. DIR/summary.csv lists every input. Exit "
        "status 2 when any input failed (the others are still made).")
    parser.add_argument("inputs", nargs="+", metavar="INPUT", help="stack files or folders")
    parser.add_argument("-o", "--output", required=True, metavar="DIR",
                        help="folder for the figures and summary.csv (created if missing)")
    parser.add_argument("--format", default="png", choices=FORMATS, help="figure format (default png)")
    parser.add_argument("--method", default="peak", choices=DEPTH_CODED,
                        help="depth-coding method (default peak)")
    parser.add_argument("--cmap", default=None, metavar="NAME",
                        help=CMAP_HELP)
    parser.add_argument("--depth-range", nargs=2, type=float, metavar=("A", "B"),
                        help="depths in um at the two ends of the colour map (default: the widest "
                             "stack, for every figure)")
    parser.add_argument("--clim", nargs=2, type=float, metavar=("LO", "HI"),
                        help="display limits in input units for every figure")
    parser.add_argument("--same-contrast", action="store_true",
                        help="one automatic display range for all figures (the widest of the "
                             "inputs' 0.1-99.9 percentile ranges)")
    finish_parser(parser, run,
                  channel_help="channel of multi-channel inputs",
                  overwrite_help="replace existing figures")


def run(args: argparse.Namespace) -> int:
    from ..jobs import ProjectionOptions
    from ..jobs.batch import find_inputs, make_figures, planned_outputs, write_summary

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
        depth_range=tuple(args.depth_range) if args.depth_range else None)
    with TerminalProgress(f"figures ({len(inputs)} stacks)") as progress:
        rows = make_figures(inputs, outputs, options, channel=args.channel,
                            same_contrast=args.same_contrast, overwrite=args.overwrite,
                            progress=progress)
    write_summary(summary, rows)
    failed = [row for row in rows if row.status != "ok"]
    print_notes(f"{row.file}: {row.status}" for row in failed)
    print(f"{summary}: {len(rows) - len(failed)} figure(s) made, {len(failed)} failed")
    return EXIT_USAGE if failed else EXIT_OK
