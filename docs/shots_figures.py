"""Figures for papers of the peak depth map and of the occlusion projection (headless).

    python docs/shots_figures.py

Writes docs/images/figure_peak_depth.png and docs/images/figure_occlusion.png from the synthetic
demo, as ``stackdepth project --figure`` makes them (the same job the docks call), and prints
their methods sentences. Open them and look at them before committing.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

IMAGES = Path(__file__).resolve().parent / "images"


def main() -> int:
    from viewer_plugin import demo
    from viewer_plugin._shared.stack import Stack
    from viewer_plugin.jobs import ProjectionOptions, project_stack, select, write_figure

    slab = demo.fibre_slab()
    selection = select(Stack(slab.data, "ZYX", slab.scale, name="fibre slab"))
    shots = {
        # blank the background (about 110 counts) as the dock's "Blank depth" option does
        "figure_peak_depth.png": (ProjectionOptions(method="max"), {"blank_at_or_below": 150.0},
                                  "Fibre slab (synthetic demo), depth of the maximum"),
        "figure_occlusion.png": (ProjectionOptions(method="occlusion", cmap="CET-I1"), {},
                                 "Fibre slab (synthetic demo), occlusion rendering"),
    }
    IMAGES.mkdir(exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        for name, (options, extra, title) in shots.items():
            projected = project_stack(selection, options)
            files = write_figure(projected, Path(tmp) / name, title=title, dpi=110, **extra)
            shutil.copyfile(files.figure, IMAGES / name)
            print(f"{name}:\n{files.methods_text}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
