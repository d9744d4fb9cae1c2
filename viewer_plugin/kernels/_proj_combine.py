"""Plumbing of the projections: z-chunk iteration, partial results, combines.

Each projection is a chunk -> combine -> aggregate reduction (the pattern of
``dask.array.reductions``):

* *chunk*: fold one z-chunk into a partial result (compiled, in
  :mod:`._numba_proj`; the kernels fold straight into the running partial,
  which is the chunk step and the combine step fused);
* *combine*: merge two partial results of adjacent depth ranges -- the pure
  functions :func:`combine_brightest`, :func:`combine_weighted`,
  :func:`combine_tinted` and :func:`over` below (associative, so partials of
  z-chunks can be merged in any grouping, in depth order);
* *aggregate*: turn the final partial into the result (in :mod:`.projections`).

The same driver (:func:`fold_chunks`) walks a numpy array or the z-chunks of a
dask array (each chunk is computed, folded, dropped).
"""

from __future__ import annotations

import math
from typing import Any, Callable, Iterator

import numpy as np

from ._chunks import depth_chunks
from ._validate import fail, is_dask, report_progress

__all__ = [
    "kernel_dtype",
    "fold_chunks",
    "combine_brightest",
    "combine_weighted",
    "combine_tinted",
    "over",
    "estimate_clim",
    "percentiles_from_sample",
    "resolve_lut",
    "lut_index",
]

#: z-chunk size (input bytes) for numpy inputs the kernels read in place.
CHUNK_BYTES = 64 * 2**20
#: z-chunk size (converted bytes) when chunks must be copied (dtype or layout).
COPY_CHUNK_BYTES = 8 * 2**20
#: Samples used to estimate percentiles (integers / floating point).
SAMPLE_INT = 2**20
SAMPLE_FLOAT = 2**18

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

def combine_brightest(first: tuple, second: tuple) -> tuple:
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
    """Merge (values, index, tint) partials: brightest point + channel max."""
    values, index = combine_brightest(first[:2], second[:2])
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


# --- display limits --------------------------------------------------------

def _sample(v: Any, budget: int) -> np.ndarray:
    """A strided subsample of about *budget* values (whole rows of pixels)."""
    n, rows = int(v.shape[0]), int(v.shape[-2])
    need = max(1, math.ceil(int(np.prod(v.shape, dtype=np.int64)) / budget))
    step_rows = min(rows, need)
    step_z = min(n, max(1, math.ceil(need / step_rows)))
    part = v[step_z // 2 :: step_z, ..., step_rows // 2 :: step_rows, :]
    if is_dask(part):
        part = part.compute()
    return np.asarray(part).ravel()


def percentiles_from_sample(sample: np.ndarray, q: tuple[float, float]) -> tuple[float, float]:
    """Percentiles *q* of *sample* (numpy's "linear" rule), NaN/inf ignored.

    8/16-bit integers go through a histogram (exact, fast); an empty sample
    gives (0, 1).
    """
    sample = np.asarray(sample)
    if sample.dtype == np.bool_:
        sample = sample.view(np.uint8)
    if sample.dtype.kind == "u" and sample.dtype.itemsize <= 2 and sample.size:
        cum = np.cumsum(np.bincount(sample.ravel()))
        m = int(cum[-1])
        out = []
        for p in q:
            pos = p / 100.0 * (m - 1)
            i = int(math.floor(pos))
            lo = int(np.searchsorted(cum, i, side="right"))
            hi = int(np.searchsorted(cum, min(i + 1, m - 1), side="right"))
            out.append(lo + (pos - i) * (hi - lo))
        return float(out[0]), float(out[1])
    values = sample.astype(np.float64, copy=False).ravel()
    values = values[np.isfinite(values)]
    if values.size == 0:
        return 0.0, 1.0
    low, high = np.percentile(values, q)
    return float(low), float(high)


def estimate_clim(v: Any, q: tuple[float, float] = (0.1, 99.9)) -> tuple[float, float]:
    """Display limits from percentiles of a strided subsample of the stack.

    A constant stack (``high <= low``) gets ``high = low + 1`` for integer
    data (``low + 1e-6 * max(1, |low|)`` for floats): nothing in it then
    counts as signal.
    """
    kind = np.dtype(v.dtype).kind
    budget = SAMPLE_INT if kind in "uib" else SAMPLE_FLOAT
    low, high = percentiles_from_sample(_sample(v, budget), q)
    if high <= low:
        high = low + (1.0 if kind in "uib" else 1e-6 * max(1.0, abs(low)))
    return low, high


def background_floor(v: Any, n_sigma: float = 3.0) -> float:
    """Background level + *n_sigma* spreads, from a strided subsample.

    Uses :func:`.profiles.background_level` (sigma-clipped mean) on about
    2.6e5 values; the default lower limit of weighted depth codes.
    """
    from .profiles import background_level

    sample = _sample(v, SAMPLE_FLOAT).astype(np.float64)
    sample = sample[np.isfinite(sample)]
    if sample.size == 0:
        return 0.0
    bg = background_level(sample[None, :], step=1, n_sigma=n_sigma)
    return float(bg.level + n_sigma * bg.sigma)


# --- colour tables ---------------------------------------------------------

def resolve_lut(cmap: Any, *, name: str = "cmap") -> np.ndarray:
    """An (N, 3) float64 colour table from a matplotlib name, Colormap or array.

    A matplotlib colormap gives its own N entries, ``cmap(arange(N))[:, :3]``,
    so that :func:`lut_index` reproduces ``cmap(t)`` exactly.
    """
    if isinstance(cmap, str):
        import matplotlib

        try:
            cmap = matplotlib.colormaps[cmap]
        except KeyError:
            fail(name, "a matplotlib colormap name such as 'viridis' or an (N, 3) array", cmap)
    if hasattr(cmap, "N") and callable(cmap):
        return np.asarray(cmap(np.arange(int(cmap.N)))[:, :3], dtype=np.float64)
    try:
        table = np.asarray(cmap, dtype=np.float64)
    except (TypeError, ValueError):
        fail(name, "a matplotlib colormap name or an (N, 3) array", cmap)
    if table.ndim != 2 or table.shape[1] != 3 or table.shape[0] < 1:
        fail(name, "a matplotlib colormap name or an (N, 3) array", table)
    if not np.all(np.isfinite(table)) or table.min() < 0 or table.max() > 1:
        fail(name, "colour values in [0, 1]", f"<values from {np.nanmin(table)} to {np.nanmax(table)}>")
    return table.copy()


def lut_index(t: Any, n: int) -> np.ndarray:
    """Colour-table index of positions *t* (clipped to [0, 1]), as matplotlib.

    ``floor(t * n)``, with t == 1 mapped to the last entry.
    """
    t = np.clip(np.asarray(t, dtype=np.float64), 0.0, 1.0)
    return np.minimum((t * n).astype(np.int64), n - 1)


def slice_colours(lut: np.ndarray, n: int, z_step: float, depth_range: tuple) -> np.ndarray:
    """Colour of every slice (its depth ``z * z_step`` mapped through *lut*)."""
    d0, d1 = depth_range
    t = (np.arange(n, dtype=np.float64) * z_step - d0) / (d1 - d0)
    return np.ascontiguousarray(lut[lut_index(t, lut.shape[0])])


def chunk_iter(n: int, step: int) -> Iterator[tuple[int, int]]:
    """(start, stop) pairs of length *step* covering range(n) (test helper)."""
    for start in range(0, n, step):
        yield start, min(n, start + step)
