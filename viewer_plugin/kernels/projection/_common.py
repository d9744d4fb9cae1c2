"""Preparation shared by the projection kernels (private)."""

from __future__ import annotations

import threading
from typing import Any

import numpy as np

from ..._shared.validation import check_interval, check_stack, depth_first

# One compiled parallel kernel at a time: numba's thread pools are not meant
# to be entered from several Python threads at once.
KERNEL_LOCK = threading.RLock()


def depth_view(stack: Any, axis: int) -> tuple[Any, int]:
    """Checked, depth-first view of *stack* and its number of slices."""
    stack, axis = check_stack(stack, axis=axis)
    v = depth_first(stack, axis)
    return v, int(v.shape[0])


def resolve_depth_range(depth_range: Any, n: int, z_step: float) -> tuple[float, float]:
    """User colour range (checked) or first slice .. last slice."""
    pair = check_interval(depth_range, name="depth_range")
    if pair is not None:
        return pair
    return 0.0, (n - 1) * z_step if n > 1 else z_step


def initial_values(shape: tuple, kdtype: np.dtype) -> np.ndarray:
    """Running-maximum state: NaN for floats, the minimum for integers."""
    if kdtype.kind == "f":
        return np.full(shape, np.nan, kdtype)
    return np.full(shape, np.iinfo(kdtype).min, kdtype)


def index_dtype(n: int) -> np.dtype:
    """Slice-index state: int16 below 32768 slices (half the vector width), else int32."""
    return np.dtype(np.int16 if n < 2**15 else np.int32)


def rows(a: np.ndarray, tail: int = 1) -> np.ndarray:
    """View of a C-contiguous array with all leading axes merged: (rows, *last tail axes)."""
    return a.reshape((-1,) + a.shape[a.ndim - tail:])
