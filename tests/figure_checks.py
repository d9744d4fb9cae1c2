"""Measure an exported figure as a reader would: the image's aspect and the scale bar in pixels.

The figure is a PNG: the depth-coded image of a mostly black stack, with a
white scale bar inside it. The image area is the largest connected region of
black pixels; the scale bar is the longest horizontal run of white pixels
inside that area. Connected regions: scipy.ndimage.label (reference library).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np


def measure_figure(png: Path) -> dict[str, float]:
    """Width and height of the image area and the scale bar's length, in PNG pixels."""
    from matplotlib.image import imread
    from scipy import ndimage

    rgb = imread(str(png))[..., :3]
    black = rgb.max(axis=2) < 0.05
    labels, n = ndimage.label(black)
    assert n > 0, "no black image area found in the figure"
    sizes = ndimage.sum(black, labels, index=np.arange(1, n + 1))
    area = labels == (1 + int(np.argmax(sizes)))
    rows, cols = np.nonzero(area)
    top, bottom, left, right = rows.min(), rows.max() + 1, cols.min(), cols.max() + 1
    white = rgb[top:bottom, left:right].min(axis=2) > 0.95
    longest = 0
    for row in white:
        edges = np.diff(np.concatenate([[0], row.astype(np.int8), [0]]))
        starts, stops = np.nonzero(edges == 1)[0], np.nonzero(edges == -1)[0]
        if starts.size:
            longest = max(longest, int((stops - starts).max()))
    return {"width": float(right - left), "height": float(bottom - top), "bar": float(longest)}


def check_figure_geometry(png: Path, *, shape_yx: tuple[int, int], pixel_um: tuple[float, float]) -> dict:
    """Assert the figure keeps the stack's aspect and its scale bar is true; returns the sidecar."""
    sidecar = json.loads(png.with_name(png.name + ".json").read_text(encoding="utf-8"))
    assert sidecar["pixel_size_um"] == list(pixel_um)
    ny, nx = shape_yx
    measured = measure_figure(png)
    # the image keeps the stack's aspect: width / height in µm, drawn as width / height in pixels
    expected_aspect = (nx * pixel_um[1]) / (ny * pixel_um[0])
    assert abs(measured["width"] / measured["height"] / expected_aspect - 1) < 0.02, measured
    # scale bar: its length in image pixels = its length in µm / the pixel width in µm
    per_pixel = measured["width"] / nx
    bar_pixels = measured["bar"] / per_pixel
    expected = sidecar["scale_bar_um"] / pixel_um[1]
    assert abs(bar_pixels - expected) <= max(1.0, 0.02 * expected), (bar_pixels, expected, measured)
    return sidecar
