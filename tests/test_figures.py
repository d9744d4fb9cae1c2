"""Figure export for papers: colour bar in µm, scale bar, sidecar JSON, methods text, no overwrite.

Reference values: colours are checked against matplotlib's own colour maps; tick positions against
the depths they name; the 1-2-5 scale-bar lengths are common practice for scale bars.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from viewer_plugin import __version__
from viewer_plugin.figures import (
    build_depth_figure,
    colour_bar_image,
    export_depth_figure,
    legend_parts,
    methods_sentence,
    nice_length,
)
from viewer_plugin.kernels import ParameterError
from viewer_plugin.kernels.projection import depth_coded_projection, depth_legend


def _result(n=12, z_step=5.0, cmap="viridis"):
    stack = np.zeros((n, 30, 40), np.uint16)
    for z in range(n):
        stack[z, 2 * z: 2 * z + 2, 5:35] = 1000
    return depth_coded_projection(stack, z_step=z_step, cmap=cmap, clim=(0, 1000))


PARAMS = {"method": "peak", "cmap": "viridis", "depth_range_um": [0.0, 55.0], "clim": [0, 1000],
          "gamma": 1.0, "z_step_um": 5.0, "voxel_size_um": [5.0, 0.5, 0.5],
          "source_file": "/data/cells.ome.tif"}


def test_sidecar_holds_parameters(tmp_path):
    files = export_depth_figure(_result(), tmp_path / "fig.png", pixel_size_um=0.5,
                                source_name="/data/cells.ome.tif", parameters=PARAMS)
    assert files.figure.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    record = json.loads(files.sidecar.read_text(encoding="utf-8"))
    assert files.sidecar.name == "fig.png.json" and files.methods.name == "fig.png.methods.txt"
    for key, value in PARAMS.items():
        assert record["parameters"][key] == value
    assert record["stackdepth_version"] == __version__
    assert record["created_utc"].endswith("+00:00")
    assert record["source"] == "/data/cells.ome.tif"
    assert record["parameters"]["clim_used"] == [0.0, 1000.0]
    assert record["pixel_size_um"] == [0.5, 0.5]
    assert record["scale_bar_um"] == 2.0  # longest 1-2-5 length <= 1/5 of 20 um (common practice)


def test_colour_bar_ticks_are_depths_in_um():
    """The colour bar's labels are µm and sit at the depth they name."""
    result = _result()  # depths 0 .. 55 um
    fig = build_depth_figure(result, pixel_size_um=0.5)
    cax = fig.axes[1]
    assert cax.get_ylabel() == "Depth (\u00b5m)"
    labels = [t.get_text() for t in cax.get_yticklabels()]
    assert labels == ["0", "10", "20", "30", "40", "50"]
    np.testing.assert_allclose(cax.get_yticks(), [0, 10, 20, 30, 40, 50])  # tick at its own depth
    assert cax.get_ylim() == pytest.approx((55.0, 0.0))  # depth grows downward
    # the key's colours at full brightness (its last column): shallow end = viridis(0), deep
    # end = viridis(1) (matplotlib reference); its first column is zero brightness: black
    from matplotlib import colormaps

    bar = cax.get_images()[0].get_array()
    np.testing.assert_allclose(bar[0, -1], colormaps["viridis"](0.5 / 256)[:3], atol=1 / 255)
    np.testing.assert_allclose(bar[-1, -1], colormaps["viridis"](255.5 / 256)[:3], atol=1 / 255)
    assert np.all(bar[:, 0] == 0)
    assert [t.get_text() for t in cax.get_xticklabels()] == ["0", "500", "1000"]  # signal, clim


def test_image_and_scale_bar_in_um():
    result = _result()
    fig = build_depth_figure(result, pixel_size_um=(0.5, 0.25), scale_bar_um=3.0)
    ax = fig.axes[0]
    image = ax.get_images()[0]
    np.testing.assert_allclose(image.get_array(), result.rgb)
    assert image.get_extent() == pytest.approx([0.0, 40 * 0.25, 30 * 0.5, 0.0])  # um, y down
    bar = ax.patches[0]
    assert bar.get_width() == pytest.approx(3.0)
    assert any(t.get_text() == "3 \u00b5m" for t in ax.texts)


