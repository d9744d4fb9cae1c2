"""Old kernel names, kept for one release so that existing scripts keep working.

Each alias warns with a :class:`DeprecationWarning` that names its
replacement; nothing in stackdepth itself calls them.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._shared.progress import Progress
from .projection import occlusion_projection, peak_projection

__all__ = ["BrightestPoint", "blended_projection", "brightest_point"]


def _warn(old: str, new: str) -> None:
    warnings.warn(f"{old} is deprecated and will be removed in the next release; use {new}",
                  DeprecationWarning, stacklevel=3)


@dataclass(frozen=True, eq=False)
class BrightestPoint:
    """The old result of :func:`brightest_point`: ``values`` (maximum) and ``depth`` (int32 index)."""

    values: np.ndarray
    depth: np.ndarray


def brightest_point(stack: Any, *, axis: int = 0, progress: Progress = None) -> BrightestPoint:
    """Deprecated: use :func:`~viewer_plugin.kernels.peak_projection` (fields ``peak``, ``index``)."""
    _warn("brightest_point", "peak_projection")
    result = peak_projection(stack, axis=axis, progress=progress)
    return BrightestPoint(values=result.peak, depth=result.index.astype(np.int32))


def blended_projection(stack: Any, **options: Any) -> np.ndarray:
    """Deprecated: use :func:`~viewer_plugin.kernels.occlusion_projection` (same options)."""
    _warn("blended_projection", "occlusion_projection")
    return occlusion_projection(stack, **options)
