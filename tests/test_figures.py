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
    FIGURE_KEY_DEPTHS,
    FIGURE_KEY_STEPS,
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
    # the key's cells (vector paths, depths down and brightness levels across): at full
    # brightness (the last column) the colour of the cell's central depth, viridis((i + 0.5) / n)
    # (matplotlib reference); its first column is zero brightness: black
    from matplotlib import colormaps

    depths, levels = FIGURE_KEY_DEPTHS, FIGURE_KEY_STEPS
    assert not cax.get_images()  # no raster: the cells are paths
    bar = cax.collections[0].get_facecolor()[:, :3].reshape(depths, levels, 3)
    np.testing.assert_allclose(bar[0, -1], colormaps["viridis"](0.5 / depths)[:3], atol=1 / 255)
    np.testing.assert_allclose(bar[-1, -1], colormaps["viridis"](1 - 0.5 / depths)[:3],
                               atol=1 / 255)
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


# --- the peak depth map and the occlusion rendering ------------------------------------------


def test_depth_map_colours_are_matplotlibs():
    """Each pixel is cmap((d - d0) / (d1 - d0)) as matplotlib's Colormap.__call__ gives it
    (reference); no depth (NaN) and a maximum at or below the blank level are black."""
    from matplotlib import colormaps

    from viewer_plugin.figures import depth_map_panel

    rng = np.random.default_rng(3)
    depth = rng.uniform(-2.0, 32.0, (12, 9))  # some outside the range: the end colours
    depth[0, 0] = np.nan
    peak = rng.uniform(0, 100, depth.shape)
    panel = depth_map_panel(depth, depth_range=(0.0, 30.0), cmap="magma", peak=peak,
                            blank_at_or_below=20.0)
    expected = colormaps["magma"](np.clip(np.nan_to_num(depth) / 30.0, 0, 1))[..., :3]
    blank = np.isnan(depth) | (peak <= 20.0)
    expected[blank] = 0.0
    np.testing.assert_allclose(panel.image, expected, atol=1e-6)
    assert panel.key.labels == ("0", "10", "20", "30")  # 1-2-5 steps, at most 6 ticks
    assert panel.parameters["blank_at_or_below"] == 20.0
    assert panel.record["colour_bar"]["depth_range_um"] == [0.0, 30.0]
    with pytest.raises(ParameterError, match="peak"):
        depth_map_panel(depth, depth_range=(0.0, 30.0), cmap="magma", blank_at_or_below=1.0)
    with pytest.raises(ParameterError, match="depth_um"):
        depth_map_panel(np.zeros((2, 3, 4)), depth_range=(0.0, 30.0), cmap="magma")


def test_occlusion_panel_grey_and_colour():
    from viewer_plugin.figures import RENDERING_NOTE, occlusion_panel

    grey = np.linspace(0, 1, 20, dtype=np.float32).reshape(4, 5)
    panel = occlusion_panel(grey, parameters={"density_per_um": 0.25, "view": "bottom"})
    np.testing.assert_array_equal(panel.image, np.repeat(grey[..., None], 3, axis=2))
    assert panel.key is None and panel.note == RENDERING_NOTE
    assert panel.record["rendering"]["density_per_um"] == 0.25
    assert "last slice (view from the bottom)" in panel.methods
    assert "0.25 per \u00b5m" in panel.methods and "not a measurement" in panel.methods
    colour = occlusion_panel(np.zeros((4, 5, 3)), cmap="CET-I1", depth_range=(0.0, 20.0))
    assert colour.key.depth_range == (0.0, 20.0)
    assert "each slice emitted the colour of its depth (0\u201320 \u00b5m, CET-I1" in colour.methods
    with pytest.raises(ParameterError, match="cmap"):
        occlusion_panel(np.zeros((4, 5, 3)))
    with pytest.raises(ParameterError, match="image"):
        occlusion_panel(np.zeros((2, 4, 5)))


