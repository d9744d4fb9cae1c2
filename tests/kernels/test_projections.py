"""Projection kernels against numpy, matplotlib and published formulas.

Outside references used here (see ../shared/REFERENCES.md):

* numpy.max / numpy.argmax (first occurrence on ties) / numpy.nanmax /
  numpy.nanargmax / numpy.percentile ("linear") -- numpy documentation;
* matplotlib.colormaps[name](t) -- matplotlib documentation;
* emission-absorption slab ``I = c (1 - exp(-kappa L))`` -- N. Max, IEEE TVCG
  1(2):99-108, 1995, doi:10.1109/2945.468400 (confirmed);
* front-to-back compositing ``C += T a c, T *= 1 - a`` -- M. Levoy, IEEE CG&A
  8(3):29-37, 1988 (formula confirmed);
* "over" is associative -- T. Porter, T. Duff, SIGGRAPH '84 (confirmed).
"""

from __future__ import annotations

from pathlib import Path

import matplotlib
import numpy as np
import pytest

from viewer_plugin.kernels import Cancelled, ParameterError
from viewer_plugin.kernels import projection as P
from viewer_plugin.kernels.projection import limits, reduction

DTYPES = [np.uint8, np.uint16, np.int16, np.float32, np.float64]
REALDATA = Path(__file__).resolve().parents[2].parent / "shared" / "realdata"


def random_stack(dtype, shape=(9, 7, 11), seed=0, high=None):
    rng = np.random.default_rng(seed)
    dtype = np.dtype(dtype)
    if dtype.kind == "f":
        return (rng.random(shape) * (high or 1000)).astype(dtype)
    top = high or min(np.iinfo(dtype).max, 3000)
    return rng.integers(0, top, size=shape, endpoint=True).astype(dtype)


# --- peak projection: numpy.max / numpy.argmax -------------------------------

@pytest.mark.parametrize("dtype", DTYPES)
def test_peak_projection_equals_numpy(dtype):
    stack = random_stack(dtype)
    result = P.peak_projection(stack)
    # numpy documentation: argmax returns the first occurrence of the maximum
    np.testing.assert_array_equal(result.peak, np.max(stack, axis=0))
    np.testing.assert_array_equal(result.index, np.argmax(stack, axis=0))
    assert result.peak.dtype == stack.dtype
    assert result.index.dtype == np.int16  # compact slice index below 32768 slices
    np.testing.assert_array_equal(result.depth_um, np.argmax(stack, axis=0).astype(np.float32))


def test_peak_projection_ties_uint8():
    # values 0..2 only: most rays have ties; numpy.argmax keeps the first
    stack = random_stack(np.uint8, shape=(12, 20, 16), high=2)
    result = P.peak_projection(stack)
    np.testing.assert_array_equal(result.index, np.argmax(stack, axis=0))
    constant = np.full((5, 3, 4), 7, np.uint8)
    assert np.all(P.peak_projection(constant).index == 0)



def test_peak_projection_beyond_int16_slice_index():
    # 40000 slices: the slice index no longer fits the compact int16 state (numpy.argmax)
    stack = np.zeros((40000, 1, 3), np.uint8)
    stack[39000, 0, 0] = 9
    stack[[5, 35000], 0, 1] = 4  # tie across the int16 range: the first wins
    result = P.peak_projection(stack)
    np.testing.assert_array_equal(result.index, np.argmax(stack, axis=0))
    coded = P.depth_coded_projection(stack, method="tinted", clim=(0, 9), z_step=0.5)
    np.testing.assert_array_equal(coded.depth_um[0, :2], [19500.0, 2.5])
    assert np.isnan(coded.depth_um[0, 2])

def test_peak_projection_nan_is_no_signal():
    stack = random_stack(np.float32, shape=(6, 5, 8), seed=3)
    stack[np.random.default_rng(4).random(stack.shape) < 0.3] = np.nan
    stack[:, 0, 0] = np.nan  # an all-NaN ray
    stack[:, 1, 1] = [np.nan, 2, 5, 5, np.nan, 1]  # tie after NaN
    result = P.peak_projection(stack)
    ok = ~np.all(np.isnan(stack), axis=0)
    # numpy documentation: nanmax / nanargmax ignore NaN
    np.testing.assert_array_equal(result.peak[ok], np.nanmax(stack[:, ok], axis=0))
    np.testing.assert_array_equal(result.index[ok], np.nanargmax(stack[:, ok], axis=0))
    assert np.isnan(result.peak[0, 0]) and result.index[0, 0] == 0
    assert result.index[1, 1] == 2


