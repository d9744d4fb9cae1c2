"""The turning movie of the synthetic demo shown in docs/figures.md (no viewer needed).

    python docs/shots_movie.py

Writes docs/images/movie_turning.gif: the fibre slab turning about y, 24 frames, depth colour,
made by the same job as `stackdepth movie` (resampled to at most 192 voxels per side to keep the
file small). Frames 0 and 6 (the top view and the view from 90 degrees) are also saved as PNG in a
temporary folder, whose path is printed: open them and look at them before committing.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

IMAGES = Path(__file__).resolve().parent / "images"


def main() -> int:
    import imageio.v3 as iio

    from viewer_plugin import demo
    from viewer_plugin._shared.stack import Stack
    from viewer_plugin.jobs import MovieOptions, save_movie, select

    IMAGES.mkdir(exist_ok=True)
    slab = demo.fibre_slab()
    stack = Stack(slab.data, slab.axes, slab.scale, name=slab.name)
    options = MovieOptions(method="depth-colour", frames=24, fps=12, max_side=192)
    saved = save_movie(select(stack), options, IMAGES / "movie_turning.gif", overwrite=True)
    frames = iio.imread(saved.path, index=None)
    folder = Path(tempfile.mkdtemp(prefix="stackdepth-movie-"))
    for k in (0, 6):
        iio.imwrite(folder / f"movie_frame_{k}.png", frames[k])
    print(f"frames 0 and 6 to look at: {folder}")
    size_mb = saved.path.stat().st_size / 2**20
    print(f"{saved.path.name}: {saved.frames} frames, {saved.size[1]} x {saved.size[0]} px, "
          f"{size_mb:.2f} MB, cubic voxels {saved.movie.provenance['cubic_voxel_um']:.3g} um")
    return 0


if __name__ == "__main__":
    sys.exit(main())
