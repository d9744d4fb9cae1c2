"""The compiled occlusion loops against a plain numpy emission-absorption recursion.

Outside references:

* emission-absorption with piecewise-constant segments: a segment of
  extinction ``sigma`` and thickness ``d`` has opacity ``a = 1 - exp(-sigma d)``
  and, with source term equal to its colour ``c``, adds ``c a`` in front of
  what lies behind it, which it dims by ``1 - a`` -- N. Max, "Optical models
  for direct volume rendering", IEEE TVCG 1(2):99-108, 1995,
  doi:10.1109/2945.468400 (confirmed);
* front-to-back order of that recursion, ``C += T a c, T *= 1 - a`` --
  M. Levoy, IEEE CG&A 8(3):29-37, 1988 (formula confirmed);
* ``numpy.expm1`` (``exp(x) - 1`` accurate near 0) and ``numpy.moveaxis`` --
  numpy documentation; ``matplotlib.colormaps`` -- matplotlib documentation.

The kernels fold eight slices at a time (four with the range-reduced opacity,
one at a time at the end of a block) with a fitted polynomial opacity for
thin slices; the stacks below have slice counts below, at and between
multiples of eight and optical depths in each opacity regime (cubic,
quartic, range-reduced), so that every loop is compared with the recursion.
"""

from __future__ import annotations

import matplotlib
import numpy as np
import pytest

from viewer_plugin.kernels import projection as P
from viewer_plugin.kernels.projection import _compiled as nb

LIMITS = (40.0, 900.0)
#: Optical depth of one fully bright slice: cubic, quartic and range-reduced opacity.
KAPPAS = [0.09, 0.3, 1.3]
SEEDS = [3, 17, 29, 101]
#: float32 result: a few units of float32 rounding relative, and of 1e-7 absolute.
RTOL, ATOL = 2e-6, 2e-7


def emission_absorption(stack, lo, hi, kappa, reverse=False, colours=None):
    """Max (1995) recursion over slices in float64, depth on axis 0; colours (n, 3) or None."""
    u = np.clip((np.asarray(stack, np.float64) - lo) / (hi - lo), 0.0, 1.0)
    u = np.where(np.isnan(u), 0.0, u)  # NaN: no signal
    extra = () if colours is None else (3,)
    colour = np.zeros(u.shape[1:] + extra)
    light = np.ones(u.shape[1:])  # transmittance to the viewer
    for z in (range(len(u) - 1, -1, -1) if reverse else range(len(u))):
        alpha = -np.expm1(-kappa * u[z])  # 1 - exp(-sigma d), sigma = density * u
        emitted = alpha * u[z]
        if colours is None:
            colour += light * emitted
        else:
            colour += (light * emitted)[..., None] * colours[z]
        light *= 1.0 - alpha
    return colour


def phantom(dtype, shape, seed):
    """Random stack: sparse bright blobs on a dim background, NaN holes in float data."""
    rng = np.random.default_rng(seed)
    values = rng.gamma(1.5, 120.0, size=shape)
    bright = rng.random(shape) < 0.05
    values[bright] = rng.uniform(500, 1200, size=int(bright.sum()))
    if np.dtype(dtype).kind == "f":
        stack = values.astype(dtype)
        stack[rng.random(shape) < 0.02] = np.nan
        return stack
    top = np.iinfo(dtype).max
    return np.clip(np.rint(values * (top / 1200.0 if top < 1200 else 1.0)), 0, top).astype(dtype)


def limits_for(dtype):
    return (10.0, 230.0) if np.dtype(dtype) == np.uint8 else LIMITS


def slice_colours(n, cmap):
    # colour of slice z: cmap(z / (n - 1)) (matplotlib documentation), as depth_colours paints it
    return matplotlib.colormaps[cmap](np.arange(n) / max(n - 1, 1))[:, :3]


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("kappa", KAPPAS)
@pytest.mark.parametrize("n", [5, 8, 13, 16, 29])
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.float32])
def test_grey_equals_recursion(dtype, n, kappa, seed):
    stack = phantom(dtype, (n, 6, 37), seed)
    lo, hi = limits_for(dtype)
    z_step = 0.5
    for view in ("top", "bottom"):
        out = P.occlusion_projection(stack, z_step=z_step, density=kappa / z_step, clim=(lo, hi),
                                     view=view)
        ref = emission_absorption(stack, lo, hi, kappa, reverse=view == "bottom")
        np.testing.assert_allclose(out, ref, rtol=RTOL, atol=ATOL)
        assert out.dtype == np.float32