def test_bool_and_wide_integers():
    rng = np.random.default_rng(5)
    for stack in (rng.random((4, 3, 5)) > 0.5, rng.integers(-2**31, 2**31 - 1, (4, 3, 5))):
        result = P.peak_projection(stack)
        np.testing.assert_array_equal(result.peak, stack.max(axis=0))
        np.testing.assert_array_equal(result.index, stack.argmax(axis=0))
        assert result.peak.dtype == stack.dtype


@pytest.mark.parametrize(
    "shape, axis", [((3, 6, 5, 7), 1), ((6, 3, 5, 7), 0), ((5, 7, 6), 2), ((5, 7, 6), -2),
                    ((2, 3, 6, 5, 4), 2)]
)
def test_any_axis_and_leading_axes_kept(shape, axis):
    stack = random_stack(np.uint16, shape=shape, seed=7)
    expected_shape = tuple(np.delete(shape, axis % len(shape)))
    result = P.peak_projection(stack, axis=axis)
    np.testing.assert_array_equal(result.peak, np.max(stack, axis=axis))
    np.testing.assert_array_equal(result.index, np.argmax(stack, axis=axis))
    coded = P.depth_coded_projection(stack, axis=axis, clim=(100, 2000), method="tinted")
    assert coded.rgb.shape == expected_shape + (3,)
    assert coded.depth_um.shape == expected_shape
    moved = np.moveaxis(stack, axis, 0)
    for method in P.METHODS:
        a = P.depth_coded_projection(stack, axis=axis, clim=(100, 2000), method=method)
        b = P.depth_coded_projection(np.ascontiguousarray(moved), clim=(100, 2000), method=method)
        np.testing.assert_array_equal(a.rgb, b.rgb)
        np.testing.assert_array_equal(a.depth_um, b.depth_um)
    occluded = P.occlusion_projection(stack, axis=axis, clim=(100, 2000))
    assert occluded.shape == expected_shape


def test_input_not_modified():
    stack = random_stack(np.uint16)
    stack.setflags(write=False)
    copy = stack.copy()
    P.peak_projection(stack)
    for method in P.METHODS:
        P.depth_coded_projection(stack, method=method)
    P.occlusion_projection(stack, view="bottom", cmap="magma")
    np.testing.assert_array_equal(stack, copy)


# --- depth-coded projection: matplotlib colour tables ----------------------------

@pytest.mark.parametrize("cmap", ["viridis", "magma", "cividis", "turbo"])
@pytest.mark.parametrize("gamma", [1.0, 0.5])
def test_depth_coded_peak_matches_matplotlib(cmap, gamma):
    stack = random_stack(np.uint16, shape=(13, 17, 19), seed=11)
    lo, hi, z_step = 300.0, 2700.0, 0.7
    result = P.depth_coded_projection(stack, z_step=z_step, cmap=cmap, clim=(lo, hi), gamma=gamma)
    vmax, arg = stack.max(axis=0), stack.argmax(axis=0)
    bright = np.clip((vmax - lo) / (hi - lo), 0, 1) ** gamma
    np.testing.assert_allclose(result.brightness, bright, rtol=2e-6, atol=1e-7)
    signal = vmax > lo
    np.testing.assert_allclose(result.depth_um[signal], (arg * z_step)[signal], rtol=1e-6)
    assert np.all(np.isnan(result.depth_um[~signal]))
    d0, d1 = result.depth_range
    assert (d0, d1) == (0.0, pytest.approx(12 * z_step))
    t = (result.depth_um.astype(np.float64) - d0) / (d1 - d0)
    # matplotlib documentation: Colormap.__call__ on floats in [0, 1]
    colours = matplotlib.colormaps[cmap](np.nan_to_num(t))[..., :3]
    expected = np.where(signal[..., None], colours * result.brightness[..., None], 0)
    np.testing.assert_allclose(result.rgb, expected, rtol=1e-6, atol=1e-7)
    np.testing.assert_array_equal(result.lut, matplotlib.colormaps[cmap](np.arange(256))[:, :3])
    assert result.rgb.dtype == np.float32 and result.rgb.min() >= 0 and result.rgb.max() <= 1


