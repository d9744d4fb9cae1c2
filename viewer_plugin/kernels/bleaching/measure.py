"""Measurement helpers of the bleaching kernels: fixed foreground masks and per-frame profiles.

The per-frame signal is the mean of the background-subtracted voxels inside one
*fixed* foreground mask, so that a structure which changes between frames does
not read as a change of brightness. Masks come from Otsu's threshold
(:func:`..primitives.threshold.otsu_mask`), backgrounds from the sigma-clipped
background level (:mod:`..primitives.background`). Reductions run chunk by
chunk along the acquisition axis (numpy and dask share the code).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..._shared.progress import report_progress
from ..._shared.validation import fail, is_dask
from ..primitives.background import background_level
from ..primitives.chunks import depth_chunks, plane_nbytes
from ..primitives.threshold import otsu_mask

__all__ = ["masked_profile", "per_slice_masks", "reference_mask"]


def _as_numpy(block: Any) -> np.ndarray:
    if is_dask(block):
        block = block.compute()
    return np.asarray(block)


def reference_mask(moved: Any) -> np.ndarray:
    """The fixed foreground of a time series: Otsu foreground of the smoothed first frame.

    The first frame holds the structure that was there when acquisition
    started; a structure appearing later is not in the mask and so cannot
    read as a change of brightness.
    """
    return otsu_mask(_as_numpy(moved[0]))


def masked_profile(
    moved: Any,
    mask: np.ndarray | None,
    *,
    progress: Any = None,
    done: int = 0,
    total: int = 1,
) -> tuple[np.ndarray, np.ndarray]:
    """Mean over *mask*, background level, foreground fraction and background sd of every frame.

    All float64, one value per frame of a depth-first array. With ``mask=None``
    every frame uses its own Otsu foreground (for the slices of one stack,
    which show different structures); a frame without one uses all voxels. The background of each frame is the
    sigma-clipped mean of its dim voxels (``background_level``), so a
    haze that fades with the signal is subtracted frame by frame.
    """
    n = int(moved.shape[0])
    if mask is not None:
        mask = np.broadcast_to(mask, tuple(moved.shape[1:]))
        if not mask.any():
            fail("mask", "at least one foreground voxel", "<an empty mask>")
    out = np.empty(n, dtype=np.float64)
    levels = np.empty(n, dtype=np.float64)
    counts = np.empty(n, dtype=np.float64)
    sigmas = np.empty(n, dtype=np.float64)
    plane = plane_nbytes(tuple(moved.shape), moved.dtype)
    for part in depth_chunks(n, plane):
        block = _as_numpy(moved[part])
        for j, frame in enumerate(block):
            here = mask if mask is not None else otsu_mask(frame)
            if not here.any():
                here = np.ones(frame.shape, dtype=bool)
            values = frame[here].astype(np.float64, copy=False)
            finite = np.isfinite(values) if values.dtype.kind == "f" else None
            if finite is not None and not finite.all():
                values = values[finite]
            out[part.start + j] = float(values.mean()) if values.size else np.nan
            counts[part.start + j] = np.count_nonzero(here) / here.size
            background = background_level(frame)
            levels[part.start + j] = background.level
            sigmas[part.start + j] = background.sigma
        done += part.stop - part.start
        report_progress(progress, done, total)
    return out, levels, counts, sigmas


def per_slice_masks(forward: Any, reverse: Any, *, progress: Any = None,
                    min_contrast: float = 3.0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Mean foreground signal of each slice of two passes on one shared mask per slice.

    The mask of slice *i* is the Otsu foreground of the (smoothed) average of
    the two passes' slice *i*: the same structure in both, so the ratio of the
    two profiles cancels structure. Each pass's slice has its own background
    subtracted (a haze fades with the signal, differently in the two passes).

    Returns
    -------
    forward, reverse : ndarray of float64
        Background-subtracted mean foreground per slice.
    valid : ndarray of bool
        Slices whose foreground stands at least *min_contrast* background
        standard deviations above the background in both passes (a slice
        without structure holds only noise and is left out of the fits).
    """
    n = int(forward.shape[0])
    fwd = np.empty(n, dtype=np.float64)
    rev = np.empty(n, dtype=np.float64)
    valid = np.zeros(n, dtype=bool)
    for i in range(n):
        a = _as_numpy(forward[i]).astype(np.float64)
        b = _as_numpy(reverse[i]).astype(np.float64)
        mask = otsu_mask(0.5 * (a + b))
        if not mask.any():
            mask = np.ones(a.shape, dtype=bool)
        bg_a, bg_b = background_level(a), background_level(b)
        fwd[i] = float(a[mask].mean()) - bg_a.level
        rev[i] = float(b[mask].mean()) - bg_b.level
        valid[i] = bool(fwd[i] > min_contrast * bg_a.sigma and rev[i] > min_contrast * bg_b.sigma)
        report_progress(progress, i + 1, n)
    return fwd, rev, valid
