"""The path job: depth and peak along a path drawn over a projection (docks and Python)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from .._shared.validation import fail
from .projection import Projected

__all__ = ["path_profile"]


@dataclass(frozen=True)
class _PlanePeaks:
    """One 2-D plane of a projection's peak and depth (what the path kernel reads)."""

    peak: np.ndarray
    depth_um: np.ndarray
    z_step: float


def path_profile(projected: Projected, path_yx: Any, *, index: Sequence[int] = (),
                 neighbourhood: int = 1) -> Any:
    """Depth (µm) and peak along *path_yx* over the plane *index* of a projection.

    Parameters
    ----------
    projected : Projected
        A peak depth map ("max") or a depth-coded result, from
        :func:`~viewer_plugin.jobs.projection.project_stack`.
    path_yx : (N, 2) array_like
        Path vertices in pixels of the projected image, (row, column).
    index : sequence of int
        The plane, for results with time or channel axes before the image.
    neighbourhood : int
        Half-width in pixels of the window a depth is read from robustly.

    Returns
    -------
    PathProfile
        See :func:`viewer_plugin.kernels.depth_along_path`; the pixel size is
        the projection's own (µm per row and per column).

    Raises
    ------
    ParameterError
        For an occlusion rendering (it has no depth per pixel), a bad plane
        index or a bad path.
    """
    from ..kernels import depth_along_path

    result = projected.result
    if projected.method == "occlusion" or not hasattr(result, "depth_um"):
        fail("projection", "a peak depth map or a depth-coded projection (they keep a depth "
             "per pixel)", f"<method {projected.method}>")
    depth, peak = np.asarray(result.depth_um), np.asarray(result.peak)
    lead = depth.ndim - 2
    index = tuple(int(i) for i in index)
    if len(index) != lead or any(not 0 <= k < n for k, n in zip(index, depth.shape)):
        fail("index", f"{lead} plane indices within {depth.shape[:lead]}", index)
    plane = _PlanePeaks(peak[index], depth[index], float(projected.provenance["z_step_um"]))
    return depth_along_path(plane, path_yx, pixel_size_um=projected.geometry.pixel_size_um,
                            neighbourhood=neighbourhood)