def test_depth_range_clips_colours_and_array_cmap():
    stack = np.zeros((5, 1, 5), np.uint8)
    for z in range(5):
        stack[z, 0, z] = 200
    table = np.array([[1.0, 0, 0], [0, 1.0, 0], [0, 0, 1.0]])
    result = P.depth_coded_projection(stack, z_step=1.0, cmap=table, depth_range=(1.0, 3.0),
                                      clim=(0, 200))
    # depths 0..4 um; range 1..3 um in three cells, clipped at both ends (floor(t * N))
    expected = np.array([[1, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [0, 0, 1]], np.float32)
    np.testing.assert_array_equal(result.rgb[0], expected)


def test_weighted_depth_against_numpy_formula():
    """Weights are the signal above the background floor, whatever the display limits.

    The weighted mean depth sum(w z) / sum(w) written in numpy with w = max(I - floor, 0); the
    floor is background level + 3 SD of the Poisson(100) background (mean 100, SD 10: about 130,
    Poisson variance = mean, textbook).
    """
    rng = np.random.default_rng(13)
    stack = rng.poisson(100, size=(10, 12, 14)).astype(np.float32)
    stack[:, 3:9, 2:12] += rng.random((10, 6, 10)).astype(np.float32) * 800
    lo, hi, z_step = 200.0, 900.0, 1.5
    result = P.depth_coded_projection(stack, z_step=z_step, method="weighted", clim=(lo, hi),
                                      cmap="viridis")
    floor = result.weight_floor
    assert floor == pytest.approx(130.0, abs=6.0)
    w = np.maximum(stack.astype(np.float64) - floor, 0)
    z = np.arange(10)[:, None, None]
    with np.errstate(invalid="ignore"):
        depth = (w * z).sum(0) / w.sum(0) * z_step
    np.testing.assert_allclose(result.depth_um, depth, rtol=1e-5)
    bright = np.clip((stack.max(0) - lo) / (hi - lo), 0, 1)
    np.testing.assert_allclose(result.brightness, bright, rtol=1e-6, atol=1e-7)
    t = (result.depth_um.astype(np.float64) - 0.0) / (9 * z_step)
    colours = matplotlib.colormaps["viridis"](np.nan_to_num(t))[..., :3]
    expected = np.where(np.isnan(t)[..., None], 0, colours * bright[..., None])
    np.testing.assert_allclose(result.rgb, expected, rtol=1e-6, atol=1e-7)
    # other display limits change brightness only, never the depth
    other = P.depth_coded_projection(stack, z_step=z_step, method="weighted", clim=(0.0, 3000.0))
    np.testing.assert_array_equal(other.depth_um, result.depth_um)


def test_weighted_thick_fibre_centre():
    # a symmetric bright band over slices 3..7 has its weighted depth at slice 5
    stack = np.zeros((11, 2, 2), np.uint16)
    stack[3:8] = [[1000]]
    stack[4:7] = [[2000]]
    result = P.depth_coded_projection(stack, z_step=2.0, method="weighted", clim=(0, 2000))
    np.testing.assert_allclose(result.depth_um, 10.0)


def test_weighted_default_floor_ignores_background():
    # noisy background everywhere, one fibre at slice 3 of 40: with the default limits the
    # weighted depth is the fibre's, not pulled to mid-stack by the background
    rng = np.random.default_rng(53)
    stack = rng.poisson(100, size=(40, 32, 32)).astype(np.uint16)
    stack[2:5, 10:14, :] += np.array([300, 600, 300], np.uint16)[:, None, None]
    result = P.depth_coded_projection(stack, method="weighted")
    np.testing.assert_allclose(result.depth_um[10:14], 3.0, atol=0.3)
    assert result.clim[0] > np.percentile(stack, 0.1)


@pytest.mark.parametrize("gamma", [1.0, 0.6])
def test_tinted_against_numpy_formula(gamma):
    """Slices tinted by depth, channel-wise maximum, then the upper limit on the whole pixel.

    Without saturation: max_z colour_z * u_z**gamma (matplotlib colours). With it (this stack
    has values above hi), u is not clipped before the maximum: the pixel is divided by
    max(1, u_max)**gamma afterwards, which keeps its hue.
    """
    stack = random_stack(np.uint16, shape=(8, 9, 10), seed=17)
    lo, hi, z_step = 500.0, 2500.0, 0.4
    result = P.depth_coded_projection(stack, z_step=z_step, method="tinted", clim=(lo, hi),
                                      gamma=gamma, cmap="plasma")
    u = np.maximum((stack - lo) / (hi - lo), 0)
    per_pixel = 1 / np.maximum(1, u.max(0))
    t = np.arange(8) * z_step / (7 * z_step)
    colours = matplotlib.colormaps["plasma"](t)[:, :3]  # matplotlib documentation
    expected = np.max(colours[:, None, None, :] * ((u * per_pixel)[..., None]) ** gamma, axis=0)
    np.testing.assert_allclose(result.rgb, expected, rtol=2e-5, atol=2e-6)
    assert np.all(result.rgb <= result.brightness[..., None] + 1e-6)
    unsaturated = P.depth_coded_projection(stack, z_step=z_step, method="tinted",
                                           clim=(lo, 3000.0), gamma=gamma, cmap="plasma")
    u = np.clip((stack - lo) / (3000.0 - lo), 0, 1) ** gamma
    np.testing.assert_allclose(unsaturated.rgb, np.max(colours[:, None, None, :] * u[..., None], 0),
                               rtol=2e-5, atol=2e-6)



def test_depth_colours_match_matplotlib_and_validate():
    # matplotlib documentation: Colormap(t) for t = depth / deepest depth
    colours = P.depth_colours(8, z_step=0.4, cmap="plasma")
    np.testing.assert_allclose(colours, matplotlib.colormaps["plasma"](np.arange(8) / 7)[:, :3])
    assert colours.shape == (8, 3) and colours.dtype == np.float64
    with pytest.raises(ParameterError, match="n_slices"):
        P.depth_colours(0)
    with pytest.raises(ParameterError, match="depth_range"):
        P.depth_colours(4, depth_range=(3.0, 1.0))


def test_display_limits_are_the_projections_defaults():
    stack = random_stack(np.uint16, shape=(9, 20, 24), seed=59)
    limits = P.display_limits(np.moveaxis(stack, 0, 2), axis=2)
    assert limits == P.depth_coded_projection(stack).clim
    np.testing.assert_array_equal(P.occlusion_projection(stack),
                                  P.occlusion_projection(stack, clim=limits))
    with pytest.raises(ParameterError, match="stack"):
        P.display_limits(np.zeros((4, 4)))

def test_tinted_keeps_crossing_fibres():
    # two fibres crossing at different depths: both colours survive at the crossing
    stack = np.zeros((10, 9, 9), np.uint16)
    stack[1, 4, :] = 1000
    stack[8, :, 4] = 1000
    result = P.depth_coded_projection(stack, method="tinted", clim=(0, 1000), cmap="viridis")
    lut = matplotlib.colormaps["viridis"]
    np.testing.assert_allclose(result.rgb[4, 4], np.maximum(lut(1 / 9)[:3], lut(8 / 9)[:3]),
                               rtol=1e-6)


def test_default_limits_from_percentiles():
    stack = random_stack(np.uint16, shape=(6, 20, 30), seed=19)
    result = P.depth_coded_projection(stack)
    # the subsample is the whole stack when it is small
    assert result.clim == pytest.approx(tuple(np.percentile(stack, [0.1, 99.9])))
    assert result.depth_range == (0.0, 5.0)


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.float32, np.float64])
def test_percentiles_from_sample_equals_numpy(dtype):
    sample = random_stack(dtype, shape=(1001,), seed=23, high=200).astype(dtype)
    got = limits.percentiles_from_sample(sample, (0.1, 99.9))
    # numpy documentation: percentile, method "linear"
    assert got == pytest.approx(tuple(np.percentile(sample, [0.1, 99.9])), rel=1e-12)


