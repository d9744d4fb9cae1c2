"""Turning views: resampling, rotation geometry and the rendered frames.

Outside references: ``scipy.ndimage.affine_transform`` with a rotation matrix
from ``scipy.spatial.transform.Rotation`` (SciPy documentation: rotating a
volume, voxel size folded into the matrix; REFERENCES.md "Views, movies and
paths"); block means from ``skimage.measure.block_reduce``; the projections of
the unrotated (or independently resampled) stack by numpy's ``max`` and the
package's own kernels; "the maximum along a ray is independent of the ray's
direction" (derived, REFERENCES.md) for the 180 degree view.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage
from scipy.spatial.transform import Rotation

from viewer_plugin.kernels import (
    Cancelled,
    ParameterError,
    depth_coded_projection,
    display_limits,
    occlusion_projection,
    peak_projection,
    series_views,
    turn_volume,
    turned_view,
    turning_views,
)


def _phantom(shape, seed, *, bars=6, background=100):
    """uint16 stack: Poisson background and a few bright straight bars in random directions."""
    rng = np.random.default_rng(seed)
    data = background + rng.poisson(5.0, shape).astype(np.float64)
    grid = np.indices(shape).reshape(3, -1).T.astype(np.float64)
    for _ in range(bars):
        start = rng.uniform(0, 1, 3) * (np.array(shape) - 1)
        direction = rng.normal(size=3)
        direction /= np.linalg.norm(direction)
        rel = grid - start
        along = rel @ direction
        dist = np.linalg.norm(rel - along[:, None] * direction, axis=1)
        data += (1500.0 * np.exp(-0.5 * (dist / 1.2) ** 2)).reshape(shape)
    return np.clip(np.rint(data), 0, 65535).astype(np.uint16)


def _embedded(image, shape, rows0, cols0):
    """*image* (rows, cols[, 3]) placed at (rows0, cols0) in a zero canvas of *shape*."""
    out = np.zeros(shape + image.shape[2:], np.float32)
    out[rows0:rows0 + image.shape[0], cols0:cols0 + image.shape[1]] = image
    return out


def _pivot_index(vol, shape, voxel):
    """Input index (z, y, x) of the canvas centre: the volume's pivot in the rotation plane."""
    index = (np.array(shape, np.float64) - 1) / 2
    lateral = 2 if vol.turn == "y" else 1
    index[0] = vol.pivot[0] * vol.step_um / voxel[0]
    index[lateral] = vol.pivot[1] * vol.step_um / voxel[lateral]
    return index


def _grey(values, clim):
    lo, hi = clim
    return np.clip(np.nan_to_num((np.asarray(values, np.float32) - np.float32(lo))
                                 / np.float32(hi - lo)), 0, 1)


# --- resampling -----------------------------------------------------------------------


def test_block_means_match_skimage_block_reduce():
    """Coarsening averages whole blocks (skimage.measure.block_reduce with numpy.mean)."""
    from skimage.measure import block_reduce

    from viewer_plugin.kernels.projection.turn import _block_mean

    stack = _phantom((13, 20, 23), 1)
    ours = _block_mean(stack, (2, 3, 2), (1, 0, 2), None)  # turning-axis-first layout
    reference = block_reduce(stack[:12, :18, :22].astype(np.float64), (2, 3, 2), np.mean)
    np.testing.assert_allclose(ours, reference.transpose(1, 0, 2), rtol=1e-6)


def test_capped_volume_keeps_within_its_side_and_its_shape():
    """A large stack is coarsened so the longest side stays within max_side; the object's
    extent in µm is kept (spans times step = (n - 1) * voxel)."""
    stack = np.zeros((30, 150, 200), np.uint8)
    vol = turn_volume(stack, voxel_um=(2.0, 0.5, 0.5), max_side=64)
    assert vol.capped
    assert max(vol.spans) <= 63 + 1e-9
    assert vol.step_um == pytest.approx(199 * 0.5 / 63)
    np.testing.assert_allclose(np.array(vol.spans) * vol.step_um, (29 * 2.0, 199 * 0.5))
    assert vol.data.shape[0] == np.ceil(149 * 0.5 / vol.step_um) + 1  # cubic voxels along y
    assert vol.factors == (1, 3, 3)
    assert not turn_volume(stack, voxel_um=(2.0, 0.5, 0.5)).capped


