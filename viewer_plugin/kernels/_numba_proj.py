"""Compiled inner loops of the projections (numba, CPU, parallel over rows).

Every ``*_update`` kernel is the fused *chunk + combine* step of a
chunk -> combine -> aggregate reduction: it folds one z-chunk ``block`` of
shape ``(nz, rows, cols)`` into per-pixel state arrays of shape
``(rows, cols)`` that already hold the partial result of the chunks before
it. Folding a chunk into a freshly initialised state is exactly the *chunk*
step; the pure-numpy *combine* functions in :mod:`._proj_combine` merge two
such partial results and are what the tests check for associativity.

Conventions shared by all kernels

* ``block`` is C-contiguous and of dtype uint8, uint16, float32 or float64
  (the driver converts anything else chunk by chunk).
* ``z0`` is the global index of ``block[0]`` (the chunk's offset).
* Normalised intensity ``u = clip((x - lo) * scale, 0, 1)``; NaN gives 0.
* Rows are processed in parallel (``prange``); the inner loop runs over the
  contiguous last axis and is written without branches so LLVM vectorises it.

Nothing here validates input: the public functions in :mod:`.projections` do.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange, types
from numba.extending import overload

__all__ = [
    "brightest_update",
    "weighted_update",
    "tinted_update",
    "blend_update_lut",
    "blend_update_float",
    "blend_rgb_update_lut",
    "blend_rgb_update_float",
    "colour_from_depth",
]

_OPTS = dict(parallel=True, cache=True, nogil=True)


def _top(x, y):
    """Larger of x and y, NaN ignored (numpy.fmax); plain max for integers."""
    return np.fmax(x, y)


@overload(_top, inline="always")
def _top_impl(x, y):
    if isinstance(x, types.Float) or isinstance(y, types.Float):
        return lambda x, y: np.fmax(x, y)
    return lambda x, y: max(x, y)  # integer max vectorises better than fmax


@njit(**_OPTS)
def brightest_update(block, z0, vals, idx):
    """Fold *block* into (maximum, index of first maximum); NaN is skipped.

    State: ``vals`` (block dtype; NaN for floats and the dtype's minimum for
    integers at the start) and ``idx`` (int32, -1 = no number seen yet).
    Ties keep the earlier index; ``fmax`` ignores NaN.
    """
    nz, nr, nc = block.shape
    for r in prange(nr):
        v = vals[r]
        ix = idx[r]
        for z in range(nz):
            row = block[z, r]
            zz = np.int32(z0 + z)
            for c in range(nc):
                x = row[c]
                cur = v[c]
                i = ix[c]
                take = (x > cur) | ((i < 0) & (x == x))
                # branch-free blends: a conditional store would become a slow
                # masked store (vmaskmov) once vectorised
                v[c] = _top(x, cur)
                ix[c] = i ^ ((i ^ zz) & -np.int32(take))


#: Planes summed in float32 before the partial sums go into float64 state.
_GROUP = 16


@njit(**_OPTS)
def weighted_update(block, z0, lo, scale, vals, sum_u, sum_uz):
    """Fold *block* into (max, sum of u, sum of u * z).

    ``vals`` starts at the dtype's minimum for integers and NaN for floats.
    u is float32; groups of up to 16 planes are summed in float32 (exact to
    ~1e-6 relative) and then added to the float64 accumulators.
    """
    nz, nr, nc = block.shape
    lo32 = np.float32(lo)
    sc32 = np.float32(scale)
    for r in prange(nr):
        v = vals[r]
        su = sum_u[r]
        suz = sum_uz[r]
        gu = np.empty(nc, np.float32)
        guz = np.empty(nc, np.float32)
        for g0 in range(0, nz, _GROUP):
            gu[:] = 0.0
            guz[:] = 0.0
            for z in range(g0, min(nz, g0 + _GROUP)):
                row = block[z, r]
                zf = np.float32(z - g0)
                for c in range(nc):
                    x = row[c]
                    v[c] = _top(x, v[c])
                    u = (np.float32(x) - lo32) * sc32
                    u = u if u > np.float32(0.0) else np.float32(0.0)
                    u = u if u < np.float32(1.0) else np.float32(1.0)
                    gu[c] += u
                    guz[c] += u * zf
            base = np.float64(z0 + g0)
            for c in range(nc):
                su[c] += gu[c]
                suz[c] += guz[c] + base * gu[c]


@njit(**_OPTS)
def tinted_update(block, z0, lo, scale, colours, vals, idx, tint):
    """Fold *block* into (max, argmax, channel-wise max of colour * u).

    ``colours[z]`` is the (already gamma-adjusted) colour of global slice z;
    ``tint`` is planar, shape (3, rows, cols), float32.
    """
    nz, nr, nc = block.shape
    lo32 = np.float32(lo)
    sc32 = np.float32(scale)
    for r in prange(nr):
        v = vals[r]
        ix = idx[r]
        t0 = tint[0, r]
        t1 = tint[1, r]
        t2 = tint[2, r]
        for z in range(nz):
            row = block[z, r]
            zz = np.int32(z0 + z)
            c0 = np.float32(colours[z0 + z, 0])
            c1 = np.float32(colours[z0 + z, 1])
            c2 = np.float32(colours[z0 + z, 2])
            for c in range(nc):
                x = row[c]
                cur = v[c]
                i = ix[c]
                take = (x > cur) | ((i < 0) & (x == x))
                v[c] = _top(x, cur)
                ix[c] = i ^ ((i ^ zz) & -np.int32(take))
                u = (np.float32(x) - lo32) * sc32
                u = u if u > np.float32(0.0) else np.float32(0.0)
                u = u if u < np.float32(1.0) else np.float32(1.0)
                t0[c] = np.maximum(t0[c], c0 * u)
                t1[c] = np.maximum(t1[c], c1 * u)
                t2[c] = np.maximum(t2[c], c2 * u)


@njit(**_OPTS)
def blend_update_lut(block, table, offset, reverse, colour, trans):
    """Front-to-back compositing of an integer *block* through a table.

    ``table[x + offset] = (a * u, 1 - a)`` for every integer value x.
    *reverse* composites from the last slice of the block to the first.
    """
    nz, nr, nc = block.shape
    for r in prange(nr):
        col = colour[r]
        tr = trans[r]
        for k in range(nz):
            z = nz - 1 - k if reverse else k
            row = block[z, r]
            for c in range(nc):
                j = np.int64(row[c]) + offset
                t = tr[c]
                col[c] += t * table[j, 0]
                tr[c] = t * table[j, 1]


@njit(**_OPTS)
def blend_update_float(block, lo, scale, kappa, reverse, colour, trans):
    """Front-to-back compositing of a floating-point *block* (exact exp)."""
    nz, nr, nc = block.shape
    for r in prange(nr):
        col = colour[r]
        tr = trans[r]
        for k in range(nz):
            z = nz - 1 - k if reverse else k
            row = block[z, r]
            for c in range(nc):
                u = (np.float64(row[c]) - lo) * scale
                u = u if u > 0.0 else 0.0
                u = u if u < 1.0 else 1.0
                t = tr[c]
                keep = np.exp(-kappa * u)
                col[c] += t * (1.0 - keep) * u
                tr[c] = t * keep


@njit(**_OPTS)
def blend_rgb_update_lut(block, z0, table, offset, reverse, colours, colour, trans):
    """As :func:`blend_update_lut`, emitting ``u * colours[z]``; planar RGB state (3, rows, cols)."""
    nz, nr, nc = block.shape
    for r in prange(nr):
        k0 = colour[0, r]
        k1 = colour[1, r]
        k2 = colour[2, r]
        tr = trans[r]
        for k in range(nz):
            z = nz - 1 - k if reverse else k
            row = block[z, r]
            c0 = colours[z0 + z, 0]
            c1 = colours[z0 + z, 1]
            c2 = colours[z0 + z, 2]
            for c in range(nc):
                j = np.int64(row[c]) + offset
                t = tr[c]
                e = t * table[j, 0]
                k0[c] += e * c0
                k1[c] += e * c1
                k2[c] += e * c2
                tr[c] = t * table[j, 1]


@njit(**_OPTS)
def blend_rgb_update_float(block, z0, lo, scale, kappa, reverse, colours, colour, trans):
    """As :func:`blend_update_float`, emitting ``u * colours[z]``; planar RGB state (3, rows, cols)."""
    nz, nr, nc = block.shape
    for r in prange(nr):
        k0 = colour[0, r]
        k1 = colour[1, r]
        k2 = colour[2, r]
        tr = trans[r]
        for k in range(nz):
            z = nz - 1 - k if reverse else k
            row = block[z, r]
            c0 = colours[z0 + z, 0]
            c1 = colours[z0 + z, 1]
            c2 = colours[z0 + z, 2]
            for c in range(nc):
                u = (np.float64(row[c]) - lo) * scale
                u = u if u > 0.0 else 0.0
                u = u if u < 1.0 else 1.0
                t = tr[c]
                keep = np.exp(-kappa * u)
                e = t * (1.0 - keep) * u
                k0[c] += e * c0
                k1[c] += e * c1
                k2[c] += e * c2
                tr[c] = t * keep


@njit(**_OPTS)
def colour_from_depth(depth_um, bright, d0, span, lut, rgb):
    """rgb = lut[index(depth)] * bright for 2-D (rows, cols) inputs.

    ``index = clip(floor(t * N), 0, N - 1)`` with ``t = (depth - d0) / span``
    clipped to [0, 1] -- the rule of matplotlib's ``Colormap.__call__``.
    NaN depth gives black.
    """
    nr, nc = depth_um.shape
    n = lut.shape[0]
    for r in prange(nr):
        for c in range(nc):
            d = np.float64(depth_um[r, c])
            b = bright[r, c]
            if d != d:
                rgb[r, c, 0] = 0.0
                rgb[r, c, 1] = 0.0
                rgb[r, c, 2] = 0.0
                continue
            t = (d - d0) / span
            t = min(max(t, 0.0), 1.0)
            j = min(int(t * n), n - 1)
            rgb[r, c, 0] = lut[j, 0] * b
            rgb[r, c, 1] = lut[j, 1] * b
            rgb[r, c, 2] = lut[j, 2] * b

