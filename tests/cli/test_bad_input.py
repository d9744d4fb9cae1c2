"""Bad input a new user would try: each gets exit status 2 and one line naming what was wrong."""

from __future__ import annotations

import numpy as np
import pytest

from tests.cli._console import assert_one_line_error, run_cli
from viewer_plugin.io import write_ome_tiff


def test_all_nan_stack_is_refused(tmp_path):
    path = write_ome_tiff(tmp_path / "nan.ome.tif", np.full((4, 16, 16), np.nan, np.float32),
                          axes="ZYX", scale=(1.0, 0.5, 0.5))
    result = run_cli("project", path, "-o", tmp_path / "out.ome.tif")
    assert_one_line_error(result, "finite")
    assert not (tmp_path / "out.ome.tif").exists()


@pytest.mark.parametrize("z_size", [0.0, -2.0])
def test_unusable_voxel_size_is_named(tmp_path, z_size):
    data = np.zeros((5, 16, 16), np.uint16)
    data[2, 4, 4:10] = 500
    path = write_ome_tiff(tmp_path / "bad.ome.tif", data, axes="ZYX", scale=(z_size, 0.5, 0.5))
    result = run_cli("project", path, "-o", tmp_path / "out.ome.tif")
    assert_one_line_error(result, "--z-step", f"PhysicalSizeZ='{z_size}'")
    given = run_cli("project", path, "-o", tmp_path / "out.ome.tif", "--z-step", "2")
    assert given.returncode == 0, given.stderr
    assert f"PhysicalSizeZ='{z_size}'" in given.stderr  # still named, as a note


def test_folder_as_input_says_it_is_a_folder(tmp_path):
    for command in (["project", str(tmp_path), "-o", str(tmp_path / "o.ome.tif")],
                    ["attenuation", str(tmp_path)], ["bleaching", str(tmp_path)]):
        assert_one_line_error(run_cli(*command), "is a folder")
