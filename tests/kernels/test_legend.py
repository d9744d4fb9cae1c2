"""The depth legend against matplotlib colour tables and the 1-2-5 tick rule.

* colours: matplotlib.colormaps[name](t) (matplotlib documentation);
* ticks at 1, 2 or 5 times a power of ten ("nice numbers": common practice
  for axis labels; P. Heckbert, "Nice numbers for graph labels", Graphics
  Gems, 1990 -- from memory);
* CIELAB L* rises monotonically along a perceptually uniform sequential map
  (P. Kovesi, arXiv:1509.03700, 2015), computed with skimage.color.rgb2lab.
"""

from __future__ import annotations

import matplotlib
import numpy as np
import pytest

from viewer_plugin.kernels import ParameterError, depth_coded_projection, depth_legend
from viewer_plugin.kernels.projection.legend import DepthLegend, nice_ticks


@pytest.mark.parametrize(
    "low, high, ticks",
    [
        (0.0, 63.0, [0, 20, 40, 60]),
        (0.0, 100.0, [0, 20, 40, 60, 80, 100]),
        (0.0, 1.5, [0, 0.5, 1.0, 1.5]),
        (2.5, 9.0, [4, 6, 8]),
        (0.0, 0.07, [0, 0.02, 0.04, 0.06]),
        (10.0, 11.0, [10, 10.2, 10.4, 10.6, 10.8, 11]),
        (0.0, 480.0, [0, 100, 200, 300, 400]),
    ],
)
def test_nice_ticks_1_2_5(low, high, ticks):
    got, _ = nice_ticks(low, high)
    np.testing.assert_allclose(got, ticks, atol=1e-12)
    steps = np.diff(got)
    step = steps[0]
    mantissa = step / 10 ** np.floor(np.log10(step))
    assert any(np.isclose(mantissa, m) for m in (1, 2, 5))
    assert len(got) <= 6


def test_labels_decimals():
    legend = depth_legend((0.0, 1.5))
    assert legend.tick_labels == ("0.0", "0.5", "1.0", "1.5")
    assert legend.unit == "µm" and legend.title == "depth (µm)"


@pytest.mark.parametrize("cmap", ["viridis", "cividis", "magma"])
def test_bar_colours_match_matplotlib(cmap):
    legend = depth_legend((0.0, 30.0), cmap=cmap, n_colours=256, height=5)
    expected = np.rint(matplotlib.colormaps[cmap](np.arange(256))[:, :3] * 255).astype(np.uint8)
    assert legend.image.shape == (5, 256, 3) and legend.image.dtype == np.uint8
    np.testing.assert_array_equal(legend.image[0], expected)
    np.testing.assert_array_equal(legend.image[4], expected)


def test_resampled_bar_uses_cell_centres():
    legend = depth_legend((0.0, 30.0), cmap="viridis", n_colours=10)
    t = (np.arange(10) + 0.5) / 10
    expected = np.rint(matplotlib.colormaps["viridis"](t)[:, :3] * 255).astype(np.uint8)
    np.testing.assert_array_equal(legend.image[0], expected)


def test_vertical_and_positions():
    legend = depth_legend((5.0, 45.0), orientation="vertical", n_colours=200, height=7)
    assert legend.image.shape == (200, 7, 3)
    assert legend.tick_depths_um == (10.0, 20.0, 30.0, 40.0)
    np.testing.assert_allclose(legend.tick_fractions, [0.125, 0.375, 0.625, 0.875])
    np.testing.assert_allclose(legend.tick_positions, [25, 75, 125, 175])


def test_from_result_uses_its_table_and_range():
    stack = np.zeros((8, 3, 3), np.uint16)
    stack[5, 1, 1] = 100
    table = np.array([[0.0, 0.0, 1.0], [1.0, 0.0, 0.0]])
    result = depth_coded_projection(stack, z_step=2.0, cmap=table, clim=(0, 100))
    legend = depth_legend(result, n_colours=4)
    assert isinstance(legend, DepthLegend)
    assert legend.depth_range == result.depth_range == (0.0, 14.0)
    np.testing.assert_array_equal(legend.lut, table)
    np.testing.assert_array_equal(legend.image[0], [[0, 0, 255], [0, 0, 255], [255, 0, 0], [255, 0, 0]])
    # an explicit cmap replaces the result's table
    assert depth_legend(result, cmap="magma").lut.shape == (256, 3)


def test_viridis_lightness_monotonic():
    skimage_color = pytest.importorskip("skimage.color")
    legend = depth_legend((0.0, 10.0), cmap="viridis")
    lab = skimage_color.rgb2lab(legend.image[:1].astype(np.float64) / 255)
    assert np.all(np.diff(lab[0, :, 0]) >= -0.3)  # uint8 rounding allowed


@pytest.mark.parametrize(
    "kwargs, name",
    [
        (dict(result_or_depth_range=(3.0, 3.0)), "result_or_depth_range"),
        (dict(result_or_depth_range=(5.0, 1.0)), "result_or_depth_range"),
        (dict(result_or_depth_range="deep"), "result_or_depth_range"),
        (dict(result_or_depth_range=(0.0, 1.0), cmap="rainbowish"), "cmap"),
        (dict(result_or_depth_range=(0.0, 1.0), orientation="diagonal"), "orientation"),
        (dict(result_or_depth_range=(0.0, 1.0), n_colours=1), "n_colours"),
        (dict(result_or_depth_range=(0.0, 1.0), height=0), "height"),
    ],
)
def test_errors_name_the_parameter(kwargs, name):
    first = kwargs.pop("result_or_depth_range")
    with pytest.raises(ParameterError) as info:
        depth_legend(first, **kwargs)
    assert str(info.value).startswith(name) and "expected" in str(info.value)