@pytest.mark.parametrize(("name", "magic"), [("fig.pdf", b"%PDF"), ("fig.tif", b"II*\x00")])
def test_other_formats(tmp_path, name, magic):
    files = export_depth_figure(_result(), tmp_path / name, pixel_size_um=0.5, parameters=PARAMS,
                                dpi=100)
    assert files.figure.read_bytes()[:4] == magic


def test_refuses_to_overwrite(tmp_path):
    target = tmp_path / "fig.png"
    target.write_bytes(b"precious")
    with pytest.raises(FileExistsError, match="fig.png"):
        export_depth_figure(_result(), target, pixel_size_um=0.5, parameters=PARAMS)
    assert target.read_bytes() == b"precious"
    assert not (tmp_path / "fig.png.json").exists()
    (tmp_path / "other.png.methods.txt").write_text("mine", encoding="utf-8")
    with pytest.raises(FileExistsError, match="methods"):
        export_depth_figure(_result(), tmp_path / "other.png", pixel_size_um=0.5, parameters=PARAMS)
    assert not (tmp_path / "other.png").exists()
    files = export_depth_figure(_result(), target, pixel_size_um=0.5, parameters=PARAMS,
                                overwrite=True)
    assert files.figure.read_bytes()[:4] == b"\x89PNG"
    assert not list(tmp_path.glob(".*"))  # no temporary files left behind


def test_bad_inputs(tmp_path):
    with pytest.raises(ParameterError, match="path"):
        export_depth_figure(_result(), tmp_path / "fig.jpg", pixel_size_um=0.5)
    with pytest.raises(ParameterError, match="pixel_size_um"):
        export_depth_figure(_result(), tmp_path / "fig.png", pixel_size_um=0.0)
    with pytest.raises(ParameterError, match="scale_bar_um"):
        export_depth_figure(_result(), tmp_path / "fig.png", pixel_size_um=0.5, scale_bar_um=1e6)
    with pytest.raises(FileNotFoundError):
        export_depth_figure(_result(), tmp_path / "no" / "fig.png", pixel_size_um=0.5)
    with pytest.raises(ParameterError, match="result.rgb"):
        export_depth_figure(np.zeros((2, 5, 6, 3)), tmp_path / "fig.png", pixel_size_um=0.5)


def test_methods_sentence():
    text = methods_sentence(PARAMS)
    assert text.startswith(f"Depth was colour-coded with stackdepth {__version__}: each pixel shows "
                           "the depth of its strongest voxel")
    assert "0\u201355 \u00b5m, viridis colour map" in text
    assert "5 \u00d7 0.5 \u00d7 0.5 \u00b5m" in text
    assert "not a calibrated intensity" in text
    weighted = methods_sentence({**PARAMS, "method": "weighted", "clim": None,
                                 "clim_used": [3, 900], "gamma": 0.5})
    assert "intensity-weighted mean depth" in weighted and "gamma 0.5" in weighted
    assert "background level + 3 SD" in weighted  # the kernel's default lower limit for weighted
    tinted = methods_sentence({**PARAMS, "method": "tinted", "clim": None, "clim_used": [3, 900]})
    assert "automatic 0.1 and 99.9 percentiles" in tinted


@pytest.mark.parametrize(("span", "expected"), [(300.0, 50.0), (38.4, 5.0), (1.0, 0.2), (9.9, 1.0)])
def test_nice_length(span, expected):
    """The longest 1-2-5 length not above a fifth of the width (common practice for scale bars)."""
    assert nice_length(span) == pytest.approx(expected)


def test_dock_colour_bar_image():
    legend = depth_legend((0.0, 63.0), cmap="magma")
    parts = legend_parts(legend)
    assert parts.labels == ("0", "20", "40", "60")
    image = colour_bar_image(legend, width_px=200, height_px=50)
    assert image.shape == (50, 200, 4) and image.dtype == np.uint8
    assert image[..., 3].max() == 255  # something was drawn on the transparent background
