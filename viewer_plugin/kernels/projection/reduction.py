"""Plumbing of the projections: z-chunk iteration, partial results, combines.

Each projection is a chunk -> combine -> aggregate reduction (the pattern of
``dask.array.reductions``):

* *chunk*: fold one z-chunk into a partial result (compiled, in
  :mod:`._compiled`; the kernels fold straight into the running partial,
  which is the chunk step and the combine step fused);
* *combine*: merge two partial results of adjacent depth ranges -- the pure
  functions :func:`combine_peak`, :func:`combine_weighted`,
  :func:`combine_tinted` and :func:`over` below (associative, so partials of
  z-chunks can be merged in any grouping, in depth order);
* *aggregate*: turn the final partial into the result (in each projection's module).

The same driver (:func:`fold_chunks`) walks a numpy array or the z-chunks of a
dask array (each chunk is computed, folded, dropped).
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from ..._shared.progress import report_progress
from ..._shared.validation import is_dask
from ..primitives.chunks import depth_chunks

__all__ = [
    "kernel_dtype",
    "fold_chunks",
    "combine_peak",
    "combine_weighted",
    "combine_tinted",
    "over",
]

#: z-chunk size (input bytes) for numpy inputs the kernels read in place.
CHUNK_BYTES = 64 * 2**20
#: z-chunk size (converted bytes) when chunks must be copied (dtype or layout).
COPY_CHUNK_BYTES = 8 * 2**20

_NATIVE = (np.dtype(np.uint8), np.dtype(np.uint16), np.dtype(np.float32), np.dtype(np.float64))


def kernel_dtype(dtype: Any) -> np.dtype:
    """The dtype the compiled kernels see for input of *dtype*.

    uint8, uint16, float32 and float64 are read in place; bool as uint8;
    float16, int8 and int16 as float32 (exact); everything else as float64
    (exact for integers up to 2**53).
    """
    dtype = np.dtype(dtype)
    if dtype in _NATIVE:
        return dtype
    if dtype == np.bool_:
        return np.dtype(np.uint8)
    if dtype.itemsize <= 2:
        return np.dtype(np.float32)
    return np.dtype(np.float64)


def _as_block(chunk: np.ndarray, index: tuple, kdtype: np.dtype) -> np.ndarray:
    """The (planes, rows, cols) block of *chunk* at leading *index*, kernel-ready."""
    block = chunk[(slice(None),) + index]
    if block.dtype == np.bool_:
        block = block.view(np.uint8)
    if block.dtype != kdtype or not block.flags.c_contiguous:
        block = np.ascontiguousarray(block, dtype=kdtype)
    return block


def _chunk_bounds(v: Any) -> list[tuple[int, int]]:
    """(start, stop) of the z-chunks to fold, in increasing depth."""
    n = int(v.shape[0])
    plane = int(np.prod(v.shape[1:], dtype=np.int64))
    if is_dask(v):
        return _dask_bounds(tuple(v.chunks[0]), plane * v.dtype.itemsize)
    in_place = np.dtype(v.dtype) in _NATIVE and _blocks_contiguous(v)
    if in_place:
        target, itemsize = CHUNK_BYTES, v.dtype.itemsize
    else:
        target, itemsize = COPY_CHUNK_BYTES, kernel_dtype(v.dtype).itemsize
    return [(s.start, s.stop) for s in depth_chunks(n, plane * itemsize, target_bytes=target)]


def _dask_bounds(chunks: tuple, plane_bytes: int) -> list[tuple[int, int]]:
    """Whole dask z-chunks, neighbours grouped up to COPY_CHUNK_BYTES each.

    A dask chunk is never split (that would read it several times); small
    ones (e.g. one plane each) are computed together to save overhead.
    """
    bounds: list[tuple[int, int]] = []
    start = stop = 0
    for size in chunks:
        if stop > start and (stop - start + size) * plane_bytes > COPY_CHUNK_BYTES:
            bounds.append((start, stop))
            start = stop
        stop += int(size)
    if stop > start:
        bounds.append((start, stop))
    return bounds


def _blocks_contiguous(v: np.ndarray) -> bool:
    """True when every (planes, rows, cols) block of *v* is C-contiguous."""
    probe = v[(slice(None),) + (0,) * (v.ndim - 3)]
    return bool(probe.flags.c_contiguous)


def fold_chunks(
    v: Any,
    fold: Callable[[np.ndarray, int, tuple], None],
    *,
    reverse: bool = False,
    progress: Any = None,
) -> None:
    """Call ``fold(block, z0, index)`` for every z-chunk and leading index.

    Parameters
    ----------
    v : ndarray or dask array
        Depth-first stack, shape (n, ..., rows, cols).
    fold : callable
        Receives a C-contiguous (planes, rows, cols) block in the kernel
        dtype, the global depth index of its first plane and the index of
        the leading (non-image) axes it belongs to.
    reverse : bool
        Visit chunks from the deepest to the first (for bottom views).
    progress : callable, optional
        ``progress(done, total)`` between chunks; may raise Cancelled.
    """
    bounds = _chunk_bounds(v)
    if reverse:
        bounds = bounds[::-1]
    kdtype = kernel_dtype(v.dtype)
    leading = list(np.ndindex(*v.shape[1:-2]))
    total = len(bounds)
    report_progress(progress, 0, total)
    for done, (start, stop) in enumerate(bounds, 1):
        chunk = v[start:stop]
        if is_dask(chunk):
            chunk = np.asarray(chunk.compute())
        for index in leading:
            fold(_as_block(chunk, index, kdtype), start, index)
        del chunk
        report_progress(progress, done, total)


# --- combine: merge the partial results of two adjacent depth ranges ---------

def combine_peak(first: tuple, second: tuple) -> tuple:
    """Merge (values, index) partials; *first* covers the shallower slices.

    The second wins only where it holds a number and is strictly brighter
    (or the first holds none), so ties keep the smaller index (as
    numpy.argmax) whatever the grouping of the chunks.
    """
    v1, i1 = first
    v2, i2 = second
    take = (i2 >= 0) & ((v2 > v1) | (i1 < 0))
    return np.where(take, v2, v1), np.where(take, i2, i1)


def combine_weighted(first: tuple, second: tuple) -> tuple:
    """Merge (max, sum of u, sum of u*z) partials of the weighted depth."""
    v1, s1, t1 = first
    v2, s2, t2 = second
    take = (v2 > v1) | np.isnan(v1) if v1.dtype.kind == "f" else v2 > v1
    return np.where(take, v2, v1), s1 + s2, t1 + t2


def combine_tinted(first: tuple, second: tuple) -> tuple:
    """Merge (values, index, tint) partials: peak + channel max."""
    values, index = combine_peak(first[:2], second[:2])
    return values, index, np.maximum(first[2], second[2])


def over(front: tuple, back: tuple) -> tuple:
    """Porter & Duff's "over" on (colour, transmittance) partials.

    ``C = C_front + T_front * C_back`` and ``T = T_front * T_back`` with
    premultiplied colour and transmittance ``T = 1 - alpha``. Associative.
    *colour* may carry a leading RGB axis; *transmittance* broadcasts.
    """
    c1, t1 = front
    c2, t2 = back
    return c1 + t1 * c2, t1 * t2
