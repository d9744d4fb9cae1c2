"""Plumbing of the projections: chunk -> combine -> aggregate over depth.

Each projection is described by a :class:`DepthFold`: how to *start* a
per-pixel state, how to *fold* one (planes, rows, cols) block into it with
the compiled loops of :mod:`._compiled`, and how to *combine* the states of
two adjacent depth ranges (the pure functions :func:`combine_peak`,
:func:`combine_weighted`, :func:`combine_tinted` and :func:`over` below).
Each projection module then *aggregates* the final state into its result.

:func:`reduce_depth` runs the reduction:

* a numpy array is folded in place, z-chunk after z-chunk, into one state
  of the whole image (chunk and combine fused: no partial is ever copied);
* a dask array becomes one dask graph (:mod:`.graph`): one task per group of
  neighbouring blocks folds them into a fresh partial state, partials of the
  same lateral tile are combined in a tree in depth order, and the tile
  states are assembled once computed. The graph runs on whatever dask
  scheduler is active, so a ``dask.distributed`` client spreads the blocks
  over its workers.

The combines are associative, so any grouping of depth ranges gives the same
result; they are not all commutative ("over" is not), so partials are always
merged in depth order, and the peak keeps the smallest index on ties.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import is_dask
from ..primitives.chunks import depth_chunks
from . import _compiled as nb
from ._common import KERNEL_LOCK

__all__ = [
    "DepthFold",
    "kernel_dtype",
    "reduce_depth",
    "fold_blocks",
    "combine_peak",
    "combine_weighted",
    "combine_tinted",
    "over",
]

#: z-chunk size (input bytes) for numpy inputs the kernels read in place.
CHUNK_BYTES = 64 * 2**20
#: z-chunk size (converted bytes) when chunks must be copied (dtype or layout);
#: also the least a fold task of the dask graph reads (small blocks are grouped).
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


@dataclass(frozen=True)
class DepthFold:
    """A projection as a chunk -> combine -> aggregate reduction over depth.

    Attributes
    ----------
    start : callable
        ``start(shape)`` -> tuple of fresh state arrays for an image of
        *shape* ``(..., rows, cols)``; each array is ``(..., [extra,] rows,
        cols)`` (image axes last, e.g. a planar RGB channel before them).
    update : callable
        ``update(block, z0, state)`` folds a C-contiguous (planes, rows, cols)
        *block* whose first plane is global slice *z0* into the 2-D (or
        planar) *state* views, in place.
    combine : callable
        ``combine(earlier, later)`` -> the state of two adjacent depth
        ranges, *earlier* the one folded first (the shallower one, or the
        deeper one when *reverse*). Associative; not always commutative.
    dtype : numpy.dtype
        The dtype the compiled loops read (:func:`kernel_dtype`).
    reverse : bool
        Fold from the deepest slice to the first (a view from the bottom).

    Every callable is a module-level function or a :func:`functools.partial`
    of one, so that a fold can be sent to ``dask.distributed`` workers.
    """

    start: Callable[[tuple], tuple]
    update: Callable[[np.ndarray, int, tuple], None]
    combine: Callable[[tuple, tuple], tuple]
    dtype: np.dtype
    reverse: bool = False

    def merge(self, parts: list) -> tuple:
        """The state of consecutive depth ranges *parts* (listed shallowest first)."""
        ordered = parts[::-1] if self.reverse else parts
        merged = ordered[0]
        for part in ordered[1:]:
            merged = self.combine(merged, part)
        return merged


def reduce_depth(v: Any, fold: DepthFold, progress: Progress = None) -> tuple:
    """The final state of *fold* over the depth-first stack *v* (numpy or dask).

    numpy input is folded in place, z-chunk after z-chunk (deepest first when
    ``fold.reverse``), into one state of the whole image; dask input runs as
    one graph on the active scheduler (see :mod:`.graph`). *progress* is
    called as chunks (numpy) or groups of blocks (dask) are folded and may
    raise Cancelled, which stops the computation.
    """
    if is_dask(v):
        from .graph import reduce_dask

        return reduce_dask(v, fold, progress)
    state = fold.start(v.shape[1:])
    bounds = _chunk_bounds(v)
    if fold.reverse:
        bounds = bounds[::-1]
    report_progress(progress, 0, len(bounds))
    with KERNEL_LOCK:
        for done, (start, stop) in enumerate(bounds, 1):
            _fold_into(fold, state, v[start:stop], start)
            report_progress(progress, done, len(bounds))
    return state


def fold_blocks(fold: DepthFold, z0s: tuple, *blocks: np.ndarray) -> tuple:
    """A fresh state of *fold* after the consecutive *blocks* (first planes at *z0s*).

    The chunk step of the dask graph: *blocks* are numpy blocks of the
    depth-first stack, shape (planes, ..., rows, cols), listed shallowest
    first; global indices come from *z0s*, as dask's arg-reductions carry
    the offsets of their blocks.
    """
    state = fold.start(blocks[0].shape[1:])
    order = range(len(blocks) - 1, -1, -1) if fold.reverse else range(len(blocks))
    with KERNEL_LOCK:
        for k in order:
            _fold_into(fold, state, np.asarray(blocks[k]), z0s[k])
    return state


def _fold_into(fold: DepthFold, state: tuple, chunk: np.ndarray, z0: int) -> None:
    """Fold the depth-first numpy *chunk* (first plane: global slice *z0*) into *state*."""
    for index in np.ndindex(*chunk.shape[1:-2]):
        fold.update(_as_block(chunk, index, fold.dtype), z0, tuple(s[index] for s in state))


def _as_block(chunk: np.ndarray, index: tuple, kdtype: np.dtype) -> np.ndarray:
    """The (planes, rows, cols) block of *chunk* at leading *index*, kernel-ready."""
    block = chunk[(slice(None),) + index]
    if block.dtype == np.bool_:
        block = block.view(np.uint8)
    if block.dtype != kdtype or not block.flags.c_contiguous:
        block = np.ascontiguousarray(block, dtype=kdtype)
    return block


def _chunk_bounds(v: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of the z-chunks of a numpy stack to fold, in increasing depth."""
    n = int(v.shape[0])
    plane = int(np.prod(v.shape[1:], dtype=np.int64))
    in_place = np.dtype(v.dtype) in _NATIVE and _blocks_contiguous(v)
    if in_place:
        target, itemsize = CHUNK_BYTES, v.dtype.itemsize
    else:
        target, itemsize = COPY_CHUNK_BYTES, kernel_dtype(v.dtype).itemsize
    return [(s.start, s.stop) for s in depth_chunks(n, plane * itemsize, target_bytes=target)]