def test_percentiles_ignore_nan_and_constant_stack():
    sample = np.array([np.nan, 1.0, 2.0, np.inf, 3.0])
    assert limits.percentiles_from_sample(sample, (0, 100)) == (1.0, 3.0)
    flat = np.full((4, 5, 6), 9, np.uint16)
    result = P.depth_coded_projection(flat)
    assert result.clim == (9.0, 10.0)
    assert np.all(np.isnan(result.depth_um)) and np.all(result.rgb == 0)


def test_large_stack_limits_estimated_from_subsample():
    stack = random_stack(np.uint16, shape=(40, 256, 256), seed=29)
    low, high = limits.estimate_clim(stack)
    exact = np.percentile(stack, [0.1, 99.9])
    assert abs(low - exact[0]) < 0.01 * 3000 and abs(high - exact[1]) < 0.01 * 3000


# --- occlusion projection: Max 1995 closed form, Levoy compositing -----------------

@pytest.mark.parametrize("n", [1, 4, 37])
@pytest.mark.parametrize("dtype", [np.uint16, np.float64])
@pytest.mark.parametrize("view", ["top", "bottom"])
def test_homogeneous_slab_closed_form(n, dtype, view):
    """Max 1995: a slab of colour u, extinction density*u, thickness L gives u(1 - e^(-density u L))."""
    thickness, density, value = 12.0, 0.15, 600
    lo, hi = 0.0, 1000.0
    u = value / hi
    stack = np.full((n, 2, 3), value, dtype)
    out = P.occlusion_projection(stack, z_step=thickness / n, density=density, clim=(lo, hi), view=view)
    np.testing.assert_allclose(out, u * (1 - np.exp(-density * u * thickness)), rtol=1e-6)
    assert out.dtype == np.float32


