"""The command line's frame: help, version, demo files, and one-line errors with exit status 2."""

from __future__ import annotations

import pytest

from tests.cli._console import assert_one_line_error, run_cli
from viewer_plugin import __version__
from viewer_plugin.cli import main
from viewer_plugin.io import read_stack


def test_version_and_help(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0 and __version__ in capsys.readouterr().out
    with pytest.raises(SystemExit) as info:
        main(["--help"])
    out = capsys.readouterr().out
    assert info.value.code == 0 and "view" in out and "demo" in out and "not for clinical" in out


def test_demo_writes_three_datasets_with_truth(tmp_path, capsys):
    assert main(["demo", str(tmp_path / "demo")]) == 0
    names = sorted(p.name for p in (tmp_path / "demo").iterdir())
    assert names == ["fibre_slab.ome.tif", "fibre_slab_forward.ome.tif", "fibre_slab_reverse.ome.tif",
                     "fibre_slab_series.ome.tif"]
    series = read_stack(tmp_path / "demo" / "fibre_slab_series.ome.tif")
    assert series.axes == "TZYX" and series.scale[0] == series.metadata["truth"]["interval_s"]


def test_demo_refuses_to_overwrite(tmp_path):
    target = tmp_path / "fibre_slab.ome.tif"
    target.write_bytes(b"precious")
    result = run_cli("demo", str(tmp_path))
    assert_one_line_error(result, "exists", "--overwrite")
    assert target.read_bytes() == b"precious"


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (("view", "no/such/file.tif"), "no such file"),
        (("frobnicate",), "invalid choice"),
        (("demo",), "required"),
        (("view", "--bogus-option"), "unrecognized arguments"),
    ],
)
def test_errors_are_one_line_with_status_2(args, fragment):
    assert_one_line_error(run_cli(*args), fragment)


def test_broken_file_is_one_line_error(tmp_path):
    broken = tmp_path / "broken.tif"
    broken.write_bytes(b"II*\x00" + b"\xff" * 40)
    assert_one_line_error(run_cli("view", str(broken)), "broken.tif")


def test_no_command_prints_help_and_exits_2():
    result = run_cli()
    assert result.returncode == 2 and "usage:" in result.stderr
