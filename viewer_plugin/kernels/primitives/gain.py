"""Per-slice gains about an offset: ``(I - offset) * gain + offset`` as a new float32 stack.

What it is: the one way a correction rescales slices or frames. The formula
is evaluated as ``I * gain + offset * (1 - gain)`` by a compiled loop that
reads each input voxel once and writes its float32 result once: chunk by
chunk into one preallocated float32 result for numpy input (no float64 copy
of the stack), and lazily with one task per block for dask input (via
:func:`.chunks.map_depth_blocks`).

Where it is used: :func:`~viewer_plugin.kernels.correct_attenuation` (the
exponential and smooth models, and slices whose quantile map was capped)
and :func:`~viewer_plugin.kernels.correct_bleaching`.
"""

from __future__ import annotations

from typing import Any

import numba
import numpy as np

from ..._shared.progress import Progress
from .chunks import map_depth_blocks

__all__ = ["apply_gains", "scale_block"]

#: Input dtypes the compiled loop reads directly (others are converted to float32 a block at a time).
_DIRECT = frozenset(np.dtype(t) for t in (np.uint8, np.uint16, np.uint32, np.uint64, np.int8,
                                          np.int16, np.int32, np.int64, np.float32, np.float64))


@numba.njit(cache=True, nogil=True)
def _scale3(src, dst, gain, shift):  # pragma: no cover - compiled
    for i in range(src.shape[0]):
        g = gain[i]
        s = shift[i]
        a = src[i]
        b = dst[i]
        for j in range(a.shape[0]):
            for k in range(a.shape[1]):
                b[j, k] = np.float32(a[j, k]) * g + s


def scale_block(src: np.ndarray, dst: np.ndarray, gain: np.ndarray, offset: float) -> None:
    """``dst = (src - offset) * gain + offset`` for a depth-first block, gains along axis 0.

    *dst* is float32 and has the shape of *src* (at least 3-D); *gain* has
    one value per slice of the block. A block of more than 3 dimensions is
    handled as 3-D blocks of its first and last two axes.
    """
    gain = np.asarray(gain, dtype=np.float64)
    gain32 = gain.astype(np.float32)
    shift32 = (offset * (1.0 - gain)).astype(np.float32)
    if src.dtype not in _DIRECT:
        src = src.astype(np.float32)
    for index in np.ndindex(*src.shape[1:-2]):
        part = (slice(None),) + index
        _scale3(src[part], dst[part], gain32, shift32)


def apply_gains(stack: Any, gains: np.ndarray, offset: float, *, axis: int,
                progress: Progress = None) -> Any:
    """``(stack - offset) * gains[i] + offset`` along *axis*, as a new float32 stack.

    Parameters
    ----------
    stack : ndarray or dask array
        Never modified.
    gains : ndarray
        One gain per slice along *axis*.
    offset : float
        The level that stays where it is (detector offset or background).
    axis : int
        The axis the gains run along (non-negative).
    progress : callable, optional
        ``progress(done, total)`` between z-chunks (numpy input only).

    Returns
    -------
    ndarray or dask array of float32
        Same shape as *stack*; lazy, one task per block, for dask input.

    Examples
    --------
    >>> stack = np.full((2, 2, 2), 110, dtype=np.uint16)
    >>> apply_gains(stack, np.array([1.0, 2.0]), 100.0, axis=0)[:, 0, 0].tolist()
    [110.0, 120.0]
    """
    gains = np.asarray(gains, dtype=np.float64)

    def block_fn(src: np.ndarray, dst: np.ndarray, start: int) -> None:
        scale_block(src, dst, gains[start:start + src.shape[0]], offset)

    return map_depth_blocks(stack, block_fn, axis=axis, progress=progress)