def reference_composite(stack, lo, hi, kappa, reverse=False, colours=None):
    """Front-to-back compositing written plainly (Levoy 1988)."""
    u = np.clip((stack.astype(np.float64) - lo) / (hi - lo), 0, 1)
    u = np.nan_to_num(u)
    order = range(len(u))[::-1] if reverse else range(len(u))
    c = np.zeros(u.shape[1:] + ((3,) if colours is not None else ()))
    t = np.ones(u.shape[1:])
    for z in order:
        a = 1 - np.exp(-kappa * u[z])
        emit = a * u[z]
        c += (t * emit)[..., None] * colours[z] if colours is not None else t * emit
        t *= 1 - a
    return c


@pytest.mark.parametrize("dtype", DTYPES)
@pytest.mark.parametrize("view", ["top", "bottom"])
def test_occlusion_against_plain_compositing(dtype, view):
    stack = random_stack(dtype, shape=(15, 8, 9), seed=31)
    lo, hi, density, z_step = 50.0, 800.0, 0.3, 0.8
    out = P.occlusion_projection(stack, z_step=z_step, density=density, clim=(lo, hi), view=view)
    ref = reference_composite(stack, lo, hi, density * z_step, reverse=view == "bottom")
    np.testing.assert_allclose(out, ref, rtol=1e-5, atol=1e-6)
    assert out.dtype == np.float32


@pytest.mark.parametrize("dtype", [np.uint8, np.float32])
def test_occlusion_rgb_variant(dtype):
    stack = random_stack(dtype, shape=(12, 6, 7), seed=37)
    lo, hi, density = 20.0, 200.0, 0.5
    out = P.occlusion_projection(stack, density=density, clim=(lo, hi), cmap="inferno", view="bottom")
    colours = matplotlib.colormaps["inferno"](np.arange(12) / 11)[:, :3]  # matplotlib documentation
    ref = reference_composite(stack, lo, hi, density, reverse=True, colours=colours)
    np.testing.assert_allclose(out, ref, rtol=1e-5, atol=1e-6)
    assert out.shape == (6, 7, 3) and out.dtype == np.float32


@pytest.mark.parametrize("dtype", [np.uint16, np.float32])
@pytest.mark.parametrize("view", ["top", "bottom"])
@pytest.mark.parametrize("cmap", [None, "viridis"])
def test_occlusion_optically_thick_slices(dtype, view, cmap):
    """Levoy 1988 compositing, slices of optical depth up to 1.6 (not the short series)."""
    stack = random_stack(dtype, shape=(15, 8, 9), seed=71)
    lo, hi, density, z_step = 50.0, 800.0, 2.0, 0.8
    out = P.occlusion_projection(stack, z_step=z_step, density=density, clim=(lo, hi), view=view,
                                 cmap=cmap)
    colours = None if cmap is None else matplotlib.colormaps[cmap](np.arange(15) / 14)[:, :3]
    ref = reference_composite(stack, lo, hi, density * z_step, reverse=view == "bottom",
                              colours=colours)
    np.testing.assert_allclose(out, ref, rtol=1e-5, atol=1e-6)


