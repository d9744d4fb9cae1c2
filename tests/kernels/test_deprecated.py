"""The old kernel names still work for one release, and say what replaces them."""

from __future__ import annotations

import numpy as np
import pytest

from viewer_plugin import kernels


def test_old_peak_name_warns_and_equals_numpy():
    stack = np.random.default_rng(0).integers(0, 50, size=(6, 4, 5)).astype(np.uint16)
    with pytest.warns(DeprecationWarning, match="use peak_projection"):
        old = kernels.brightest_point(stack)
    # numpy documentation: max, and argmax's first occurrence on ties
    np.testing.assert_array_equal(old.values, stack.max(axis=0))
    np.testing.assert_array_equal(old.depth, stack.argmax(axis=0))
    assert old.depth.dtype == np.int32


def test_old_occlusion_name_warns_and_equals_the_new_one():
    stack = np.random.default_rng(1).random((5, 4, 6)).astype(np.float32)
    with pytest.warns(DeprecationWarning, match="use occlusion_projection"):
        old = kernels.blended_projection(stack, clim=(0, 1), density=0.3)
    np.testing.assert_array_equal(old, kernels.occlusion_projection(stack, clim=(0, 1), density=0.3))
