"""Property tests (hypothesis) of the projection kernels.

Properties follow from the definitions: the maximum is >= every slice (and
equals numpy.max, numpy documentation); depths lie inside the stack; the
emission-absorption model (N. Max, IEEE TVCG 1995, doi:10.1109/2945.468400)
goes to zero as the density goes to zero and to the front value when the
front is optically thick.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from viewer_plugin.kernels import projection as P

SETTINGS = settings(max_examples=40, deadline=None)

shapes = st.tuples(st.integers(1, 9), st.integers(1, 5), st.integers(1, 7))
int_stacks = st.one_of(
    arrays(np.uint8, shapes),
    arrays(np.uint16, shapes),
    arrays(np.int16, shapes),
)
float_stacks = arrays(
    np.float32, shapes,
    elements=st.one_of(st.floats(-1e4, 1e4, width=32), st.just(np.nan)),
)


@SETTINGS
@given(stack=st.one_of(int_stacks, float_stacks))
def test_maximum_bounds_every_slice(stack):
    result = P.peak_projection(stack)
    finite = np.where(np.isnan(stack), -np.inf, stack) if stack.dtype.kind == "f" else stack
    has = ~np.all(np.isnan(stack), axis=0) if stack.dtype.kind == "f" else np.ones(stack.shape[1:], bool)
    assert np.all(result.peak[has] >= finite[:, has])
    assert np.all((result.index >= 0) & (result.index < stack.shape[0]))
    # the value sits at the reported depth
    picked = np.take_along_axis(stack, result.index[None].astype(np.intp), axis=0)[0]
    np.testing.assert_array_equal(picked[has], result.peak[has])


@SETTINGS
@given(stack=int_stacks, method=st.sampled_from(P.METHODS),
       z_step=st.floats(0.05, 10.0), gamma=st.floats(0.2, 3.0))
def test_depths_in_range_and_colours_bounded(stack, method, z_step, gamma):
    result = P.depth_coded_projection(stack, z_step=z_step, method=method, gamma=gamma)
    depth = result.depth_um[~np.isnan(result.depth_um)]
    assert np.all(depth >= 0) and np.all(depth <= (stack.shape[0] - 1) * z_step * (1 + 1e-6) + 1e-6)
    assert np.all((result.rgb >= 0) & (result.rgb <= 1))
    assert np.all((result.brightness >= 0) & (result.brightness <= 1))


@SETTINGS
@given(stack=arrays(np.uint16, shapes), z_step=st.floats(0.1, 5.0))
def test_vanishing_density_gives_nearly_nothing(stack, z_step):
    out = P.occlusion_projection(stack, z_step=z_step, density=1e-9, clim=(0, 65535))
    # C <= sum of a_i u_i <= density * z_step * n
    assert np.all(out <= 1e-9 * z_step * stack.shape[0] + 1e-12)
    assert np.all(out >= 0)


@SETTINGS
@given(front=st.floats(0.05, 1.0), back=st.floats(0.0, 1.0),
       n_front=st.integers(1, 6), n_back=st.integers(1, 6))
def test_thick_front_shows_front_value(front, back, n_front, n_back):
    stack = np.concatenate([np.full((n_front, 2, 2), front), np.full((n_back, 2, 2), back)])
    density = 1e4  # density * u * z_step >> 1 for every non-zero value
    top = P.occlusion_projection(stack, density=density, clim=(0, 1))
    bottom = P.occlusion_projection(stack, density=density, clim=(0, 1), view="bottom")
    np.testing.assert_allclose(top, front, rtol=1e-5)
    if back >= 0.05:
        np.testing.assert_allclose(bottom, back, rtol=1e-5)
    else:  # a dark back layer lets the front through (Max 1995 slab formula)
        expected = back * -np.expm1(-density * back * n_back) + np.exp(-density * back * n_back) * front
        np.testing.assert_allclose(bottom, expected, rtol=1e-4, atol=1e-6)
