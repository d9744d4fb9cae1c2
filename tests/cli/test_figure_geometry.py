"""``stackdepth project --figure`` with anisotropic pixels: the figure is drawn to scale.

Checks (tests/figure_checks.py): the sidecar's pixel size equals the file's, the image keeps
the stack's aspect (µm width / µm height), and the scale bar's length in image pixels equals
its µm length divided by the pixel width -- the definition of a scale bar. PNG and TIFF store
the figure's resolution; in PDF and SVG the scale bar and every cell of the key are vector
paths and the image is the only raster. For every projection method.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from tests.figure_checks import check_figure_geometry
from viewer_plugin.cli import main
from viewer_plugin.io import write_ome_tiff

#: The figure of every method: the --method value and its extra options.
METHODS = {
    "peak": [],
    "weighted": [],
    "max": [],
    "occlusion": [],
    "occlusion-colour": ["--cmap", "CET-I1"],
}


def mostly_black_stack(shape=(6, 60, 80)):
    """Zeros with a few bright voxels in the top-left corner, away from the scale bar."""
    data = np.zeros(shape, np.uint16)
    for z in range(shape[0]):
        data[z, 2 + z, 2:10] = 1000
    return data


def _project_with_figure(tmp_path, method, figure_name, pixel=(0.4, 0.5)):
    data = mostly_black_stack()
    path = write_ome_tiff(tmp_path / "aniso.ome.tif", data, axes="ZYX", scale=(1.5, *pixel))
    figure = tmp_path / figure_name
    assert main(["project", str(path), "-o", str(tmp_path / "p.ome.tif"),
                 "--method", method.split("-")[0], *METHODS[method], "--figure", str(figure)]) == 0
    return data, figure


@pytest.mark.parametrize("pixel", [(0.4, 0.5), (2.0, 2.0), (0.5, 0.4)])
def test_cli_figure_is_drawn_to_scale(tmp_path, pixel):
    data, figure = _project_with_figure(tmp_path, "peak", "fig.png", pixel)
    sidecar = check_figure_geometry(figure, shape_yx=data.shape[1:], pixel_um=pixel)
    assert sidecar["parameters"]["voxel_size_um"] == [1.5, *pixel]


@pytest.mark.parametrize("suffix", ["png", "tif", "pdf", "svg"])
@pytest.mark.parametrize("method", list(METHODS))
def test_every_method_every_format_is_drawn_to_scale(tmp_path, method, suffix):
    """Pixels of 0.4 x 0.5 µm: aspect, true scale bar, stored resolution, vector key and bar."""
    data, figure = _project_with_figure(tmp_path, method, f"fig.{suffix}")
    sidecar = check_figure_geometry(figure, shape_yx=data.shape[1:], pixel_um=(0.4, 0.5))
    assert sidecar["parameters"]["method"] == method.split("-")[0]
    assert sidecar["dpi"] == 300


def test_peak_depth_map_figure_and_sidecar(tmp_path):
    """max: the depth map through viridis (the default for a depth map) with a colour bar in µm
    from the first to the last slice (5 steps of 1.5 µm); pixels at or below --blank are black."""
    data = mostly_black_stack()
    path = write_ome_tiff(tmp_path / "s.ome.tif", data, axes="ZYX", scale=(1.5, 0.4, 0.5))
    figure = tmp_path / "depth.svg"
    assert main(["project", str(path), "-o", str(tmp_path / "m.ome.tif"), "--method", "max",
                 "--figure", str(figure), "--blank", "0"]) == 0
    record = json.loads((tmp_path / "depth.svg.json").read_text(encoding="utf-8"))
    assert record["colour_bar"]["unit"] == "\u00b5m"
    assert record["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 7.5])
    assert record["colour_bar"]["colour_map"] == "viridis"
    assert record["parameters"]["blank_at_or_below"] == 0.0
    text = (tmp_path / "depth.svg.methods.txt").read_text(encoding="utf-8")
    assert "slice holding the maximum intensity" in text and "at or below 0" in text
    assert "Depth (\u00b5m)" in figure.read_text(encoding="utf-8")  # the colour bar's label, text


def test_occlusion_figure_says_it_is_a_rendering(tmp_path):
    """The figure itself, its methods sentence and its sidecar call it a rendering for showing,
    not a measurement, and name the emission-absorption model of Max (1995)."""
    data, figure = _project_with_figure(tmp_path, "occlusion", "occ.svg")
    svg = figure.read_text(encoding="utf-8")  # SVG keeps its text as text
    assert "A rendering for showing, not a measurement" in svg and "Max 1995" in svg
    record = json.loads((tmp_path / "occ.svg.json").read_text(encoding="utf-8"))
    methods = (tmp_path / "occ.svg.methods.txt").read_text(encoding="utf-8")
    assert "not a measurement" in methods and "Max 1995" in methods
    assert "emission\u2013absorption" in methods
    # the default density: 10 / stack depth (6 slices x 1.5 µm), the kernels' documented default
    assert record["parameters"]["density_per_um"] == pytest.approx(10.0 / 9.0)
    assert record["rendering"]["density_per_um"] == pytest.approx(10.0 / 9.0)
    assert "Max 1995" in record["rendering"]["model"]
    assert record["colour_bar"] is None and "not a measurement" in record["caveat"]
    assert f"{10.0 / 9.0:.3g} per \u00b5m" in methods