def test_dask_input_gives_the_numpy_volume():
    da = pytest.importorskip("dask.array")
    stack = _phantom((16, 30, 28), 2)
    lazy = da.from_array(stack, chunks=(3, 30, 28))
    for kwargs in ({}, {"max_side": 12}):
        ours = turn_volume(lazy, voxel_um=(2.0, 1.0, 1.0), **kwargs)
        reference = turn_volume(stack, voxel_um=(2.0, 1.0, 1.0), **kwargs)
        np.testing.assert_allclose(ours.data, reference.data, rtol=1e-6)
        assert ours.shape == reference.shape


# --- rotation geometry ----------------------------------------------------------------


@pytest.mark.parametrize("turn, angle", [("y", 30.0), ("y", 137.0), ("x", 30.0), ("x", 250.0)])
def test_turned_view_matches_a_3d_affine_transform(turn, angle):
    """Each turned view equals scipy.ndimage.affine_transform of the whole volume with the
    matrix diag(1 / voxel) @ R.T * step (R from scipy.spatial.transform.Rotation)."""
    stack = _phantom((12, 18, 22), 3).astype(np.float32)
    voxel = np.array([2.0, 1.0, 1.0])
    vol = turn_volume(stack, voxel_um=voxel, turn=turn)
    ours = turned_view(vol, angle)
    # the view turns about y by +angle, about x by -angle (right-handed, in x, y, z order)
    rot = Rotation.from_euler(turn, angle if turn == "y" else -angle, degrees=True).as_matrix()
    zyx = rot[::-1, ::-1]  # the same matrix in (z, y, x) order
    matrix = np.diag(1 / voxel) @ zyx.T * vol.step_um
    centre_out = (np.array(vol.shape) - 1) / 2
    centre_in = _pivot_index(vol, stack.shape, voxel)
    reference = ndimage.affine_transform(stack, matrix, centre_in - matrix @ centre_out,
                                         output_shape=vol.shape, order=1, mode="constant",
                                         cval=np.nan)
    both = np.isfinite(ours) & np.isfinite(reference)
    assert both.sum() > 0.9 * np.isfinite(reference).sum()
    np.testing.assert_allclose(ours[both], reference[both], rtol=1e-5, atol=1e-3)


@pytest.mark.parametrize("seed", range(5))
def test_a_blob_lands_where_the_rotation_matrix_says(seed):
    """The centroid of a Gaussian blob in anisotropic voxels moves to R p (rotation matrix of
    scipy.spatial.transform.Rotation), within a tenth of a voxel."""
    rng = np.random.default_rng(seed)
    shape, voxel = (15, 25, 21), np.array([2.5, 1.0, 1.0])
    centre_in = (np.array(shape) - 1) / 2
    spot_um = rng.uniform(-0.3, 0.3, 3) * (np.array(shape) - 1) * voxel
    grid = (np.indices(shape).T * voxel - (centre_in * voxel + spot_um)).T
    stack = np.exp(-0.5 * (grid ** 2).sum(axis=0) / 2.5 ** 2).astype(np.float32)
    angle = rng.uniform(0, 360)
    vol = turn_volume(stack, voxel_um=voxel)
    view = np.nan_to_num(turned_view(vol, angle))
    found = (np.array(ndimage.center_of_mass(view)) - (np.array(vol.shape) - 1) / 2) * vol.step_um
    rot = Rotation.from_euler("y", angle, degrees=True).as_matrix()[::-1, ::-1]
    pivot = _pivot_index(vol, shape, voxel)
    source = (np.array(ndimage.center_of_mass(stack)) - pivot) * voxel  # as the stack cuts it
    np.testing.assert_allclose(found, rot @ source, atol=0.1 * vol.step_um)


def test_a_bar_along_depth_keeps_its_length_at_90_degrees():
    """A bar 9 slices long at a z-step of 3 µm (pixels 1 µm) is 27 µm long seen from the side
    (between half-maximum points of the linear interpolation), not 9 pixels."""
    stack = np.zeros((14, 9, 11), np.float32)
    stack[2:11, 4, 5] = 1.0
    vol = turn_volume(stack, voxel_um=(3.0, 1.0, 1.0))
    image = np.nan_to_num(turned_view(vol, 90.0)).max(axis=0)
    row = image[4]
    assert np.count_nonzero(row >= 0.5) == pytest.approx(27, abs=1)
    assert np.count_nonzero(image[:, np.argmax(row)] >= 0.5) == 1  # still one pixel thick


