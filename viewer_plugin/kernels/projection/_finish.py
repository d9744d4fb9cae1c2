"""Compiled aggregate steps of the projections: depth, brightness and colour from a final state.

Every function here turns the per-pixel state a fold of :mod:`._compiled`
left (maximum and slice, weighted sums, channel-wise tint) into the images of
a result, row by row in parallel. The depth-coded projections and
:meth:`~.depth_colour.DepthCodedProjection.recolour` call the same functions,
so recolouring gives exactly what a new projection gives; the 2-D key of
:mod:`.legend` is painted by :func:`finish_colour` too.

Conventions as in :mod:`._compiled` (C-contiguous 2-D (rows, cols) inputs,
float32 outputs); nothing here validates input.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange, types
from numba.extending import overload

from ._compiled import _OPTS, _above, _max_ordered, _min_ordered

__all__ = [
    "brightness_table",
    "finish_brightness",
    "finish_colour",
    "finish_depth_index",
    "finish_depth_sums",
    "finish_peak_colour",
    "finish_tint",
    "slice_rows",
]


@njit(inline="always")
def _brightness_of(x, lo, scale, gamma):
    """``clip((x - lo) * scale, 0, 1) ** gamma`` in float64; NaN gives 0.

    0 and 1 are returned without the power (0 ** g = 0 and 1 ** g = 1 exactly
    for g > 0, C99 pow): values outside the display range cost no power.
    """
    b = (np.float64(x) - lo) * scale
    b = b if b > 0.0 else 0.0
    b = b if b < 1.0 else 1.0
    return b if (gamma == 1.0) | (b == 0.0) | (b == 1.0) else b ** gamma


@njit(inline="always")
def _lut_row(depth, d0, span, n):
    """Entry of an *n*-colour table for *depth* (0 for NaN), the rule of matplotlib's
    ``Colormap.__call__``: ``floor(clip(t * N, 0, N - 1))``, ``t = (depth - d0) / span``.

    Clamped in floating point before the conversion: an integer ``min`` would
    be a branch, mispredicted wherever depths fall outside the range.
    """
    t = (depth - d0) / span if depth == depth else 0.0
    return int(_min_ordered(_max_ordered(t * n, 0.0), n - 1.0))


@njit(inline="always")
def _paint(depth, bright, d0, span, lut, out, c):
    """out[c] = lut[index(depth)] * bright; black where depth is NaN. *out* is (cols, 3).

    Written without a branch: a NaN depth paints entry 0 times 0.
    """
    j = _lut_row(depth, d0, span, lut.shape[0])
    b = bright if depth == depth else 0.0
    out[c, 0] = lut[j, 0] * b
    out[c, 1] = lut[j, 1] * b
    out[c, 2] = lut[j, 2] * b


@njit(inline="always")
def _index_depth(x, i, lo, z_step):
    """Depth in µm of slice *i* when *x* exceeds lo, else NaN (-1 reads as 0)."""
    if x > lo:  # False for NaN
        return np.float64(max(np.int64(i), 0)) * z_step
    return np.nan


@njit(**_OPTS)
def finish_depth_index(vals, idx, lo, z_step, depth):
    """depth = index * z_step where vals > lo, else NaN; 2-D (rows, cols), float32 out."""
    nr, nc = vals.shape
    for r in prange(nr):
        for c in range(nc):
            depth[r, c] = _index_depth(vals[r, c], idx[r, c], lo, z_step)


@njit(**_OPTS)
def finish_depth_sums(sum_u, sum_uz, z_step, depth):
    """depth = sum_uz / sum_u * z_step (NaN where sum_u is 0); 2-D, float32 out."""
    nr, nc = sum_u.shape
    for r in prange(nr):
        for c in range(nc):
            w = sum_u[r, c]
            depth[r, c] = sum_uz[r, c] / w * z_step if w > 0.0 else np.nan


@njit(**_OPTS)
def finish_brightness(vals, lo, scale, gamma, bright):
    """bright = clip((vals - lo) * scale, 0, 1) ** gamma (NaN -> 0); 2-D, float32 out."""
    nr, nc = vals.shape
    for r in prange(nr):
        for c in range(nc):
            bright[r, c] = _brightness_of(vals[r, c], lo, scale, gamma)


@njit(**_OPTS)
def finish_tint(vals, lo, scale, gamma, tint):
    """The "tinted" colour, in place: ``tint = min(tint / max(1, u_max), 1) ** gamma``.

    ``u_max`` is :func:`_above` of the maximum ``vals`` (the same float32
    arithmetic as the fold), so a pixel whose maximum exceeds the upper
    display limit is scaled down as a whole, keeping its hue; below the limit
    the factor is exactly 1. ``vals`` is 2-D (rows, cols), ``tint`` planar
    float32 (3, rows, cols).
    """
    nr, nc = vals.shape
    lo32 = np.float32(lo)
    sc32 = np.float32(scale)
    g32 = np.float32(gamma)
    one = np.float32(1.0)
    for r in prange(nr):
        t0 = tint[0, r]
        t1 = tint[1, r]
        t2 = tint[2, r]
        v = vals[r]
        for c in range(nc):
            f = one / _max_ordered(_above(v[c], lo32, sc32), one)
            a = _min_ordered(t0[c] * f, one)
            b = _min_ordered(t1[c] * f, one)
            d = _min_ordered(t2[c] * f, one)
            if gamma != 1.0:
                a = a ** g32
                b = b ** g32
                d = d ** g32
            t0[c] = a
            t1[c] = b
            t2[c] = d


@njit(**_OPTS)
def brightness_table(lo, scale, gamma, table):
    """``table[x]`` = the float32 brightness of the integer value x (:func:`_brightness_of`).

    For 8/16-bit maxima: one power per possible value instead of one per
    pixel, and a lookup instead of the arithmetic; the same numbers as
    computing each pixel.
    """
    for x in prange(table.shape[0]):
        table[x] = np.float32(_brightness_of(x, lo, scale, gamma))


def _bright(x, lo, scale, gamma, table):
    """float32 brightness of *x*: from *table* for integers when it is not empty."""


@overload(_bright, inline="always")
def _bright_impl(x, lo, scale, gamma, table):
    if isinstance(x, types.Integer):
        def from_table(x, lo, scale, gamma, table):
            if table.shape[0] > 0:
                return table[x]
            return np.float32(_brightness_of(x, lo, scale, gamma))
        return from_table
    return lambda x, lo, scale, gamma, table: np.float32(_brightness_of(x, lo, scale, gamma))


@njit(cache=True, nogil=True)
def slice_rows(z_step, d0, span, n_colours, rows, depths):
    """Per slice z: the float32 depth ``z * z_step`` and its colour-table entry (:func:`_lut_row`).

    *depths* has one entry more than *rows*: NaN, the depth of a pixel without signal.
    """
    for z in range(rows.shape[0]):
        d = np.float32(np.float64(z) * z_step)
        depths[z] = d
        rows[z] = _lut_row(np.float64(d), d0, span, n_colours)
    depths[rows.shape[0]] = np.nan


@njit(**_OPTS)
def finish_peak_colour(vals, idx, lo, scale, gamma, rows, depths, lut, table, depth, bright, rgb):
    """Depth, brightness and colour of "peak" from the maximum and its slice, in one pass.

    ``depth = depths[index]`` where the maximum exceeds *lo* (NaN elsewhere),
    ``rgb = lut[rows[index]] * brightness``, with *rows* and *depths* from
    :func:`slice_rows`: the same numbers as :func:`finish_depth_index`
    followed by :func:`finish_colour` (below *lo* the brightness is 0), with
    two lookups per pixel instead of the arithmetic.
    """
    nr, nc = vals.shape
    none = np.int64(rows.shape[0])  # the NaN entry of depths
    for r in prange(nr):
        out = rgb[r]
        for c in range(nc):
            x = vals[r, c]
            i = idx[r, c]
            k = np.int64(i if i > 0 else 0)
            # k where the maximum exceeds lo (False for NaN), else the NaN entry: arithmetic, no
            # branch (a branch would be mispredicted where maxima scatter around lo)
            depth[r, c] = depths[k + (none - k) * np.int64(not x > lo)]
            b = _bright(x, lo, scale, gamma, table)
            bright[r, c] = b
            j = rows[k]
            b64 = np.float64(b)
            out[c, 0] = lut[j, 0] * b64
            out[c, 1] = lut[j, 1] * b64
            out[c, 2] = lut[j, 2] * b64


@njit(**_OPTS)
def finish_colour(vals, depth, lo, scale, gamma, d0, span, lut, table, bright, rgb):
    """Brightness and ``rgb = lut[index(depth)] * brightness`` (black where depth is NaN).

    2-D ``vals`` and float32 ``depth`` (rows, cols); float32 outputs
    ``bright`` (rows, cols) and ``rgb`` (rows, cols, 3). The colour is taken
    from the stored float32 values, so it matches what is returned. *table*
    (float32, from :func:`brightness_table`, or empty) gives the brightness
    of integer values.
    """
    nr, nc = vals.shape
    for r in prange(nr):
        out = rgb[r]
        for c in range(nc):
            b = _bright(vals[r, c], lo, scale, gamma, table)
            bright[r, c] = b
            _paint(np.float64(depth[r, c]), np.float64(b), d0, span, lut, out, c)
