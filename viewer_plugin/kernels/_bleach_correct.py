"""Per-frame corrections of the bleaching kernels (numpy chunk by chunk, or lazy dask).

``fit`` and ``ratio`` scale the background-subtracted signal of each frame by a
gain and put the background back: ``(I - offset) * g + offset``. ``histogram``
maps each frame's cumulative histogram onto the first frame's (histogram
specification; scikit-image's ``match_histograms`` does the same and is the
reference of the tests).
"""

from __future__ import annotations

from functools import partial
from typing import Any

import numpy as np

from ._chunks import depth_chunks, plane_nbytes
from ._validate import is_dask, report_progress

__all__ = ["apply_gains", "match_frames", "template_cdf"]


def _gain_shape(ndim: int, axis: int, n: int) -> tuple[int, ...]:
    shape = [1] * ndim
    shape[axis] = n
    return tuple(shape)


def apply_gains(series: Any, gains: np.ndarray, offset: float, *, axis: int, progress: Any = None) -> Any:
    """``(series - offset) * gains[t] + offset`` as float32; lazy for dask input."""
    gains32 = gains.astype(np.float32).reshape(_gain_shape(series.ndim, axis, gains.size))
    off = np.float32(offset)
    if is_dask(series):
        return (series.astype(np.float32) - off) * gains32 + off
    out = np.empty(series.shape, dtype=np.float32)
    moved_in = np.moveaxis(np.asarray(series), axis, 0)
    moved_out = np.moveaxis(out, axis, 0)
    flat_gains = gains.astype(np.float32)
    plane = plane_nbytes(tuple(moved_in.shape), moved_in.dtype)
    n = moved_in.shape[0]
    for part in depth_chunks(n, plane):
        block = moved_out[part]                      # a view into the output: no temporaries
        np.subtract(moved_in[part], off, out=block, dtype=np.float32, casting="unsafe")
        block *= flat_gains[part].reshape((-1,) + (1,) * (block.ndim - 1))
        block += off
        report_progress(progress, part.stop, n)
    return out


def template_cdf(reference: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values of *reference* and their cumulative fractions."""
    values, counts = np.unique(np.asarray(reference).ravel(), return_counts=True)
    return values.astype(np.float64), np.cumsum(counts) / reference.size


def _match_one(source: np.ndarray, values: np.ndarray, quantiles: np.ndarray) -> np.ndarray:
    """Histogram specification of one frame onto a template CDF."""
    flat = np.asarray(source).ravel()
    if flat.dtype.kind == "u" and flat.dtype.itemsize <= 2:
        counts = np.bincount(flat)
        present = np.nonzero(counts)[0]
        src_quantiles = np.cumsum(counts[present]) / flat.size
        lookup_table = np.zeros(counts.size, dtype=np.float64)
        lookup_table[present] = np.interp(src_quantiles, quantiles, values)
        mapped = lookup_table[flat]
    else:
        _, inverse, counts = np.unique(flat, return_inverse=True, return_counts=True)
        src_quantiles = np.cumsum(counts) / flat.size
        mapped = np.interp(src_quantiles, quantiles, values)[inverse.ravel()]
    return mapped.reshape(source.shape).astype(np.float32)


def _match_block(block: np.ndarray, values: np.ndarray, quantiles: np.ndarray, axis: int) -> np.ndarray:
    moved = np.moveaxis(block, axis, 0)
    out = np.empty(moved.shape, dtype=np.float32)
    for i in range(moved.shape[0]):
        out[i] = _match_one(moved[i], values, quantiles)
    return np.moveaxis(out, 0, axis)


def match_frames(series: Any, *, axis: int, progress: Any = None) -> Any:
    """Match every frame's histogram to the first frame's (float32; lazy for dask)."""
    moved = np.moveaxis(series, axis, 0) if not is_dask(series) else None
    if is_dask(series):
        import dask.array as da

        first = np.asarray(da.take(series, [0], axis=axis).compute())
        values, quantiles = template_cdf(first)
        whole = {i: -1 for i in range(series.ndim) if i != axis}
        lazy = series.rechunk(whole)
        return lazy.map_blocks(partial(_match_block, values=values, quantiles=quantiles, axis=axis),
                               dtype=np.float32)
    values, quantiles = template_cdf(moved[0])
    out = np.empty(series.shape, dtype=np.float32)
    moved_out = np.moveaxis(out, axis, 0)
    n = moved.shape[0]
    for i in range(n):
        moved_out[i] = _match_one(moved[i], values, quantiles)
        report_progress(progress, i + 1, n)
    return out
