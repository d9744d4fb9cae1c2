"""The colouring of depth-coded images, before and after constant-lightness maps (no GUI).

    python docs/shots_colour.py

Writes docs/images/colour_old_new.png: the demo fibre slab (seed 0) as a "peak" depth-coded
image, coloured with viridis (the former default, whose own lightness runs from CIELAB L* 15
to 91) and with CET-I1 (the default now, L* 70 at every depth), each with its two-dimensional
key, and the lightness of both maps along depth; and docs/images/colour_key.png, the key of
the CET-I1 image alone. Both images use the same display limits, so only the colour map differs.
Open them and look at them before committing.
"""

from __future__ import annotations

import sys
from pathlib import Path

IMAGES = Path(__file__).resolve().parent / "images"
KEY_PIXELS = (400, 130)  # width, height of a key image


def lightness(rgb):
    """CIELAB L* of sRGB colours in [0, 1] (skimage.color.rgb2lab)."""
    import numpy as np
    from skimage.color import rgb2lab

    return rgb2lab(np.asarray(rgb, dtype=np.float64)[None])[0, :, 0]


def main() -> int:
    from matplotlib.figure import Figure

    from viewer_plugin import demo
    from viewer_plugin.figures import KEY_STEPS, colour_bar_image
    from viewer_plugin.kernels import projection as P

    IMAGES.mkdir(exist_ok=True)
    slab = demo.fibre_slab()
    z_step = float(slab.scale[0])
    limits = P.display_limits(slab.data)
    images = {}
    for name in ("viridis", P.DEFAULT_CMAP):
        result = P.depth_coded_projection(slab.data, z_step=z_step, clim=limits, cmap=name)
        key = P.depth_legend(result, brightness_steps=KEY_STEPS)
        images[name] = (result, colour_bar_image(key, width_px=KEY_PIXELS[0],
                                                 height_px=KEY_PIXELS[1], dark=False))

    fig = Figure(figsize=(10.0, 8.4), dpi=110)
    grid = fig.add_gridspec(3, 2, height_ratios=(5.0, 1.7, 1.5), hspace=0.22, wspace=0.05,
                            left=0.08, right=0.98, top=0.96, bottom=0.07)
    titles = {"viridis": "before: viridis (lightness varies with depth)",
              P.DEFAULT_CMAP: f"now: {P.DEFAULT_CMAP} (constant lightness)"}
    for column, (name, (result, key_image)) in enumerate(images.items()):
        ax = fig.add_subplot(grid[0, column])
        ax.imshow(result.rgb, interpolation="nearest")
        ax.set_title(titles[name], fontsize=10)
        ax.set_axis_off()
        kax = fig.add_subplot(grid[1, column])
        kax.imshow(key_image, interpolation="nearest")
        kax.set_axis_off()
    lax = fig.add_subplot(grid[2, :])
    for name in images:
        lax.plot(range(256), lightness(P.depth_colours(256, cmap=name)), label=name, lw=2)
    d1 = images[P.DEFAULT_CMAP][0].depth_range[1]
    lax.set_xticks([0, 255], ["0 \u00b5m", f"{d1:g} \u00b5m"])
    lax.set_xlabel("depth (first to last slice)", fontsize=9)
    lax.set_ylabel("CIELAB L*\nat full brightness", fontsize=9)
    lax.set_ylim(0, 100)
    lax.legend(fontsize=9, loc="lower right")
    fig.savefig(IMAGES / "colour_old_new.png", facecolor="white")

    key_fig = Figure(figsize=(KEY_PIXELS[0] / 100, KEY_PIXELS[1] / 100), dpi=100)
    key_ax = key_fig.add_axes((0, 0, 1, 1))
    key_ax.imshow(images[P.DEFAULT_CMAP][1], interpolation="nearest")
    key_ax.set_axis_off()
    key_fig.savefig(IMAGES / "colour_key.png", facecolor="white")
    print(f"display limits {limits[0]:g}-{limits[1]:g}; L* along depth: " + ", ".join(
        f"{name} {lightness(P.depth_colours(256, cmap=name)).min():.1f}-"
        f"{lightness(P.depth_colours(256, cmap=name)).max():.1f}" for name in images))
    return 0


if __name__ == "__main__":
    sys.exit(main())
