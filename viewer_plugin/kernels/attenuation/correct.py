"""Streaming application of per-slice attenuation gains (private).

``out = (I - offset) * gain + offset`` is written as ``I * gain + offset * (1 - gain)``
and computed z-chunk by z-chunk into a preallocated float32 result, so no
float64 copy of the stack is ever made. Dask input gives a lazy result with
one task per input block.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from ..._shared.progress import report_progress
from ..._shared.validation import depth_first, is_dask
from ..primitives.chunks import depth_chunks, plane_nbytes
from . import models

try:  # numba is a dependency, but keep a numpy path in case it fails to import
    import numba

    @numba.njit(cache=True, nogil=True)
    def _scale_numba(src, dst, gain, shift):  # pragma: no cover - compiled
        n0 = src.shape[0]
        for i in range(n0):
            g = np.float32(gain[i])
            s = np.float32(shift[i])
            a = src[i]
            b = dst[i]
            for j in range(a.shape[0]):
                for k in range(a.shape[1]):
                    b[j, k] = np.float32(a[j, k]) * g + s

except Exception:  # noqa: BLE001 - any numba failure falls back to numpy
    _scale_numba = None


def _scale(src: np.ndarray, dst: np.ndarray, gain: np.ndarray, offset: float) -> None:
    """dst = src * gain + offset * (1 - gain), gains broadcast along axis 0."""
    gain32 = gain.astype(np.float32)
    shift32 = (offset * (1.0 - gain)).astype(np.float32)
    if (_scale_numba is not None and src.ndim == 3 and src.dtype.kind in "uif"
            and src.dtype.itemsize <= 8):
        _scale_numba(src, dst, gain32, shift32)
        return
    shape = (-1,) + (1,) * (src.ndim - 1)
    np.multiply(src, gain32.reshape(shape), out=dst, casting="unsafe")
    np.add(dst, shift32.reshape(shape), out=dst)


def _map_slices(src: np.ndarray, dst: np.ndarray, rows: range, maps: tuple,
                use_map: np.ndarray, gain: np.ndarray, offset: float) -> None:
    """Quantile model: each slice through its quantile lookup (or the capped gain)."""
    source, reference = maps
    for local, index in enumerate(rows):
        if use_map[index]:
            xs, ys = models.slice_lookup(source[index], reference)
            dst[local] = np.interp(src[local], xs, ys)
        else:
            _scale(src[local:local + 1], dst[local:local + 1], gain[index:index + 1], offset)


def _correct_block(src: np.ndarray, start: int, gain: np.ndarray, offset: float,
                   maps: tuple | None, use_map: np.ndarray | None) -> np.ndarray:
    """Correct a depth-first block whose first slice has index *start*."""
    dst = np.empty(src.shape, dtype=np.float32)
    rows = range(start, start + src.shape[0])
    if maps is None:
        _scale(src, dst, gain[start:start + src.shape[0]], offset)
    else:
        _map_slices(src, dst, rows, maps, use_map, gain, offset)
    return dst


def apply_correction(
    stack: Any,
    axis: int,
    gain: np.ndarray,
    offset: float,
    maps: tuple | None,
    use_map: np.ndarray | None,
    progress: Callable[[int, int], None] | None,
) -> Any:
    """Corrected float32 copy of *stack* (numpy) or a lazy dask array."""
    if is_dask(stack):
        return _apply_dask(stack, axis, gain, offset, maps, use_map)
    out = np.empty(stack.shape, dtype=np.float32)
    src = depth_first(stack, axis)
    dst = depth_first(out, axis)
    chunks = list(depth_chunks(src.shape[0], plane_nbytes(src.shape, src.dtype)))
    for done, part in enumerate(chunks, start=1):
        block = src[part]
        target = dst[part]
        if maps is None:
            _scale(block, target, gain[part], offset)
        else:
            _map_slices(block, target, range(part.start, part.stop), maps, use_map, gain, offset)
        report_progress(progress, done, len(chunks))
    return out


def _apply_dask(stack: Any, axis: int, gain: np.ndarray, offset: float,
                maps: tuple | None, use_map: np.ndarray | None) -> Any:
    import dask.array as da

    def block_fn(block: np.ndarray, block_info: Any = None) -> np.ndarray:
        start = block_info[0]["array-location"][axis][0]
        moved = np.moveaxis(np.asarray(block), axis, 0)
        result = _correct_block(moved, start, gain, offset, maps, use_map)
        return np.moveaxis(result, 0, axis)

    return da.map_blocks(block_fn, stack, dtype=np.float32, meta=np.empty((0,) * stack.ndim, np.float32))
