"""The colour model of the depth-coded images: colour carries depth only, brightness signal only.

Outside references (see ../shared/REFERENCES.md, "Colour that carries depth only"):

* CIELAB L* (CIE 1976) computed with ``skimage.color.rgb2lab`` (scikit-image, reference library);
* isoluminant maps CET-I1/I2/I3 have constant L* -- P. Kovesi, "Good colour maps: how to
  design them", arXiv:1509.03700, 2015; the ``colorcet`` package (confirmed, measured);
* colour-vision deficiency simulated as in Machado, Oliveira & Fernandes, IEEE TVCG
  15(6):1291-1298, 2009, through ``colorspacious`` (cvd_type "deuteranomaly", severity 100 =
  deuteranopia); distances in CAM02-UCS; CET-I1's ends 43.9 apart (measured);
* viridis runs from L* 14.9 to 90.9 (matplotlib's map through rgb2lab, measured);
* a symmetric object's depth is its centre (symmetry; the phantoms below know their centre);
* numpy for the saturated fraction (count of maxima above the upper limit).
"""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin.kernels import ParameterError
from viewer_plugin.kernels import projection as P

skimage_color = pytest.importorskip("skimage.color")
colorspacious = pytest.importorskip("colorspacious")


def lightness(rgb):
    """CIELAB L* of sRGB colours in [0, 1] (skimage.color.rgb2lab, CIE 1976)."""
    rgb = np.asarray(rgb, dtype=np.float64)
    return skimage_color.rgb2lab(rgb.reshape(1, -1, 3))[0, :, 0].reshape(rgb.shape[:-1])


# --- lightness: two equally bright fibres at the first and last slice ----------------------

def two_fibres(n=40, value=1000):
    stack = np.full((n, 24, 24), 100, np.uint16)
    stack[0, 4:8, :] = value       # the first slice
    stack[n - 1, 16:20, :] = value  # the last slice, equally bright
    return stack


@pytest.mark.parametrize("method", ["peak", "weighted", "tinted"])
@pytest.mark.parametrize("upper", [1000.0, 2000.0, 5000.0])  # brightness 1, about 0.47, 0.18
def test_equally_bright_fibres_equally_light_with_the_default_map(method, upper):
    """CIELAB L* within 3 units for the default map, at full and reduced brightness."""
    result = P.depth_coded_projection(two_fibres(), method=method, clim=(100.0, upper))
    shallow, deep = result.rgb[6, 12], result.rgb[18, 12]
    assert result.brightness[6, 12] == pytest.approx(result.brightness[18, 12])
    assert abs(lightness(shallow) - lightness(deep)) <= 3.0


def test_viridis_makes_the_same_fibres_unequally_light():
    """The issue this model fixes: viridis's own L* (14.9 -> 90.9) becomes the fibres' lightness."""
    result = P.depth_coded_projection(two_fibres(), clim=(100.0, 1000.0), cmap="viridis")
    gap = lightness(result.rgb[18, 12]) - lightness(result.rgb[6, 12])
    assert gap == pytest.approx(90.9 - 14.9, abs=1.5)  # REFERENCES: viridis L* (measured)


@pytest.mark.parametrize("name", sorted({P.DEFAULT_CMAP, *P.CONSTANT_LIGHTNESS}))
def test_constant_lightness_maps_along_the_key(name):
    """L* along the depth axis of the key (full brightness) varies by at most 3."""
    key = P.depth_legend((0.0, 60.0), cmap=name, brightness_steps=8)
    brightest = key.image[-1].astype(np.float64) / 255.0
    values = lightness(brightest)
    assert values.max() - values.min() <= 3.0
    # Kovesi 2015 / colorcet: CET-I1 and CET-I3 at L* 70, CET-I2 at 79-80 (measured)
    expected = {"CET-I1": 70.0, "CET-I3": 70.0, "CET-I2": 79.5}[name]
    assert values.mean() == pytest.approx(expected, abs=1.5)


def test_default_map_distinguishable_under_deuteranopia():
    """Machado et al. 2009 deuteranopia: the ends stay >= 20 CAM02-UCS apart (CET-I1: 43.9)."""
    lut = P.depth_colours(2, cmap=P.DEFAULT_CMAP)  # the first and last depth: the two ends
    deuteranopia = {"name": "sRGB1+CVD", "cvd_type": "deuteranomaly", "severity": 100}
    seen = np.clip(colorspacious.cspace_convert(lut, deuteranopia, "sRGB1"), 0, 1)
    ucs = colorspacious.cspace_convert(seen, "sRGB1", "CAM02-UCS")
    distance = float(np.linalg.norm(ucs[0] - ucs[1]))
    assert distance >= 20.0
    assert distance == pytest.approx(43.9, abs=0.3)  # REFERENCES: CET-I1 ends (measured)