def test_occlusion_default_density():
    stack = np.full((20, 2, 2), 1.0)
    out = P.occlusion_projection(stack, z_step=0.5, clim=(0, 1))
    # density = DEFAULT_OPTICAL_DEPTH / depth: a fully bright column reaches 1 - e^-10
    np.testing.assert_allclose(out, 1 - np.exp(-P.DEFAULT_OPTICAL_DEPTH), rtol=1e-6)


def test_occlusion_front_hides_back():
    stack = np.zeros((10, 1, 1), np.float32)
    stack[:5] = 0.3
    stack[5:] = 0.9
    top = P.occlusion_projection(stack, density=50.0, clim=(0, 1))
    bottom = P.occlusion_projection(stack, density=50.0, clim=(0, 1), view="bottom")
    assert top[0, 0] == pytest.approx(0.3, rel=1e-4)
    assert bottom[0, 0] == pytest.approx(0.9, rel=1e-4)


# --- chunk -> combine -> aggregate ------------------------------------------------

@pytest.fixture
def tiny_chunks(monkeypatch):
    """Chunks of one or a few planes, to exercise the combine path."""
    monkeypatch.setattr(reduction, "CHUNK_BYTES", 3 * 7 * 11 * 2)
    monkeypatch.setattr(reduction, "COPY_CHUNK_BYTES", 2 * 7 * 11 * 4)


def test_chunked_integer_rays_of_zeros_and_ties(tiny_chunks):
    # numpy.argmax: all-zero rays give 0, ties across chunk borders keep the first slice
    stack = random_stack(np.uint8, shape=(10, 7, 11), seed=43, high=3)
    stack[:, 0, 0] = 0
    stack[:, 1, 1] = [0, 0, 0, 2, 2, 2, 2, 2, 0, 2]
    result = P.peak_projection(stack)
    np.testing.assert_array_equal(result.index, np.argmax(stack, axis=0))
    for method in ("peak", "tinted"):
        coded = P.depth_coded_projection(stack, method=method, clim=(0, 3))
        expected = np.where(stack.max(0) > 0, np.argmax(stack, axis=0), np.nan)
        np.testing.assert_array_equal(coded.depth_um, expected.astype(np.float32))

@pytest.mark.parametrize("dtype", [np.uint16, np.int16, np.float64])
def test_chunked_equals_one_chunk(dtype, tiny_chunks, monkeypatch):
    stack = random_stack(dtype, shape=(10, 7, 11), seed=41)
    calls = []
    chunked = [
        P.peak_projection(stack, progress=lambda d, t: calls.append((d, t))),
        *(P.depth_coded_projection(stack, method=m, clim=(100, 900)) for m in P.METHODS),
        P.occlusion_projection(stack, clim=(100, 900), view="bottom", cmap="viridis"),
    ]
    assert len(calls) > 3 and calls[-1][0] == calls[-1][1]
    monkeypatch.setattr(reduction, "CHUNK_BYTES", 2**40)
    monkeypatch.setattr(reduction, "COPY_CHUNK_BYTES", 2**40)
    whole = [
        P.peak_projection(stack),
        *(P.depth_coded_projection(stack, method=m, clim=(100, 900)) for m in P.METHODS),
        P.occlusion_projection(stack, clim=(100, 900), view="bottom", cmap="viridis"),
    ]
    np.testing.assert_array_equal(chunked[0].peak, whole[0].peak)
    np.testing.assert_array_equal(chunked[0].index, whole[0].index)
    for a, b in zip(chunked[1:4], whole[1:4]):
        if a.method == "weighted":  # sums regrouped by chunk: equal to rounding
            np.testing.assert_allclose(a.rgb, b.rgb, rtol=1e-6, atol=1e-7)
        else:
            np.testing.assert_array_equal(a.rgb, b.rgb)
        np.testing.assert_allclose(a.depth_um, b.depth_um, rtol=1e-6)
    np.testing.assert_allclose(chunked[4], whole[4], rtol=1e-6, atol=1e-7)


