"""``stackdepth project --figure`` with anisotropic pixels: the figure is drawn to scale.

Checks (tests/figure_checks.py): the sidecar's pixel size equals the file's, the image keeps
the stack's aspect (µm width / µm height), and the scale bar's length in image pixels equals
its µm length divided by the pixel width -- the definition of a scale bar.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.figure_checks import check_figure_geometry
from viewer_plugin.cli import main
from viewer_plugin.io import write_ome_tiff


def mostly_black_stack(shape=(6, 60, 80)):
    """Zeros with a few bright voxels in the top-left corner, away from the scale bar."""
    data = np.zeros(shape, np.uint16)
    for z in range(shape[0]):
        data[z, 2 + z, 2:10] = 1000
    return data


@pytest.mark.parametrize("pixel", [(0.4, 0.5), (2.0, 2.0), (0.5, 0.4)])
def test_cli_figure_is_drawn_to_scale(tmp_path, pixel):
    data = mostly_black_stack()
    path = write_ome_tiff(tmp_path / "aniso.ome.tif", data, axes="ZYX", scale=(1.5, *pixel))
    figure = tmp_path / "fig.png"
    assert main(["project", str(path), "-o", str(tmp_path / "p.ome.tif"), "--figure",
                 str(figure)]) == 0
    sidecar = check_figure_geometry(figure, shape_yx=data.shape[1:], pixel_um=pixel)
    assert sidecar["parameters"]["voxel_size_um"] == [1.5, *pixel]
