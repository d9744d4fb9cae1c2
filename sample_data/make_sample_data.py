"""Regenerate sample_data/fibre_slab.ome.tif, the demo z-stack used in command-line examples.

    python sample_data/make_sample_data.py [--overwrite]

The stack is the synthetic "fibre slab" of viewer_plugin.demo (seed 0), stored as
zlib-compressed OME-TIFF with its voxel size and its true parameters
(attenuation length, bleaching rate, ...) in the OME-XML.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from viewer_plugin.demo import fibre_slab
from viewer_plugin.io import write_ome_tiff

HERE = Path(__file__).resolve().parent


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--overwrite", action="store_true")
    args = parser.parse_args()
    stack = fibre_slab(seed=0)
    path = write_ome_tiff(HERE / "fibre_slab.ome.tif", stack.data, axes=stack.axes, scale=stack.scale,
                          metadata={"truth": stack.truth}, overwrite=args.overwrite)
    print(f"{path}: {stack.data.shape} {stack.data.dtype}, {path.stat().st_size / 2**20:.1f} MiB")


if __name__ == "__main__":
    main()
