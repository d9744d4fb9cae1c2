"""Measure an exported figure as a reader would: the image's aspect and the scale bar's length.

Raster figures (PNG, TIFF): the figure has a white background; the image is
the largest connected region of pixels that are not white (connected regions:
scipy.ndimage.label, reference library), and the scale bar is the longest
horizontal run of white pixels in the lower right quarter of that region,
where the figures draw it (the test stacks keep their signal in the upper
left). The resolution is read back from the file (Pillow).

Vector figures (PDF, SVG): the picture is the one raster image of the file;
its box, the filled rectangles inside it (the scale bar) and the key's cells
(paths filled and stroked in one colour) are read from the SVG elements
(xml.etree) or from the PDF's content streams (zlib, the PDF operators
``cm Do`` for images, ``m l l l h f`` for filled rectangles, ``B`` for
filled and stroked paths; PDF 1.7 reference, ISO 32000-1, section 8).
"""

from __future__ import annotations

import json
import re
import zlib
from pathlib import Path

import numpy as np
import pytest


def measure_figure(png: Path) -> dict[str, float]:
    """Width and height of the image area and the scale bar's length, in pixels of the file."""
    from PIL import Image
    from scipy import ndimage

    with Image.open(png) as image:
        rgb = np.asarray(image.convert("RGB"), dtype=np.float64) / 255.0
    white = rgb.min(axis=2) > 0.95
    labels, n = ndimage.label(~white)
    assert n > 0, "no image area found in the figure"
    sizes = ndimage.sum(~white, labels, index=np.arange(1, n + 1))
    area = labels == (1 + int(np.argmax(sizes)))
    rows, cols = np.nonzero(area)
    top, bottom, left, right = rows.min(), rows.max() + 1, cols.min(), cols.max() + 1
    # the scale bar: the lower right quarter of the image area
    quarter = white[(top + bottom) // 2:bottom, (left + right) // 2:right]
    longest = 0
    for row in quarter:
        edges = np.diff(np.concatenate([[0], row.astype(np.int8), [0]]))
        starts, stops = np.nonzero(edges == 1)[0], np.nonzero(edges == -1)[0]
        if starts.size:
            longest = max(longest, int((stops - starts).max()))
    return {"width": float(right - left), "height": float(bottom - top), "bar": float(longest)}


def check_figure_geometry(figure: Path, *, shape_yx: tuple[int, int],
                          pixel_um: tuple[float, float]) -> dict:
    """Assert the figure keeps the stack's aspect and its scale bar is true; returns the sidecar.

    PNG and TIFF files are measured in pixels (and must store the sidecar's
    resolution); PDF and SVG files from their vector parts (:func:`check_vector_figure`).
    """
    sidecar = json.loads(figure.with_name(figure.name + ".json").read_text(encoding="utf-8"))
    assert sidecar["pixel_size_um"] == list(pixel_um)
    if figure.suffix.lower() in (".pdf", ".svg"):
        check_vector_figure(figure, shape_yx=shape_yx, pixel_um=pixel_um,
                            scale_bar_um=sidecar["scale_bar_um"], key_cells=key_cells(sidecar))
        return sidecar
    from PIL import Image

    with Image.open(figure) as image:
        stored = image.info.get("dpi")
    assert stored is not None and np.allclose(stored, sidecar["dpi"], rtol=1e-3), stored
    ny, nx = shape_yx
    measured = measure_figure(figure)
    # the image keeps the stack's aspect: width / height in µm, drawn as width / height in pixels
    expected_aspect = (nx * pixel_um[1]) / (ny * pixel_um[0])
    assert abs(measured["width"] / measured["height"] / expected_aspect - 1) < 0.02, measured
    # scale bar: its length in image pixels = its length in µm / the pixel width in µm
    per_pixel = measured["width"] / nx
    bar_pixels = measured["bar"] / per_pixel
    expected = sidecar["scale_bar_um"] / pixel_um[1]
    assert abs(bar_pixels - expected) <= max(1.0, 0.02 * expected), (bar_pixels, expected, measured)
    return sidecar


def key_cells(sidecar: dict) -> int:
    """Cells of the figure's key by its sidecar: depths x brightness levels, none without a key."""
    from viewer_plugin.figures import FIGURE_KEY_DEPTHS

    if sidecar.get("colour_bar") is None:
        return 0
    return FIGURE_KEY_DEPTHS * int(sidecar["key"].get("brightness_levels", 1))


def read_vector_figure(path: Path) -> dict:
    """The raster images, the picture's box, the filled rectangles and the key cells of a PDF/SVG.

    Boxes and rectangles are (x0, y0, x1, y1) in the file's units (points).
    """
    if path.suffix.lower() == ".svg":
        return _read_svg(path)
    return _read_pdf(path)


_NUMBER = r"(-?[\d.]+)"


def _read_svg(path: Path) -> dict:
    import xml.etree.ElementTree as ET

    svg = "{http://www.w3.org/2000/svg}"
    root = ET.parse(path).getroot()
    images = list(root.iter(f"{svg}image"))
    boxes = [_svg_box(im) for im in images]
    rects, cells = [], 0
    for element in root.iter(f"{svg}path"):
        style = dict(part.split(": ") for part in (element.get("style") or "").split("; ") if part)
        if "stroke" in style and style.get("fill", "#000000") == style["stroke"]:
            cells += 1  # filled and stroked in one colour (SVG's default fill is black)
        elif style.get("fill", "").startswith("#") and "stroke" not in style:
            points = [float(v) for v in re.findall(_NUMBER, element.get("d", ""))]
            if len(points) == 8:
                xs, ys = points[0::2], points[1::2]
                rects.append((min(xs), min(ys), max(xs), max(ys)))
    return {"images": len(images), "boxes": boxes, "rects": rects, "cells": cells}


def _svg_box(image) -> tuple[float, float, float, float]:
    """The box of an SVG image element after its transform (scale and translate, applied right
    to left: SVG 1.1, section 7.6)."""
    x, y = float(image.get("x", 0)), float(image.get("y", 0))
    corners = np.array([[x, y], [x + float(image.get("width")), y + float(image.get("height"))]])
    steps = re.findall(r"(scale|translate)\(([^)]*)\)", image.get("transform", ""))
    for kind, values in reversed(steps):
        numbers = [float(v) for v in values.replace(",", " ").split()]
        if kind == "scale":
            corners = corners * (numbers if len(numbers) == 2 else numbers * 2)
        else:
            corners = corners + (numbers + [0.0])[:2]
    (x0, y0), (x1, y1) = corners.min(axis=0), corners.max(axis=0)
    return float(x0), float(y0), float(x1), float(y1)


def _read_pdf(path: Path) -> dict:
    data = path.read_bytes()
    content = b""
    for stream in re.findall(rb"stream\r?\n(.*?)\r?\nendstream", data, re.S):
        try:
            content += zlib.decompress(stream) + b"\n"
        except zlib.error:  # an image's pixels, not a content stream
            continue
    text = content.decode("latin-1")
    boxes = [(float(x), float(y), float(x) + float(w), float(y) + float(h)) for w, h, x, y in
             re.findall(rf"{_NUMBER} 0 0 {_NUMBER} {_NUMBER} {_NUMBER} cm /I\d+ Do", text)]
    corner = rf"{_NUMBER} {_NUMBER} (?:m|l)\s+"
    rects = []
    for found in re.findall(rf"{corner * 4}h\s+f\b", text):
        xs, ys = [float(v) for v in found[0::2]], [float(v) for v in found[1::2]]
        rects.append((min(xs), min(ys), max(xs), max(ys)))
    return {"images": data.count(b"/Subtype /Image"), "boxes": boxes, "rects": rects,
            "cells": len(re.findall(r"\sB\s", text))}


def check_vector_figure(path: Path, *, shape_yx: tuple[int, int], pixel_um: tuple[float, float],
                        scale_bar_um: float, key_cells: int) -> dict:
    """Assert a PDF/SVG figure: one raster (the picture) drawn to scale, a vector scale bar of
    the right length inside it, and at least *key_cells* vector cells in its key."""
    parts = read_vector_figure(path)
    assert parts["images"] == 1 and len(parts["boxes"]) == 1, parts["images"]  # only the picture
    x0, y0, x1, y1 = parts["boxes"][0]
    ny, nx = shape_yx
    expected_aspect = (nx * pixel_um[1]) / (ny * pixel_um[0])
    assert abs((x1 - x0) / (y1 - y0) / expected_aspect - 1) < 1e-3, parts["boxes"]
    inside = [r for r in parts["rects"] if r[0] >= x0 and r[2] <= x1 and r[1] >= y0 and r[3] <= y1
              and (r[2] - r[0]) < (x1 - x0)]
    assert len(inside) == 1, inside  # the scale bar, a vector rectangle
    bar_pixels = (inside[0][2] - inside[0][0]) / ((x1 - x0) / nx)
    assert bar_pixels == pytest.approx(scale_bar_um / pixel_um[1], rel=1e-4)
    assert parts["cells"] >= key_cells, parts["cells"]
    return parts