def test_180_degrees_is_the_mirror_of_the_top_view_for_the_maximum():
    """The maximum along a ray is independent of the ray's direction (REFERENCES.md), so the
    view from the bottom is the top view mirrored left-right, exactly."""
    stack = _phantom((10, 16, 19), 4)
    for voxel in ((1.0, 1.0, 1.0), (3.0, 1.0, 1.0)):
        views = turning_views(turn_volume(stack, voxel_um=voxel), frames=4, method="peak")
        np.testing.assert_array_equal(views.render(2)[:, ::-1], views.render(0))
    views = turning_views(turn_volume(stack, voxel_um=(3.0, 1.0, 1.0), turn="x"), frames=2,
                          method="peak")
    np.testing.assert_array_equal(views.render(1)[::-1], views.render(0))


# --- rendered frames ------------------------------------------------------------------


@pytest.mark.parametrize("turn", ["y", "x"])
@pytest.mark.parametrize("method", ["peak", "occlusion", "depth-colour"])
def test_frame_0_is_the_top_view_projection(method, turn):
    """Frame 0 equals the kernel's own projection of the unrotated stack, embedded in the
    canvas (cubic voxels: the view samples the stack's own voxels)."""
    stack = _phantom((14, 20, 25), 5)
    vol = turn_volume(stack, voxel_um=(0.5, 0.5, 0.5), turn=turn)
    clim = display_limits(stack)
    views = turning_views(vol, frames=6, method=method, clim=clim)
    depth, rows, cols = vol.shape
    centre = (depth - 1) / 2  # the pivot's place; slice 0 and column 0 lie on whole grid points
    pad_d, pad_lateral = centre - vol.pivot[0], centre - vol.pivot[1]
    assert pad_d == int(pad_d) and pad_lateral == int(pad_lateral)
    pad_d, pad_r, pad_c = (int(pad_d), 0, int(pad_lateral)) if turn == "y" else \
        (int(pad_d), int(pad_lateral), 0)
    if method == "peak":
        top = np.repeat(_grey(peak_projection(stack).peak, clim)[..., None], 3, -1)
    elif method == "occlusion":
        assert views.density == pytest.approx(10.0 / (14 * 0.5))  # the top view's default
        top = np.repeat(occlusion_projection(stack, z_step=0.5, clim=clim)[..., None], 3, -1)
    else:
        d0, d1 = views.depth_range
        assert (d0, d1) == (0.0, (depth - 1) * 0.5)
        shift = pad_d * 0.5  # slice 0 lies pad_d cubic voxels behind the canvas front
        top = depth_coded_projection(stack, z_step=0.5, clim=clim,
                                     depth_range=(d0 - shift, d1 - shift)).rgb
    expected = _embedded(np.asarray(top, np.float32), (rows, cols), pad_r, pad_c)
    np.testing.assert_allclose(views.render(0), expected, atol=2e-6)


def test_frame_0_of_anisotropic_voxels_is_the_maximum_projection():
    """With a z-step 3x the pixel, the cubic grid passes through every slice at angle 0 and
    linear interpolation never exceeds its ends: frame 0 is numpy's max, exactly."""
    stack = _phantom((11, 17, 21), 6)
    vol = turn_volume(stack, voxel_um=(0.9, 0.3, 0.3))
    clim = (100.0, 1600.0)
    views = turning_views(vol, frames=8, method="peak", clim=clim)
    pad_c = int((vol.shape[2] - 1) / 2 - vol.pivot[1])
    top = np.repeat(_grey(stack.max(axis=0), clim)[..., None], 3, -1)
    np.testing.assert_array_equal(views.render(0), _embedded(top, vol.shape[1:], 0, pad_c))