@pytest.mark.parametrize("seed", SEEDS[:2])
@pytest.mark.parametrize("kappa", KAPPAS)
@pytest.mark.parametrize("n", [7, 16, 21])
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.float32])
def test_colour_equals_recursion(dtype, n, kappa, seed):
    stack = phantom(dtype, (n, 5, 23), seed)
    lo, hi = limits_for(dtype)
    for view in ("top", "bottom"):
        out = P.occlusion_projection(stack, density=kappa, clim=(lo, hi), view=view,
                                     cmap="viridis")
        ref = emission_absorption(stack, lo, hi, kappa, reverse=view == "bottom",
                                  colours=slice_colours(n, "viridis"))
        np.testing.assert_allclose(out, ref, rtol=RTOL, atol=ATOL)
        assert out.shape == (5, 23, 3) and out.dtype == np.float32


@pytest.mark.parametrize("axis", [1, 2, -1])
@pytest.mark.parametrize("dtype", [np.uint16, np.float32])
def test_rays_along_other_axes(dtype, axis):
    stack = phantom(dtype, (6, 19, 11), seed=7)
    lo, hi = LIMITS
    rays_first = np.moveaxis(stack, axis, 0)  # numpy documentation: the ray axis first
    for kappa in KAPPAS:
        out = P.occlusion_projection(stack, density=kappa, clim=(lo, hi), axis=axis)
        np.testing.assert_allclose(out, emission_absorption(rays_first, lo, hi, kappa),
                                   rtol=RTOL, atol=ATOL)
        # colours along the rays when the ray axis is the depth axis (depth_axis not given)
        coloured = P.occlusion_projection(stack, density=kappa, clim=(lo, hi), axis=axis,
                                          cmap="magma", view="bottom")
        n = rays_first.shape[0]
        ref = emission_absorption(rays_first, lo, hi, kappa, reverse=True,
                                  colours=slice_colours(n, "magma"))
        np.testing.assert_allclose(coloured, ref, rtol=RTOL, atol=ATOL)


def test_channel_axis_and_long_stack():
    """A 4-D stack (z, channel, y, x) and 64 slices in blocks of 8 (the benchmark's depth)."""
    stack = phantom(np.uint16, (64, 2, 9, 33), seed=41)
    lo, hi = LIMITS
    out = P.occlusion_projection(stack, clim=(lo, hi))  # default density: kappa = 10 / 64
    for ch in range(2):
        ref = emission_absorption(stack[:, ch], lo, hi, P.DEFAULT_OPTICAL_DEPTH / 64)
        np.testing.assert_allclose(out[ch], ref, rtol=RTOL, atol=ATOL)


@pytest.mark.parametrize("cmap", [None, "viridis"])
@pytest.mark.parametrize("view", ["top", "bottom"])
def test_dask_stack_equals_recursion(view, cmap):
    da = pytest.importorskip("dask.array")
    stack = phantom(np.uint16, (21, 10, 27), seed=53)
    lo, hi = LIMITS
    for chunks in ((5, 10, 27), (8, 4, 27), (21, 10, 9)):
        for kappa in KAPPAS:
            lazy = da.from_array(stack, chunks=chunks)
            out = P.occlusion_projection(lazy, density=kappa, clim=(lo, hi), view=view, cmap=cmap)
            colours = None if cmap is None else slice_colours(21, cmap)
            ref = emission_absorption(stack, lo, hi, kappa, reverse=view == "bottom",
                                      colours=colours)
            np.testing.assert_allclose(out, ref, rtol=RTOL, atol=ATOL)


@pytest.mark.parametrize("kappa", [0.0, 1e-4, 0.005, 0.05, 0.1, nb.CUBIC_DEPTH, 0.2, 0.3,
                                   nb.SERIES_DEPTH])
def test_opacity_polynomial_against_expm1(kappa):
    """The fitted opacity of thin slices: within a few float32 ulp of -expm1(-w) (numpy)."""
    degree, coef = nb.opacity_polynomial(kappa)
    assert degree == (3 if kappa <= nb.CUBIC_DEPTH else 4)
    assert len(coef) == 5 and all(isinstance(c, np.float32) for c in coef)
    w = np.linspace(0.0, kappa, 20001)[1:] if kappa > 0 else np.array([0.0])
    if kappa == 0:
        return
    poly = w * np.polynomial.polynomial.polyval(w, np.array(coef, np.float64))
    exact = -np.expm1(-w)
    # float32 coefficients: at most about one float32 ulp (2**-23) relative, the
    # polynomial's own error below half of that
    assert np.max(np.abs(poly / exact - 1)) < 2.0**-23