def test_matplotlib_names_keep_matplotlib_maps_and_cet_names_colorcet():
    import colorcet
    import matplotlib

    np.testing.assert_array_equal(P.depth_colours(256, cmap="viridis"),
                                  matplotlib.colormaps["viridis"](np.arange(256) / 255)[:, :3])
    cet = colorcet.cm["CET_I1"]
    np.testing.assert_allclose(P.depth_colours(256, cmap="CET-I1"),
                               cet(np.arange(256) / 255)[:, :3])


# --- the two-dimensional key ---------------------------------------------------------------

@pytest.mark.parametrize("gamma", [1.0, 0.5, 2.0])
@pytest.mark.parametrize("orientation", ["horizontal", "vertical"])
def test_key_pixel_is_what_the_projection_renders(gamma, orientation):
    """Key pixel (depth d, brightness b) == the projection of one voxel at depth d, signal b.

    One voxel per (slice, level) on a dark stack; the key is read at the cell that holds the
    slice's depth and at the row of the level. Both images as uint8 (what is displayed).
    """
    n, steps, lo, hi = 16, 5, 0.0, 1000.0
    levels = np.linspace(0, 1, steps)
    stack = np.zeros((n, steps, n), np.uint16)
    for z in range(n):
        stack[z, :, z] = np.rint(lo + levels * (hi - lo)).astype(np.uint16)
    result = P.depth_coded_projection(stack, z_step=0.75, clim=(lo, hi), gamma=gamma,
                                      cmap="CET-I3")
    key = P.depth_legend(result, brightness_steps=steps, orientation=orientation)
    image = key.image if orientation == "horizontal" else np.swapaxes(key.image, 0, 1)
    assert image.shape == (steps, 256, 3) and key.brightness_levels == tuple(levels)
    d0, d1 = result.depth_range
    rendered = np.rint(result.rgb * 255).astype(np.uint8)
    for z in range(n):
        cell = min(255, int((z * 0.75 - d0) / (d1 - d0) * 256))
        for k in range(1, steps):  # level 0 is no signal: black in both, no depth in the image
            np.testing.assert_array_equal(image[k, cell], rendered[k, z], err_msg=f"{z}, {k}")
        assert np.all(image[0] == 0)


def test_key_ticks_and_one_dimensional_bar_unchanged():
    stack = np.zeros((8, 3, 3), np.uint16)
    stack[5, 1, 1] = 300
    result = P.depth_coded_projection(stack, z_step=2.0, clim=(100.0, 300.0))
    key = P.depth_legend(result, brightness_steps=3)
    assert key.brightness_tick_labels == ("100", "200", "300")  # signal, from the result's clim
    np.testing.assert_allclose(key.brightness_tick_fractions, [0.0, 0.5, 1.0])
    assert key.tick_labels == P.depth_legend(result).tick_labels
    bar = P.depth_legend(result)
    assert bar.image.shape == (16, 256, 3) and bar.brightness_levels == ()
    with pytest.raises(ParameterError, match="brightness_steps"):
        P.depth_legend(result, brightness_steps=1)


# --- tinted and weighted: a symmetric object is placed at its centre -------------------------

def symmetric_object(centre, seed, n=61, sigma=4.0, amplitude=1000.0):
    """Poisson(100) background; a Gaussian profile in depth (sigma 4 µm) over a 16 x 32 patch."""
    rng = np.random.default_rng(seed)
    stack = rng.poisson(100.0, (n, 48, 48)).astype(np.float64)
    z = np.arange(n, dtype=np.float64)  # 1 µm slices
    stack[:, 16:32, 8:40] += (amplitude * np.exp(-0.5 * ((z - centre) / sigma) ** 2))[:, None, None]
    return np.clip(np.rint(stack), 0, 65535).astype(np.uint16)


def depth_from_colour(rgb, result):
    """The depth whose colour, times a brightness, is nearest the patch's mean colour."""
    colour = rgb.reshape(-1, 3).astype(np.float64).mean(0)
    lut = result.lut
    scale = lut @ colour / np.einsum("ij,ij->i", lut, lut)
    j = int(np.argmin(np.linalg.norm(lut * scale[:, None] - colour, axis=1)))
    d0, d1 = result.depth_range
    return d0 + (j + 0.5) / len(lut) * (d1 - d0)


@pytest.mark.parametrize("method", ["tinted", "weighted"])
@pytest.mark.parametrize("cmap", ["CET-I1", "viridis"])
def test_symmetric_object_read_at_its_centre_whatever_the_limits(method, cmap):
    """12 random phantoms (centre 8-52 µm), lower limit at the stack minimum and automatic,
    upper limit at 30, 60 and 100 % of the peak: read back within 1 µm of the centre."""
    worst = 0.0
    for seed in range(12):
        centre = float(np.random.default_rng(100 + seed).uniform(8.0, 52.0))
        stack = symmetric_object(centre, seed)
        automatic = P.depth_coded_projection(stack, method=method).clim[0]
        for lower in (float(stack.min()), automatic):
            for fraction in (0.3, 0.6, 1.0):
                upper = fraction * float(stack.max())
                result = P.depth_coded_projection(stack, method=method, cmap=cmap,
                                                  clim=(lower, upper))
                patch = (slice(16, 32), slice(8, 40))
                worst = max(worst, abs(depth_from_colour(result.rgb[patch], result) - centre))
                if method == "weighted":  # the depth itself, not only its colour
                    worst = max(worst, abs(float(np.nanmean(result.depth_um[patch])) - centre))
    assert worst <= 1.0


