"""Per-slice gains (primitives/gain.py): the formula, numpy against dask, one task per block.

References: the formula (I - offset) * g + offset evaluated in float64 by numpy (reference
library); dask.array's own blocks and graph (reference library) for the lazy result.
"""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin.kernels.primitives.gain import apply_gains

da = pytest.importorskip("dask.array")


def stack_and_gains(shape=(13, 20, 24), dtype=np.uint16, seed=0):
    rng = np.random.default_rng(seed)
    stack = rng.integers(90, 4000, size=shape).astype(dtype)
    gains = rng.uniform(0.5, 8.0, size=shape[0])
    return stack, gains


def expected(stack, gains, offset, axis=0):
    shape = [1] * stack.ndim
    shape[axis] = gains.size
    return (stack.astype(np.float64) - offset) * gains.reshape(shape) + offset


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.int32, np.float32, np.float64, np.float16, bool])
def test_formula_for_every_dtype(dtype):
    stack, gains = stack_and_gains()
    stack = (stack % 200).astype(dtype) if dtype in (np.uint8, np.float16, bool) else stack.astype(dtype)
    before = stack.copy()
    out = apply_gains(stack, gains, 100.0, axis=0)
    assert out.dtype == np.float32 and out.shape == stack.shape
    np.testing.assert_array_equal(stack, before)                       # input unchanged
    np.testing.assert_allclose(out, expected(stack, gains, 100.0), rtol=2e-6, atol=2e-3)


@pytest.mark.parametrize("axis", [0, 1, 2])
def test_any_axis_and_a_voxel_at_the_offset_stays_there(axis):
    stack, _ = stack_and_gains()
    gains = np.linspace(1.0, 3.0, stack.shape[axis])
    out = apply_gains(stack, gains, 100.0, axis=axis)
    np.testing.assert_allclose(out, expected(stack, gains, 100.0, axis), rtol=2e-6, atol=2e-3)
    flat = apply_gains(np.full((4, 3, 3), 100, np.uint16), np.array([1.0, 2.0, 5.0, 9.0]), 100.0, axis=0)
    np.testing.assert_allclose(flat, 100.0, rtol=1e-6)


@pytest.mark.parametrize("chunks", [(1, 20, 24), (3, 20, 24), (5, 7, 24), (13, 5, 5), (4, 20, 9)])
def test_dask_equals_numpy_for_chunkings_that_split_z(chunks):
    stack, gains = stack_and_gains()
    lazy = apply_gains(da.from_array(stack, chunks=chunks), gains, 100.0, axis=0)
    assert type(lazy).__module__.startswith("dask") and lazy.dtype == np.float32
    np.testing.assert_array_equal(lazy.compute(), apply_gains(stack, gains, 100.0, axis=0))


def test_dask_along_another_axis_and_in_four_dimensions():
    stack, gains = stack_and_gains(shape=(6, 9, 10, 11))
    for axis in (0, 1, 3):
        g = np.linspace(0.5, 2.0, stack.shape[axis])
        chunks = tuple(max(1, n // 2) for n in stack.shape)
        lazy = apply_gains(da.from_array(stack, chunks=chunks), g, 50.0, axis=axis).compute()
        np.testing.assert_array_equal(lazy, apply_gains(stack, g, 50.0, axis=axis))
        np.testing.assert_allclose(lazy, expected(stack, g, 50.0, axis), rtol=2e-6, atol=2e-3)


def test_one_task_per_block():
    stack, gains = stack_and_gains()
    source = da.from_array(stack, chunks=(3, 10, 12))
    lazy = apply_gains(source, gains, 100.0, axis=0)
    assert lazy.chunks == source.chunks
    layer = lazy.dask.layers[lazy.name]
    assert len(layer) == source.npartitions


def test_progress_between_chunks():
    stack, gains = stack_and_gains()
    calls = []
    apply_gains(stack, gains, 0.0, axis=0, progress=lambda d, t: calls.append((d, t)))
    assert calls and calls[-1][0] == calls[-1][1]
