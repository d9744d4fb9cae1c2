"""``stackdepth demo OUTDIR``: write the three synthetic demo datasets as OME-TIFF."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ._common import CommandError, TerminalProgress

FILES = {
    "fibre_slab.ome.tif": "single z-stack",
    "fibre_slab_series.ome.tif": "time series with bleaching",
    "fibre_slab_forward.ome.tif": "two-pass: first pass (top first)",
    "fibre_slab_reverse.ome.tif": "two-pass: second pass (deepest first)",
}


def register(sub: Any) -> None:
    parser = sub.add_parser("demo", help="write the synthetic demo datasets as OME-TIFF",
                            description="Write the synthetic fibre-slab demo (single stack, time series, "
                            "forward/reverse pair) as OME-TIFF with their true parameters in the metadata.")
    parser.add_argument("outdir", help="folder to write into (created if missing)")
    parser.add_argument("--overwrite", action="store_true", help="replace existing files")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from .. import demo
    from ..io.ometiff import write_ome_tiff

    outdir = Path(args.outdir)
    if outdir.exists() and not outdir.is_dir():
        raise CommandError(f"OUTDIR: {outdir} is not a folder")
    existing = [name for name in FILES if (outdir / name).exists()]
    if existing and not args.overwrite:
        raise CommandError(f"OUTDIR: {outdir / existing[0]} exists; pass --overwrite to replace it")
    outdir.mkdir(parents=True, exist_ok=True)
    makers = [lambda: [demo.fibre_slab()], lambda: [demo.bleach_series()], demo.two_pass_pair]
    stacks = (stack for make in makers for stack in make())
    with TerminalProgress("writing demo") as progress:
        for i, (name, stack) in enumerate(zip(FILES, stacks)):
            write_ome_tiff(outdir / name, stack.data, axes=stack.axes, scale=stack.scale,
                           metadata={"truth": stack.truth}, overwrite=args.overwrite)
            progress(i + 1, len(FILES))
            print(f"{outdir / name}: {FILES[name]}, {stack.axes} {stack.data.shape} {stack.data.dtype}")
    return 0
