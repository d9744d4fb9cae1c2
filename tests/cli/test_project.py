"""``stackdepth project``: outputs, geometry, refusals and one-line errors.

Reference values: the ``max`` output is compared with ``numpy.max`` along z and the depth of the
strongest voxel with ``numpy.argmax`` (numpy documentation: first occurrence on ties).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from tests.cli._console import assert_one_line_error, run_cli
from viewer_plugin.cli import main
from viewer_plugin.io import read_stack, write_ome_tiff


def _bars(shape=(10, 32, 40), seed=0):
    """uint16 stack: one bright bar per slice at its own row, on Poisson background."""
    rng = np.random.default_rng(seed)
    data = (100 + rng.poisson(4.0, shape)).astype(np.uint16)
    for z in range(shape[0]):
        data[z, 1 + 3 * z: 3 + 3 * z, 4:36] += 500
    return data


@pytest.fixture
def stack_file(tmp_path):
    data = _bars()
    path = write_ome_tiff(tmp_path / "bars.ome.tif", data, axes="ZYX", scale=(2.0, 0.25, 0.5))
    return path, data


def test_peak_writes_rgb_with_pixel_size(stack_file, tmp_path, capsys):
    path, data = stack_file
    out = tmp_path / "bars_depth.ome.tif"
    assert main(["project", str(path), "-o", str(out)]) == 0
    assert "bars_depth.ome.tif" in capsys.readouterr().out
    written = read_stack(out)
    assert written.axes == "YXS"
    assert written.data.shape == (32, 40, 3) and written.data.dtype == np.uint8
    assert written.scale[:2] == pytest.approx((0.25, 0.5))
    params = written.metadata["projection"]
    assert params["method"] == "peak" and params["z_step_um"] == pytest.approx(2.0)
    assert params["depth_range_um"] == pytest.approx([0.0, 18.0])  # (10 - 1) slices x 2 um
    # pixels on the bar of slice 0 and of slice 9 get the two ends of the default map, CET-I1
    # (colorcet's table, Kovesi 2015): cyan and orange
    import colorcet

    assert params["cmap"] == "CET-I1" and params["cmap_kind"] == "constant"
    ends = np.rint(colorcet.cm["CET_I1"]([0.0, 1.0])[:, :3] * 255)
    shallow, deep = written.data[1, 20].astype(float), written.data[28, 20].astype(float)
    assert np.argmax(shallow) == np.argmax(ends[0]) and np.argmax(deep) == np.argmax(ends[1])
    assert 0.0 <= params["saturated_fraction"] <= 1.0


def test_max_equals_numpy_max(stack_file, tmp_path):
    path, data = stack_file
    out = tmp_path / "bars_max.ome.tif"
    assert main(["project", str(path), "-o", str(out), "--method", "max"]) == 0
    written = read_stack(out)
    assert written.axes == "YX" and written.data.dtype == np.uint16
    np.testing.assert_array_equal(written.data, data.max(axis=0))  # numpy reference


def test_occlusion_float32_and_view(stack_file, tmp_path):
    path, _ = stack_file
    out = tmp_path / "bars_occlusion.ome.tif"
    assert main(["project", str(path), "-o", str(out), "--method", "occlusion", "--view", "bottom",
                 "--density", "0.5"]) == 0
    written = read_stack(out)
    assert written.axes == "YX" and written.data.dtype == np.float32
    assert 0.0 <= float(written.data.min()) and float(written.data.max()) <= 1.0
    assert written.metadata["projection"]["density_per_um"] == pytest.approx(0.5)


def test_z_step_override_and_figure(stack_file, tmp_path):
    path, _ = stack_file
    out, fig = tmp_path / "o.ome.tif", tmp_path / "fig.png"
    assert main(["project", str(path), "-o", str(out), "--z-step", "3", "--figure", str(fig),
                 "--cmap", "cividis"]) == 0
    record = json.loads((tmp_path / "fig.png.json").read_text(encoding="utf-8"))
    assert record["parameters"]["z_step_um"] == pytest.approx(3.0)
    assert record["parameters"]["z_step_from"] == "--z-step"
    assert record["parameters"]["cmap"] == "cividis"
    assert record["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 27.0])
    text = (tmp_path / "fig.png.methods.txt").read_text(encoding="utf-8")
    assert "0\u201327 \u00b5m" in text and "cividis" in text


def test_existing_output_without_overwrite_exits_2(stack_file, tmp_path):
    path, _ = stack_file
    out = tmp_path / "taken.ome.tif"
    out.write_bytes(b"precious")
    result = run_cli("project", path, "-o", out)
    assert_one_line_error(result, "exists", "--overwrite")
    assert out.read_bytes() == b"precious"
    assert main(["project", str(path), "-o", str(out), "--overwrite"]) == 0
    assert read_stack(out).axes == "YXS"


def test_existing_figure_sidecar_refused_before_work(stack_file, tmp_path):
    path, _ = stack_file
    (tmp_path / "fig.png.json").write_text("{}", encoding="utf-8")
    result = run_cli("project", path, "-o", tmp_path / "o.ome.tif", "--figure", tmp_path / "fig.png")
    assert_one_line_error(result, "--figure", "exists")
    assert not (tmp_path / "o.ome.tif").exists()


@pytest.mark.parametrize(
    ("extra", "fragment"),
    [
        (["--density", "0.2"], "--density"),
        (["--method", "max", "--cmap", "viridis"], "--cmap"),
        (["--method", "max", "--depth-range", "0", "5"], "--depth-range"),  # figures only
        (["--method", "max", "--clim", "0", "5", "--figure", "f.png"], "--clim"),
        (["--method", "occlusion", "--depth-range", "0", "5"], "--depth-range"),
        (["--figure", "f.jpg"], "--figure"),
        (["--gamma", "0"], "gamma"),
        (["--cmap", "no_such_map"], "no_such_map"),
        (["--depth-range", "5", "1"], "--depth-range"),  # the option, as typed
        (["--z-step", "-1"], "--z-step"),
        (["--channel", "1"], "--channel"),
    ],
)
def test_bad_options_exit_2(stack_file, tmp_path, extra, fragment):
    path, _ = stack_file
    result = run_cli("project", path, "-o", tmp_path / "o.ome.tif", *extra)
    assert_one_line_error(result, fragment)


def test_missing_input_exit_2(tmp_path):
    result = run_cli("project", tmp_path / "nope.tif", "-o", tmp_path / "o.ome.tif")
    assert_one_line_error(result, "nope.tif")


def test_channels_need_channel_option(tmp_path):
    data = np.stack([_bars(seed=1), _bars(seed=2)], axis=1)  # ZCYX
    path = write_ome_tiff(tmp_path / "two.ome.tif", data, axes="ZCYX", scale=(2.0, 1.0, 0.25, 0.5),
                          channel_names=["GFP", "RFP"])
    result = run_cli("project", path, "-o", tmp_path / "o.ome.tif")
    assert_one_line_error(result, "--channel", "GFP")
    out = tmp_path / "rfp_max.ome.tif"
    assert main(["project", str(path), "-o", str(out), "--method", "max", "--channel", "1"]) == 0
    np.testing.assert_array_equal(read_stack(out).data, data[:, 1].max(axis=0))  # numpy reference


def test_time_series_keeps_time_axis(tmp_path):
    data = np.stack([_bars(seed=3), _bars(seed=4), _bars(seed=5)])  # TZYX
    path = write_ome_tiff(tmp_path / "series.ome.tif", data, axes="TZYX", scale=(60.0, 2.0, 0.25, 0.5))
    out = tmp_path / "series_max.ome.tif"
    assert main(["project", str(path), "-o", str(out), "--method", "max"]) == 0
    written = read_stack(out)
    assert written.axes == "TYX"
    np.testing.assert_array_equal(written.data, data.max(axis=1))  # numpy reference
    assert written.scale[0] == pytest.approx(60.0)


@pytest.mark.realdata
def test_real_golgi_stack_max_equals_numpy(realdata, tmp_path):
    """Open data: golgi_airyscan.ome.tif (CC BY 4.0, (c) NEUBIAS, NEUBIAS training resources)."""
    source = realdata / "golgi_airyscan.ome.tif"
    out = tmp_path / "golgi_max.ome.tif"
    assert main(["project", str(source), "-o", str(out), "--method", "max"]) == 0
    expected = np.asarray(read_stack(source).data).max(axis=0)  # numpy reference
    written = read_stack(out)
    np.testing.assert_array_equal(written.data, expected)
    assert written.scale == pytest.approx((0.3514, 0.3514), rel=1e-3)


@pytest.mark.realdata
def test_real_nucleus_two_channels_need_channel(realdata, tmp_path):
    """Open data: nucleus_confocal_widefield.ome.tif (CC BY 4.0, (c) NEUBIAS); ZCYX, 2 channels."""
    source = realdata / "nucleus_confocal_widefield.ome.tif"
    result = run_cli("project", source, "-o", tmp_path / "o.ome.tif")
    assert_one_line_error(result, "--channel")
    out = tmp_path / "conf.ome.tif"
    assert main(["project", str(source), "-o", str(out), "--channel", "0"]) == 0
    params = read_stack(out).metadata["projection"]
    assert params["z_step_um"] == pytest.approx(0.4994, rel=1e-3)  # the file's voxel size


def test_uncalibrated_file_warns_about_z_step(tmp_path):
    """A file without voxel size (steps 1 x 1 x 1) gets a warning naming --z-step; still exit 0."""
    path = write_ome_tiff(tmp_path / "raw.ome.tif", _bars(), axes="ZYX", scale=(1.0, 1.0, 1.0))
    result = run_cli("project", path, "-o", tmp_path / "o.ome.tif", "--method", "max")
    assert result.returncode == 0, result.stderr
    assert "--z-step" in result.stderr and "Traceback" not in result.stderr
    calibrated = run_cli("project", path, "-o", tmp_path / "c.ome.tif", "--z-step", "0.5")
    assert calibrated.returncode == 0 and "--z-step" not in calibrated.stderr


@pytest.mark.parametrize("method", ["peak", "weighted", "tinted", "occlusion", "max"])
def test_every_method_writes_its_projection(stack_file, tmp_path, method):
    """Every --method value works; max equals numpy's max (numpy documentation)."""
    path, data = stack_file
    out = tmp_path / f"{method}.ome.tif"
    assert main(["project", str(path), "-o", str(out), "--method", method]) == 0
    written = read_stack(out)
    assert written.metadata["projection"]["method"] == method
    if method == "max":
        np.testing.assert_array_equal(written.data, data.max(axis=0))
    elif method == "occlusion":
        assert written.axes == "YX" and written.data.dtype == np.float32
    else:
        assert written.axes == "YXS" and written.data.dtype == np.uint8


def test_saturation_is_reported_and_recorded(stack_file, tmp_path, capsys):
    """More than 1 % of pixels above the upper limit: a note, and the fraction in the sidecar
    (numpy reference: the share of maxima above the limit)."""
    path, data = stack_file
    out, fig = tmp_path / "sat.ome.tif", tmp_path / "sat.png"
    assert main(["project", str(path), "-o", str(out), "--clim", "100", "200",
                 "--figure", str(fig)]) == 0
    captured = capsys.readouterr()
    assert "saturated" in captured.out + captured.err
    record = json.loads((tmp_path / "sat.png.json").read_text(encoding="utf-8"))
    expected = float(np.mean(data.max(axis=0) > 200))
    assert record["parameters"]["saturated_fraction"] == pytest.approx(expected)
    assert record["key"]["brightness_tick_labels"][0] == "100"