def test_weighted_depth_does_not_depend_on_the_display_limits():
    stack = symmetric_object(12.0, 3)
    depths = [P.depth_coded_projection(stack, method="weighted", clim=clim).depth_um
              for clim in ((0.0, 300.0), (float(stack.min()), 2000.0), (150.0, 600.0))]
    for other in depths[1:]:
        np.testing.assert_array_equal(other, depths[0])


# --- saturation -------------------------------------------------------------------------------

@pytest.mark.parametrize("method", P.METHODS)
def test_saturated_fraction_counts_maxima_above_the_upper_limit(method):
    stack = symmetric_object(30.0, 1)
    result = P.depth_coded_projection(stack, method=method, clim=(100.0, 700.0))
    assert result.saturated_fraction == pytest.approx(np.mean(stack.max(0) > 700.0))  # numpy
    assert result.saturated_fraction > 0.1
    assert P.depth_coded_projection(stack, method=method,
                                    clim=(100.0, 70000.0)).saturated_fraction == 0.0


# --- recolour without the stack ------------------------------------------------------------

CHANGES = [
    dict(cmap="viridis"),
    dict(cmap="CET-I3", gamma=0.6),
    dict(depth_range=(5.0, 40.0)),
    dict(clim=(150.0, 500.0)),
    dict(clim=(90.0, 3000.0), gamma=1.7),
    dict(cmap=np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0]]), depth_range=(0.0, 20.0),
         clim=(300.0, 900.0), gamma=0.4),
]


@pytest.mark.parametrize("method", ["peak", "weighted"])
@pytest.mark.parametrize("dtype", [np.uint16, np.float32, np.int16])
def test_recolour_equals_recompute_exactly(method, dtype):
    """recolour(...) and depth_coded_projection(stack, ...) with the same options: equal arrays."""
    stack = np.stack([symmetric_object(c, s) for c, s in ((20.0, 1), (41.0, 2))], axis=1)
    stack = stack.astype(dtype)
    base = dict(method=method, z_step=0.8, axis=0)
    first = P.depth_coded_projection(stack, clim=(120.0, 800.0), **base)
    frozen = first.rgb.copy()
    current = dict(cmap=P.DEFAULT_CMAP, depth_range=first.depth_range, clim=first.clim, gamma=1.0)
    for change in CHANGES:
        current.update(change)
        recoloured = first.recolour(**change)
        again = P.depth_coded_projection(stack, **base, **{k: current[k] for k in current})
        for name in ("rgb", "depth_um", "brightness", "peak", "lut"):
            np.testing.assert_array_equal(getattr(recoloured, name), getattr(again, name), name)
        assert recoloured.clim == again.clim and recoloured.depth_range == again.depth_range
        assert recoloured.gamma == again.gamma
        assert recoloured.saturated_fraction == again.saturated_fraction
        first = recoloured
    np.testing.assert_array_equal(frozen, P.depth_coded_projection(
        stack, clim=(120.0, 800.0), **base).rgb)  # the first result was not changed


def test_recolour_tinted_needs_the_stack_and_options_are_checked():
    stack = symmetric_object(30.0, 0)
    tinted = P.depth_coded_projection(stack, method="tinted")
    with pytest.raises(ParameterError, match="^method: .*tinted"):
        tinted.recolour(gamma=0.5)
    peak = P.depth_coded_projection(stack)
    for kwargs, name in ((dict(clim=(5.0, 1.0)), "clim"), (dict(gamma=0.0), "gamma"),
                         (dict(depth_range=(3.0, 3.0)), "depth_range"),
                         (dict(cmap="no-such-map"), "cmap")):
        with pytest.raises(ParameterError, match=f"^{name}"):
            peak.recolour(**kwargs)


# --- occlusion: colours only along the depth axis -------------------------------------------

def test_occlusion_refuses_depth_colours_across_the_depth_axis():
    stack = symmetric_object(30.0, 0)[:, :20, :24]
    with pytest.raises(ParameterError, match="^cmap: .*side view"):
        P.occlusion_projection(stack, axis=1, depth_axis=0, cmap="CET-I1")
    with pytest.raises(ParameterError, match="^depth_axis"):
        P.occlusion_projection(stack, axis=1, depth_axis=3)
    grey = P.occlusion_projection(stack, axis=1, depth_axis=0, z_step=0.3, density=0.2)
    np.testing.assert_array_equal(grey, P.occlusion_projection(stack, axis=1, z_step=0.3,
                                                               density=0.2))
    along_depth = P.occlusion_projection(stack, depth_axis=0, cmap="CET-I1", clim=(100, 900))
    np.testing.assert_array_equal(along_depth, P.occlusion_projection(stack, cmap="CET-I1",
                                                                      clim=(100, 900)))