def test_dask_input_equals_numpy():
    da = pytest.importorskip("dask.array")
    stack = random_stack(np.uint16, shape=(12, 9, 10), seed=43)
    lazy = da.from_array(stack, chunks=(5, 9, 10))
    a, b = P.peak_projection(lazy), P.peak_projection(stack)
    np.testing.assert_array_equal(a.peak, b.peak)
    np.testing.assert_array_equal(a.index, b.index)
    c, d = P.depth_coded_projection(lazy), P.depth_coded_projection(stack)
    assert c.clim == d.clim
    np.testing.assert_array_equal(c.rgb, d.rgb)
    np.testing.assert_allclose(P.occlusion_projection(lazy, view="bottom"),
                               P.occlusion_projection(stack, view="bottom"), rtol=1e-6)
    per_plane = da.from_array(stack, chunks=(1, 9, 10))  # small chunks are grouped
    calls = []
    f = P.peak_projection(per_plane, progress=lambda d, t: calls.append(t))
    np.testing.assert_array_equal(f.index, b.index)
    assert calls[-1] < 12
    lazy4 = da.from_array(np.stack([stack, stack[::-1]]), chunks=(1, 4, 9, 10))
    e = P.peak_projection(lazy4, axis=1)
    np.testing.assert_array_equal(e.index[0], b.index)


def partials_of(stack, n_parts, kind):
    """Partial results of consecutive z-ranges from the compiled chunk step."""
    from viewer_plugin.kernels.projection import _compiled as nb

    bounds = np.linspace(0, len(stack), n_parts + 1).astype(int)
    out = []
    for start, stop in zip(bounds[:-1], bounds[1:]):
        block = np.ascontiguousarray(stack[start:stop])
        shape = stack.shape[1:]
        if kind == "peak":
            vals, idx = np.full(shape, np.nan, stack.dtype), np.full(shape, -1, np.int32)
            nb.peak_update(block, start, vals, idx)
            out.append((vals, idx))
        elif kind == "weighted":
            vals, su, suz = np.full(shape, np.nan, stack.dtype), np.zeros(shape), np.zeros(shape)
            nb.weighted_update(block, start, 0.2, 1 / 0.6, vals, su, suz)
            out.append((vals, su, suz))
        elif kind == "tinted":
            vals, idx = np.full(shape, np.nan, stack.dtype), np.full(shape, -1, np.int32)
            tint = np.zeros((3,) + shape, np.float32)
            colours = matplotlib.colormaps["viridis"](np.linspace(0, 1, len(stack)))[:, :3]
            nb.tinted_update(block, start, 0.2, 1 / 0.6, colours, vals, idx, tint)
            out.append((vals, idx, tint))
        else:
            colour, trans = np.zeros(shape), np.ones(shape)
            nb.occlusion_update(block, 0.2, 1 / 0.6, 0.7, False, False, colour, trans)
            out.append((colour, trans))
    return out


COMBINE = {"peak": reduction.combine_peak, "weighted": reduction.combine_weighted,
           "tinted": reduction.combine_tinted, "blend": reduction.over}


@pytest.mark.parametrize("kind", list(COMBINE))
def test_combine_is_associative_and_matches_one_chunk(kind):
    """Porter & Duff 1984: "over" is associative; so are the max/argmax and sum merges."""
    rng = np.random.default_rng(47)
    stack = rng.random((12, 5, 6))
    stack[rng.random(stack.shape) < 0.2] = np.nan
    stack[:, 0, 0] = np.nan
    stack[3:9, 1, 1] = 0.5  # ties across chunk borders
    combine = COMBINE[kind]
    a, b, c = partials_of(stack, 3, kind)
    left = combine(combine(a, b), c)
    right = combine(a, combine(b, c))
    (whole,) = partials_of(stack, 1, kind)
    for x, y, w in zip(left, right, whole):
        np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-7)
        np.testing.assert_allclose(x, w, rtol=1e-6, atol=1e-7)


def test_over_operator_worked_example():
    # Porter & Duff: C = Ca + (1 - alpha_a) Cb, alpha = alpha_a + (1 - alpha_a) alpha_b
    front = (np.array(0.3), np.array(1 - 0.5))
    back = (np.array(0.6), np.array(1 - 0.8))
    colour, trans = reduction.over(front, back)
    assert float(colour) == pytest.approx(0.3 + 0.5 * 0.6)
    assert 1 - float(trans) == pytest.approx(0.5 + 0.5 * 0.8)


# --- progress, cancel, warm-up ----------------------------------------------------

