"""Depth chunks: how kernels walk a stack slice block by slice block.

What it is: :func:`depth_chunks` plans z-chunks of about 16 MiB of input
(chunk -> combine -> aggregate reductions read one at a time);
:func:`map_depth_blocks` runs a per-block function over a stack into a new
float32 stack -- chunk by chunk into one preallocated result for numpy
input, lazily with one task per block for dask input.

Where it is used: every reduction of the projection, attenuation and
bleaching kernels (:func:`depth_chunks`), and every kernel that writes a
corrected stack: the per-slice gains (:mod:`.gain`), the quantile model of
the attenuation correction and the histogram equalisation of a series
(:func:`map_depth_blocks`).
"""

from __future__ import annotations

from typing import Any, Callable, Iterator

import numpy as np

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import depth_first, is_dask

__all__ = ["DEFAULT_CHUNK_BYTES", "depth_chunks", "map_depth_blocks", "plane_nbytes"]

#: Target size of one z-chunk of the input that a kernel holds at a time.
DEFAULT_CHUNK_BYTES = 16 * 2**20

#: ``block_fn(src, dst, start)``: fill the float32 block *dst* from the input block *src*
#: (both depth first, same shape) whose first slice has index *start* along the depth axis.
BlockFunction = Callable[[np.ndarray, np.ndarray, int], None]


def depth_chunks(
    n_depth: int, plane_bytes: int, *, target_bytes: int = DEFAULT_CHUNK_BYTES
) -> Iterator[slice]:
    """Yield slices over the depth axis, each about *target_bytes* of input.

    Parameters
    ----------
    n_depth : int
        Length of the depth axis.
    plane_bytes : int
        Bytes of one plane (all other axes).
    target_bytes : int
        Wanted bytes per chunk; at least one plane per chunk.

    Examples
    --------
    >>> [(s.start, s.stop) for s in depth_chunks(10, 4, target_bytes=12)]
    [(0, 3), (3, 6), (6, 9), (9, 10)]
    """
    step = max(1, int(target_bytes // max(1, plane_bytes)))
    for start in range(0, n_depth, step):
        yield slice(start, min(n_depth, start + step))


def plane_nbytes(shape: tuple[int, ...], dtype: np.dtype) -> int:
    """Bytes of one plane of a depth-first array of *shape*."""
    return int(np.prod(shape[1:], dtype=np.int64)) * np.dtype(dtype).itemsize


def map_depth_blocks(stack: Any, block_fn: BlockFunction, *, axis: int,
                     whole_planes: bool = False, progress: Progress = None) -> Any:
    """A new float32 stack made block by block along the depth axis by *block_fn*.

    Parameters
    ----------
    stack : ndarray or dask array
        The input; never modified.
    block_fn : callable
        ``block_fn(src, dst, start)`` writes the result of the depth-first
        block *src* (first slice *start*) into the float32 block *dst*.
    axis : int
        The depth axis (non-negative).
    whole_planes : bool
        Dask input only: rechunk so that each block holds whole planes (for
        functions that need a whole slice at a time).
    progress : callable, optional
        ``progress(done, total)`` between z-chunks (numpy input only).

    Returns
    -------
    ndarray or dask array of float32
        Same shape as *stack*: filled chunk by chunk into one preallocated
        array for numpy input; lazy, one task per input block, for dask input.

    Examples
    --------
    >>> def double(src, dst, start):
    ...     np.multiply(src, 2, out=dst, casting="unsafe")
    >>> map_depth_blocks(np.arange(6).reshape(3, 2, 1), double, axis=0)[:, :, 0].tolist()
    [[0.0, 2.0], [4.0, 6.0], [8.0, 10.0]]
    """
    if is_dask(stack):
        return _map_dask(stack, block_fn, axis, whole_planes)
    stack = np.asarray(stack)
    out = np.empty(stack.shape, dtype=np.float32)
    src = depth_first(stack, axis)
    dst = depth_first(out, axis)
    chunks = list(depth_chunks(src.shape[0], plane_nbytes(src.shape, src.dtype)))
    for done, part in enumerate(chunks, start=1):
        block_fn(src[part], dst[part], part.start)
        report_progress(progress, done, len(chunks))
    return out


def _map_dask(stack: Any, block_fn: BlockFunction, axis: int, whole_planes: bool) -> Any:
    import dask.array as da

    if whole_planes:
        stack = stack.rechunk({i: -1 for i in range(stack.ndim) if i != axis})

    def one_block(block: np.ndarray, block_info: Any = None) -> np.ndarray:
        start = block_info[0]["array-location"][axis][0]
        src = np.moveaxis(np.asarray(block), axis, 0)
        dst = np.empty(src.shape, dtype=np.float32)
        block_fn(src, dst, start)
        return np.moveaxis(dst, 0, axis)

    return da.map_blocks(one_block, stack, dtype=np.float32,
                         meta=np.empty((0,) * stack.ndim, dtype=np.float32))
