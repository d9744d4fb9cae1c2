"""``stackdepth convert INPUT OUTPUT.ome.zarr``: an OME-TIFF/TIFF as a chunked, multiscale OME-Zarr.

The TIFF is read lazily and written batch by batch, so memory stays bounded
whatever the file's size; axes, voxel size, channel names and stackdepth's
metadata are kept. The work is :func:`viewer_plugin.io.convert_to_ome_zarr`.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ._common import OME_ZARR, CommandError, TerminalProgress, check_output_path, finish_parser


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "convert", help="convert an OME-TIFF/TIFF to a chunked, multiscale OME-Zarr",
        description="Convert an OME-TIFF or TIFF file to an OME-Zarr folder (NGFF): chunked, with "
        "a pyramid of 2x downsampled levels, streaming in bounded memory. Voxel size, axes, "
        "channel names and metadata are kept; the input is never changed.")
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF file")
    parser.add_argument("output", metavar="OUTPUT", help="OME-Zarr folder to write (.ome.zarr)")
    parser.add_argument("--chunks", nargs=3, type=int, metavar=("Z", "Y", "X"), default=None,
                        help="chunk shape in voxels (default about 2 MiB per chunk, e.g. "
                             "16 256 256 for 16-bit data)")
    parser.add_argument("--ngff", choices=("0.4", "0.5"), default="0.4",
                        help="NGFF version: 0.4 (zarr format 2, read by most tools) or 0.5 "
                             "(zarr format 3)")
    finish_parser(parser, run, overwrite_help="replace an existing output")


def run(args: argparse.Namespace) -> int:
    from ..io import convert_to_ome_zarr, read_ome_zarr_levels

    source = Path(args.input)
    if source.is_dir():
        raise CommandError(f"INPUT: {source} is a folder; expected an OME-TIFF or TIFF file")
    if not source.exists():
        raise CommandError(f"INPUT: {source}: no such file")
    output = check_output_path(args.output, overwrite=args.overwrite, name="OUTPUT")
    if not output.name.lower().endswith(OME_ZARR):
        raise CommandError(f"OUTPUT: expected a folder name ending in {OME_ZARR}, got {output.name}")
    if args.chunks is not None and min(args.chunks) < 1:
        raise CommandError(f"--chunks: expected three positive sizes, got {args.chunks}")
    with TerminalProgress("converting") as progress:
        written = convert_to_ome_zarr(source, output, chunks=tuple(args.chunks) if args.chunks else None,
                                      overwrite=args.overwrite, version=args.ngff, progress=progress)
    levels = read_ome_zarr_levels(written)
    stack = levels[0]
    print(f"{written}: {stack.axes} {tuple(stack.data.shape)} {stack.data.dtype}, chunks "
          f"{tuple(stack.data.chunksize)}, {len(levels)} levels")
    return 0