@pytest.mark.parametrize("seed", range(3))
def test_90_degrees_is_the_side_projection_of_the_resampled_stack(seed):
    """At 90 degrees about y the frame is the projection along x of the stack resampled to
    cubic voxels (here independently, by scipy.ndimage.affine_transform's diagonal zoom),
    depth along the columns: correlation above 0.95 for the maximum and for occlusion."""
    stack = _phantom((12, 24, 30), 10 + seed)
    voxel = (3.0, 1.0, 1.0)
    n_cubic = 3 * (12 - 1) + 1
    cubic = ndimage.affine_transform(stack.astype(np.float32), np.array([1 / 3, 1.0, 1.0]),
                                     output_shape=(n_cubic, 24, 30), order=1)
    clim = display_limits(stack)
    vol = turn_volume(stack, voxel_um=voxel)
    pad = int((vol.shape[2] - 1) / 2 - vol.pivot[0])  # depth along the columns
    peak = turning_views(vol, frames=4, method="peak", clim=clim).render(1)[..., 0]
    side = _grey(cubic.max(axis=2).T, clim)  # rows y, columns depth (first slice left)
    assert np.corrcoef(peak[:, pad:pad + n_cubic].ravel(), side.ravel())[0, 1] > 0.95
    views = turning_views(vol, frames=4, method="occlusion", clim=clim)
    # seen from the far side of x (the view looks along -x at 90 degrees)
    side = occlusion_projection(cubic, z_step=1.0, axis=2, view="bottom", clim=clim,
                                density=views.density).T
    ours = views.render(1)[..., 0][:, pad:pad + n_cubic]
    assert np.corrcoef(ours.ravel(), side.ravel())[0, 1] > 0.95


def test_frames_share_their_ranges_and_progress_cancels():
    stack = _phantom((8, 12, 14), 7)
    views = turning_views(turn_volume(stack, voxel_um=(1, 1, 1)), frames=5, method="depth-colour")
    assert views.clim == pytest.approx(display_limits(turn_volume(stack, voxel_um=(1, 1, 1)).data,
                                                      axis=1))
    seen = []
    frames = list(views.frames(progress=lambda d, t: seen.append((d, t))))
    assert len(frames) == 5 and seen[-1] == (5, 5)
    assert all(f.shape == views.shape + (3,) and f.dtype == np.float32 for f in frames)

    def stop(done, total):
        if done == 2:
            raise Cancelled

    with pytest.raises(Cancelled):
        list(views.frames(progress=stop))


def test_series_views_share_one_depth_range_and_display_range():
    """One top view per time point, each the depth-coded projection with the whole series'
    display limits (numpy.percentile of a strided sample, display_limits) and depth range."""
    rng = np.random.default_rng(8)
    series = (100 + rng.poisson(5, (4, 6, 10, 12))).astype(np.uint16)
    for t in range(4):
        series[t, t + 1, 2:8, 3 + t] += 300 * (t + 1)
    views = series_views(series, z_step=2.0)
    assert views.count == 4
    assert views.clim == pytest.approx(display_limits(series, axis=1))
    assert views.depth_range == (0.0, 10.0)
    for t in range(4):
        expected = depth_coded_projection(series[t], z_step=2.0, clim=views.clim,
                                          depth_range=views.depth_range).rgb
        np.testing.assert_allclose(views.render(t), expected, atol=1e-7)


def test_series_views_of_a_dask_series_match_numpy():
    da = pytest.importorskip("dask.array")
    rng = np.random.default_rng(9)
    series = (100 + rng.poisson(5, (3, 5, 12, 10))).astype(np.uint16)
    series[:, 2, 3:9, 4] += 400
    lazy = da.from_array(series, chunks=(1, 2, 12, 10))
    for method in ("depth-colour", "occlusion", "peak"):
        ours, reference = (series_views(s, z_step=1.5, method=method) for s in (lazy, series))
        assert ours.clim == pytest.approx(reference.clim)
        for t in range(3):
            np.testing.assert_allclose(ours.render(t), reference.render(t), atol=1e-6)


@pytest.mark.parametrize("call, fragment", [
    (lambda s: turning_views(turn_volume(s, voxel_um=(1, 1, 1)), frames=1), "frames"),
    (lambda s: turning_views(turn_volume(s, voxel_um=(1, 1, 1)), method="peak", cmap="viridis"),
     "cmap"),
    (lambda s: turning_views(turn_volume(s, voxel_um=(1, 1, 1)), method="mip"), "method"),
    (lambda s: turn_volume(s, voxel_um=(1, 0, 1)), "voxel_um[1]"),
    (lambda s: turn_volume(s, voxel_um=(1, 1)), "voxel_um"),
    (lambda s: turn_volume(s, voxel_um=(1, 1, 1), turn="z"), "turn"),
    (lambda s: turn_volume(s[None], voxel_um=(1, 1, 1)), "stack"),
    (lambda s: series_views(s, z_step=1.0), "stack"),
])
def test_bad_options_name_the_parameter(call, fragment):
    with pytest.raises(ParameterError, match=fragment.replace("[", r"\[").replace("]", r"\]")):
        call(np.zeros((4, 5, 6), np.uint8))