def test_progress_and_cancel(tiny_chunks):
    stack = random_stack(np.uint16, shape=(10, 7, 11))
    seen = []
    P.occlusion_projection(stack, progress=lambda d, t: seen.append((d, t)))
    assert seen[0][0] == 0 and [d for d, _ in seen] == list(range(len(seen)))

    def stop(done, total):
        if done == 2:
            raise Cancelled

    for call in (lambda: P.peak_projection(stack, progress=stop),
                 lambda: P.depth_coded_projection(stack, progress=stop),
                 lambda: P.occlusion_projection(stack, progress=stop)):
        with pytest.raises(Cancelled):
            call()


def test_warm_up_runs():
    assert P.warm_up() is None


# --- dtypes ----------------------------------------------------------------------

@pytest.mark.parametrize("dtype", DTYPES)
def test_output_dtypes(dtype):
    stack = random_stack(dtype, shape=(5, 4, 6))
    assert P.peak_projection(stack).peak.dtype == dtype
    for method in P.METHODS:
        result = P.depth_coded_projection(stack, method=method)
        for name in ("rgb", "depth_um", "brightness"):
            assert getattr(result, name).dtype == np.float32, (method, name)
        assert 0 <= result.brightness.min() and result.brightness.max() <= 1
        assert 0 <= result.rgb.min() and result.rgb.max() <= 1
    assert P.occlusion_projection(stack).dtype == np.float32


# --- errors -----------------------------------------------------------------------

ERRORS = [
    (lambda s: P.peak_projection(s[0]), "stack"),
    (lambda s: P.peak_projection(np.zeros((3, 0, 4))), "stack"),
    (lambda s: P.peak_projection(s.astype(complex)), "stack"),
    (lambda s: P.peak_projection(s, axis=3), "axis"),
    (lambda s: P.depth_coded_projection(s, clim=(5, 5)), "clim"),
    (lambda s: P.depth_coded_projection(s, clim=(9, 2)), "clim"),
    (lambda s: P.depth_coded_projection(s, depth_range=(3.0, 1.0)), "depth_range"),
    (lambda s: P.depth_coded_projection(s, cmap="no-such-map"), "cmap"),
    (lambda s: P.depth_coded_projection(s, cmap=np.zeros((4, 2))), "cmap"),
    (lambda s: P.depth_coded_projection(s, cmap=np.full((4, 3), 2.0)), "cmap"),
    (lambda s: P.depth_coded_projection(s, method="deepest"), "method"),
    (lambda s: P.depth_coded_projection(s, z_step=0), "z_step"),
    (lambda s: P.depth_coded_projection(s, gamma=-1), "gamma"),
    (lambda s: P.occlusion_projection(s, density=-0.1), "density"),
    (lambda s: P.occlusion_projection(s, view="side"), "view"),
    (lambda s: P.occlusion_projection(s, clim=(1, 1)), "clim"),
    (lambda s: P.occlusion_projection(s, cmap="nope"), "cmap"),
    (lambda s: P.occlusion_projection(s, z_step=-1.0), "z_step"),
]


@pytest.mark.parametrize("call, name", ERRORS)
def test_errors_name_the_parameter(call, name):
    stack = random_stack(np.uint8, shape=(3, 4, 5))
    with pytest.raises(ParameterError) as info:
        call(stack)
    message = str(info.value)
    assert message.startswith(f"{name}") and "expected" in message and ", got " in message


# --- real data ----------------------------------------------------------------------

@pytest.mark.realdata
def test_peak_projection_on_real_golgi_stack():
    """Open dataset: Golgi, Airyscan, CC BY 4.0, (c) NEUBIAS (training-resources repository)."""
    path = REALDATA / "golgi_airyscan.ome.tif"
    if not path.exists():
        pytest.skip(f"open dataset not found at {path} (shared/realdata beside the repository)")
    tifffile = pytest.importorskip("tifffile")
    stack = tifffile.imread(path)
    assert stack.ndim == 3
    result = P.peak_projection(stack)
    np.testing.assert_array_equal(result.peak, np.max(stack, axis=0))
    np.testing.assert_array_equal(result.index, np.argmax(stack, axis=0))
    coded = P.depth_coded_projection(stack, z_step=0.3876)
    assert np.nanmax(coded.depth_um) <= 24 * 0.3876 + 1e-4
