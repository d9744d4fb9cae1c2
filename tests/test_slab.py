"""Slabs and recolouring: the slab projection and a recoloured result equal fresh projections.

References: numpy basic slicing (``stack[a:b]`` is the slab), numpy ``argmax`` (first
occurrence on ties) for the slice of each maximum, and the kernels' own whole-stack
projection for colours (a translation of the depth axis leaves ``(d - d0) / (d1 - d0)``
unchanged).
"""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin._shared.stack import Stack
from viewer_plugin._shared.validation import ParameterError
from viewer_plugin.jobs import ProjectionOptions, Selection, project_stack, recolour_projected
from viewer_plugin.kernels import (
    depth_coded_projection,
    offset_depths,
    peak_projection,
    slab_bounds,
)


def _stack(seed, shape=(24, 30, 34)):
    rng = np.random.default_rng(seed)
    data = (100 + rng.poisson(6.0, shape)).astype(np.uint16)
    for _ in range(12):  # bright blobs at random depths
        z, y, x = (int(rng.integers(0, n)) for n in shape)
        data[z, max(0, y - 2):y + 2, max(0, x - 2):x + 2] += int(rng.integers(200, 2000))
    return data


@pytest.mark.parametrize("n, centre, thickness, step", [
    (100, 50, 10.0, 2.0), (100, 0, 10.0, 2.0), (100, 99, 7.9, 1.0), (5, 2, 0.1, 1.0),
    (40, 20, 3.0, 1.5), (40, 20, 1e6, 1.0)])
def test_slab_bounds_hold_the_slices_within_half_the_thickness(n, centre, thickness, step):
    """Brute force: slice k belongs when |k - centre| * step <= thickness / 2."""
    start, stop = slab_bounds(n, centre=centre, thickness_um=thickness, z_step=step)
    inside = [k for k in range(n) if abs(k - centre) * step <= thickness / 2 + 1e-9]
    assert list(range(start, stop)) == inside


@pytest.mark.parametrize("bad", [dict(centre=10), dict(centre=-1), dict(thickness_um=0.0),
                                 dict(z_step=-1.0)])
def test_slab_bounds_refuse_bad_input(bad):
    kwargs = dict(centre=2, thickness_um=4.0, z_step=1.0) | bad
    with pytest.raises(ParameterError):
        slab_bounds(10, **kwargs)


def test_offset_depths_of_a_peak_projection_equal_argmax_in_the_stack():
    data = _stack(1)
    a, b = 7, 14
    out = offset_depths(peak_projection(data[a:b], z_step=1.5), a)
    np.testing.assert_array_equal(out.index, data[a:b].argmax(axis=0) + a)  # numpy argmax
    np.testing.assert_allclose(out.depth_um, (data[a:b].argmax(axis=0) + a) * 1.5)
    np.testing.assert_array_equal(out.peak, data[a:b].max(axis=0))


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("method", ["peak", "weighted", "tinted"])
def test_slab_equals_the_projection_of_the_sliced_stack(seed, method):
    """The job's slab = depth_coded_projection(stack[a:b]) with the whole stack's depth range
    moved to the slab's own depths; depths then count from the stack's first slice."""
    data = _stack(seed)
    rng = np.random.default_rng(100 + seed)
    step, centre = float(rng.choice([0.5, 1.0, 2.0])), int(rng.integers(0, data.shape[0]))
    thickness = float(rng.uniform(0.5, 12.0))
    options = ProjectionOptions(method=method, clim=(100.0, 1500.0), slab_um=thickness,
                                slab_centre=centre)
    got = project_stack(Selection(Stack(data, "ZYX", (step, 0.4, 0.5))), options)
    half = int(np.floor(thickness / (2 * step) * (1 + 1e-12)))
    a, b = max(0, centre - half), min(data.shape[0], centre + half + 1)
    whole = (0.0, (data.shape[0] - 1) * step)
    ref = depth_coded_projection(data[a:b], z_step=step, method=method, clim=(100.0, 1500.0),
                                 depth_range=(whole[0] - a * step, whole[1] - a * step))
    np.testing.assert_array_equal(got.result.rgb, ref.rgb)
    np.testing.assert_allclose(got.result.depth_um, ref.depth_um + a * step, atol=1e-4)
    assert got.result.depth_range == pytest.approx(whole)
    assert got.provenance["slab"]["first_slice"] == a
    assert got.provenance["slab"]["last_slice"] == b - 1
    np.testing.assert_array_equal(data, _stack(seed))  # the input is untouched


def test_a_slab_of_occlusion_is_refused():
    data = _stack(0)
    with pytest.raises(ParameterError, match="slab"):
        project_stack(Selection(Stack(data, "ZYX", (1.0, 1.0, 1.0))),
                      ProjectionOptions(method="occlusion", slab_um=4.0, slab_centre=3))


CHANGES = [dict(cmap="viridis"), dict(depth_range=(3.0, 17.0)), dict(clim=(120.0, 900.0)),
           dict(gamma=0.6), dict(cmap="CET-I3", clim=(110.0, 2000.0), gamma=1.7),
           dict(depth_range=None)]


@pytest.mark.parametrize("slab", [None, 6.0])
@pytest.mark.parametrize("method", ["peak", "weighted"])
@pytest.mark.parametrize("change", CHANGES)
def test_recoloured_job_result_equals_a_new_projection(change, method, slab):
    """recolour_projected(result, options) == project_stack(stack, options), array for array."""
    data = _stack(3)
    selection = Selection(Stack(data, "ZYX", (2.0, 0.5, 0.5)))
    first = ProjectionOptions(method=method, clim=(100.0, 1500.0), depth_range=(0.0, 30.0),
                              slab_um=slab, slab_centre=11 if slab else None)
    new = ProjectionOptions(**{**first.__dict__, **change})
    recoloured = recolour_projected(project_stack(selection, first), new)
    fresh = project_stack(selection, new)
    for name in ("rgb", "brightness", "depth_um"):
        np.testing.assert_allclose(getattr(recoloured.result, name), getattr(fresh.result, name),
                                   atol=1e-6 if slab else 0, err_msg=name)
    assert recoloured.result.depth_range == pytest.approx(fresh.result.depth_range)
    for key in ("cmap", "depth_range_um", "clim_used", "gamma", "saturated_fraction"):
        assert recoloured.provenance[key] == pytest.approx(fresh.provenance[key]), key
