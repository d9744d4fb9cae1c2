"""``stackdepth figures``: many stacks, one comparable figure each, a summary, failures contained."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from tests.cli._console import assert_one_line_error, run_cli
from viewer_plugin.cli import main
from viewer_plugin.io import write_ome_tiff


def _bars(n_slices, seed):
    rng = np.random.default_rng(seed)
    data = (100 + rng.poisson(5.0, (n_slices, 40, 48))).astype(np.uint16)
    for z in range(n_slices):
        data[z, 1 + 2 * z: 2 + 2 * z, 4:40] += 300 + 100 * seed
    return data


@pytest.fixture
def inputs(tmp_path):
    folder = tmp_path / "stacks"
    folder.mkdir()
    shallow = write_ome_tiff(folder / "shallow.ome.tif", _bars(6, 1), axes="ZYX", scale=(2.0, 0.5, 0.5))
    deep = write_ome_tiff(folder / "deep.ome.tif", _bars(15, 2), axes="ZYX", scale=(2.0, 0.5, 0.5))
    corrupt = folder / "corrupt.tif"
    corrupt.write_bytes(b"not a tiff at all")
    return folder, shallow, deep, corrupt


def _summary(folder):
    with open(folder / "summary.csv", newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def test_one_corrupt_input_does_not_stop_the_others(inputs, tmp_path, capsys):
    folder, shallow, deep, corrupt = inputs
    out = tmp_path / "figs"
    assert main(["figures", str(shallow), str(deep), str(corrupt), "-o", str(out)]) == 2
    assert (out / "shallow.png").exists() and (out / "deep.png").exists()
    rows = {row["file"]: row for row in _summary(out)}
    assert rows[str(shallow)]["status"] == "ok" and rows[str(deep)]["status"] == "ok"
    assert rows[str(corrupt)]["status"].startswith("error:") and "TIFF" in rows[str(corrupt)]["status"]
    assert "1 failed" in capsys.readouterr().out


def test_depth_range_is_shared_and_the_widest(inputs, tmp_path):
    """Two stacks of 6 and 15 slices (2 µm): both figures map 0-28 µm (14 steps of 2 µm)."""
    folder, shallow, deep, _ = inputs
    out = tmp_path / "figs"
    assert main(["figures", str(shallow), str(deep), "-o", str(out), "--same-contrast",
                 "--format", "svg"]) == 0
    cars = [json.loads((out / f"{n}.svg.json").read_text(encoding="utf-8")) for n in ("shallow", "deep")]
    assert all(c["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 28.0]) for c in cars)
    assert cars[0]["parameters"]["clim_used"] == pytest.approx(cars[1]["parameters"]["clim_used"])
    assert (out / "deep.svg").read_text(encoding="utf-8").lstrip().startswith("<?xml")


def test_a_folder_input_takes_every_stack_inside(inputs, tmp_path):
    folder, *_ = inputs
    out = tmp_path / "figs"
    assert main(["figures", str(folder), "-o", str(out), "--depth-range", "0", "10"]) == 2
    rows = _summary(out)
    assert len(rows) == 3 and sum(row["status"] == "ok" for row in rows) == 2
    record = json.loads((out / "deep.png.json").read_text(encoding="utf-8"))
    assert record["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 10.0])


def test_existing_outputs_are_refused_before_any_work(inputs, tmp_path):
    _, shallow, _, _ = inputs
    out = tmp_path / "figs"
    out.mkdir()
    (out / "shallow.png").write_bytes(b"precious")
    assert_one_line_error(run_cli("figures", shallow, "-o", out), "exists", "--overwrite")
    assert (out / "shallow.png").read_bytes() == b"precious" and not (out / "summary.csv").exists()


def test_occlusion_figures_share_one_density(inputs, tmp_path):
    """Occlusion figures of a folder: one density, the default of the deepest stack
    (10 / (15 slices x 2 µm), the kernels' documented default), and each says it is a rendering."""
    _, shallow, deep, _ = inputs
    out = tmp_path / "figs"
    assert main(["figures", str(shallow), str(deep), "-o", str(out), "--method", "occlusion",
                 "--same-contrast", "--format", "pdf"]) == 0
    cars = [json.loads((out / f"{n}.pdf.json").read_text(encoding="utf-8")) for n in ("shallow", "deep")]
    for car in cars:
        assert car["parameters"]["density_per_um"] == pytest.approx(10.0 / 30.0)
        assert "not a measurement" in car["methods"] and "Max 1995" in car["methods"]
    assert cars[0]["parameters"]["clim_used"] == pytest.approx(cars[1]["parameters"]["clim_used"])
    rows = {row["file"]: row for row in _summary(out)}
    assert rows[str(deep)]["display_range"] and rows[str(deep)]["status"] == "ok"


def test_peak_depth_map_figures_share_one_depth_range(inputs, tmp_path):
    """max figures: the depth map's colour bar spans the widest stack (0-28 µm) in every figure,
    and summary.csv says so."""
    _, shallow, deep, _ = inputs
    out = tmp_path / "figs"
    assert main(["figures", str(shallow), str(deep), "-o", str(out), "--method", "max",
                 "--cmap", "magma", "--blank", "150"]) == 0
    for name in ("shallow", "deep"):
        car = json.loads((out / f"{name}.png.json").read_text(encoding="utf-8"))
        assert car["colour_bar"]["depth_range_um"] == pytest.approx([0.0, 28.0])
        assert car["colour_bar"]["colour_map"] == "magma"
        assert car["parameters"]["blank_at_or_below"] == 150.0
    rows = {row["file"]: row for row in _summary(out)}
    assert rows[str(shallow)]["depth_range_um"] == "0 28"


def test_help_lists_every_method():
    from viewer_plugin.jobs.choices import METHOD_LABELS, PROJECTION_METHODS

    result = run_cli("figures", "--help")
    assert result.returncode == 0
    text = " ".join(result.stdout.split())  # argparse wraps the help
    for method in PROJECTION_METHODS:
        assert " ".join(METHOD_LABELS[method].split()) in text


@pytest.mark.parametrize(
    ("extra", "fragment"),
    [
        (["--method", "max", "--same-contrast"], "--same-contrast"),
        (["--method", "max", "--clim", "0", "10"], "--clim"),
        (["--method", "occlusion", "--depth-range", "0", "10"], "--depth-range"),
        (["--density", "0.2"], "--density"),
        (["--view", "bottom"], "--view"),
        (["--blank", "100"], "--blank"),
        (["--method", "mip"], "--method"),
    ],
)
def test_bad_combinations_exit_2(inputs, tmp_path, extra, fragment):
    _, shallow, _, _ = inputs
    out = tmp_path / "figs"
    assert_one_line_error(run_cli("figures", shallow, "-o", out, *extra), fragment)
    assert not out.exists()  # refused before any work
