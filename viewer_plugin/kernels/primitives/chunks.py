"""Chunk helpers shared by the kernels (chunk -> combine -> aggregate)."""

from __future__ import annotations

from typing import Iterator

import numpy as np

__all__ = ["depth_chunks", "DEFAULT_CHUNK_BYTES"]

#: Target size of one z-chunk of the input that a kernel holds at a time.
DEFAULT_CHUNK_BYTES = 16 * 2**20


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