def _time_series_projected(method, **options):
    """A (t, z, y, x) stack of two time points projected with *method* (the job's result)."""
    from viewer_plugin._shared.stack import Stack
    from viewer_plugin.jobs import ProjectionOptions, Selection, project_stack

    data = np.zeros((2, 5, 8, 10), np.uint16)
    data[0, 1, 2:4, 2:8] = 500
    data[1, 3, 4:6, 2:8] = 900
    stack = Stack(data, "TZYX", (30.0, 2.0, 0.4, 0.5), name="series")
    return data, project_stack(Selection(stack), ProjectionOptions(method=method, **options))


@pytest.mark.parametrize("method", ["peak", "max", "occlusion"])
def test_figure_of_each_plane(tmp_path, method):
    """A time series: the figure draws the plane asked for, and refuses an index that picks none."""
    from viewer_plugin.jobs import figure_panel, figure_planes, write_figure

    data, projected = _time_series_projected(method)
    assert figure_planes(projected) == (2,)
    panel = figure_panel(projected, (1,))
    assert panel.image.shape == (8, 10, 3)
    if method == "max":  # numpy reference: argmax along depth times the z-step
        depth = data[1].argmax(axis=0) * 2.0
        assert panel.parameters["depth_range_um"] == [0.0, 8.0]
        from matplotlib import colormaps

        np.testing.assert_allclose(panel.image, colormaps["viridis"](depth / 8.0)[..., :3],
                                   atol=1e-6)
    with pytest.raises(ParameterError, match="figure"):
        figure_panel(projected)  # two planes: pick one
    with pytest.raises(ParameterError, match="figure"):
        figure_panel(projected, (2,))
    files = write_figure(projected, tmp_path / "t1.png", index=(1,), dpi=60)
    record = json.loads(files.sidecar.read_text(encoding="utf-8"))
    assert record["pixel_size_um"] == [0.4, 0.5] and record["image_shape"] == [8, 10]


def test_blank_only_for_the_depth_map(tmp_path):
    from viewer_plugin.jobs import write_figure

    _, projected = _time_series_projected("occlusion")
    with pytest.raises(ParameterError, match="blank_at_or_below"):
        write_figure(projected, tmp_path / "f.png", index=(0,), blank_at_or_below=3.0)
    assert not (tmp_path / "f.png").exists()


@pytest.mark.parametrize("suffix", [".svg", ".pdf"])
def test_vector_key_and_scale_bar(tmp_path, suffix):
    """PDF and SVG: the picture is the only raster; the scale bar and each key cell are paths."""
    from tests.figure_checks import check_vector_figure, read_vector_figure
    from viewer_plugin.figures import FIGURE_KEY_DEPTHS, FIGURE_KEY_STEPS

    files = export_depth_figure(_result(), tmp_path / f"fig{suffix}", pixel_size_um=(0.5, 0.25),
                                parameters=PARAMS)
    parts = check_vector_figure(files.figure, shape_yx=(30, 40), pixel_um=(0.5, 0.25),
                                scale_bar_um=2.0, key_cells=FIGURE_KEY_DEPTHS * FIGURE_KEY_STEPS)
    assert parts["images"] == 1 and read_vector_figure(files.figure)["cells"] >= 2048


def test_methods_sentences_of_depth_map_and_rendering():
    depth_map = methods_sentence({"method": "max", "depth_map_cmap": "viridis",
                                  "depth_range_um": [0, 22], "voxel_size_um": [2, 0.5, 0.5]})
    assert depth_map.startswith(f"The depth of the maximum intensity was mapped with stackdepth "
                                f"{__version__} (0\u201322 \u00b5m, viridis colour map)")
    assert "shallowest one on ties" in depth_map and "strongest noise" in depth_map
    rendering = methods_sentence({"method": "occlusion", "density_per_um": 0.05, "view": "top",
                                  "clim": None, "clim_used": [100, 900]})
    assert "for showing, not a measurement" in rendering
    assert "emission\u2013absorption model of volume rendering, Max 1995" in rendering
    assert "extinction of 0.05 per \u00b5m" in rendering
    assert "linearly from 100 to 900 (raw intensity; automatic 0.1 and 99.9 percentiles)" in rendering