def _blocks_contiguous(v: np.ndarray) -> bool:
    """True when every (planes, rows, cols) block of *v* is C-contiguous."""
    probe = v[(slice(None),) + (0,) * (v.ndim - 3)]
    return bool(probe.flags.c_contiguous)


# --- combine: merge the partial results of two adjacent depth ranges ---------

def _image_rows(a: np.ndarray) -> np.ndarray:
    """C-contiguous 2-D (rows, cols) view (or copy) of *a*."""
    a = np.ascontiguousarray(a)
    return a.reshape(-1, a.shape[-1]) if a.ndim >= 2 else a.reshape(1, -1)


def combine_peak(first: tuple, second: tuple) -> tuple:
    """Merge (values, index) partials; *first* covers the shallower slices.

    The second wins only where it holds a number and is strictly brighter
    (or the first holds none), so ties keep the smaller index (as
    numpy.argmax) whatever the grouping of the chunks. Returns new arrays.
    """
    v1, i1 = first
    v2, i2 = second
    values, index = np.empty_like(v1, order="C"), np.empty_like(i1, order="C")
    with KERNEL_LOCK:
        nb.peak_merge(_image_rows(v1), _image_rows(i1), _image_rows(v2), _image_rows(i2),
                      _image_rows(values), _image_rows(index))
    return values, index


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
    premultiplied colour and transmittance ``T = 1 - alpha``. Associative,
    not commutative. *colour* may carry a channel axis just before the image
    axes, (..., 3, rows, cols), over transmittance (..., rows, cols); it
    keeps its dtype.
    """
    c1, t1 = front
    c2, t2 = back
    t_colour = t1 if c1.ndim == t1.ndim else t1[..., None, :, :]
    colour = np.multiply(c2, t_colour, dtype=c1.dtype)
    colour += c1
    return colour, t1 * t2
