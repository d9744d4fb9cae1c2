"""Compiled inner loops of the projections (numba, CPU, parallel over rows).

Every ``*_update`` kernel is the fused *chunk + combine* step of a
chunk -> combine -> aggregate reduction: it folds one z-chunk ``block`` of
shape ``(nz, rows, cols)`` into per-pixel state arrays of shape
``(rows, cols)`` that already hold the partial result of the chunks before
it. Folding a chunk into a freshly initialised state is exactly the *chunk*
step; the pure-numpy *combine* functions in :mod:`.reduction` merge two
such partial results and are what the tests check for associativity.

Conventions shared by all kernels

* ``block`` is C-contiguous and of dtype uint8, uint16, float32 or float64
  (the driver converts anything else chunk by chunk).
* ``z0`` is the global index of ``block[0]`` (the chunk's offset).
* Signal above the lower limit ``u = max((x - lo) * scale, 0)`` (not clipped at
  the upper limit: see :func:`_above`); NaN gives 0. The upper display limit
  is applied after the fold (:mod:`._finish`).
* Rows are processed in parallel (``prange``); the inner loop runs over the
  contiguous last axis and is written without branches so LLVM vectorises it.
* Helpers of the inner loops are inlined into numba's IR (``inline="always"``).
  The body of a ``prange`` loop is compiled as a library of its own, and in
  the process that compiles a kernel it is that library which runs: a call
  that LLVM inlines only after linking can leave its loop scalar there (the
  occlusion loops ran six to ten times slower until the kernel was next
  loaded from the cache, when their ``_depth_of`` was not inlined so).

The *aggregate* steps (depth, brightness and colour from the final state) are
in :mod:`._finish`. Nothing here validates input: the public functions in the
projection modules do.
"""

from __future__ import annotations

import functools

import numpy as np
from llvmlite import ir
from numba import njit, prange, types
from numba.core import cgutils
from numba.extending import intrinsic, overload
from numba.np.numpy_support import as_dtype

__all__ = [
    "peak_update",
    "weighted_update",
    "tinted_update",
    "peak_merge",
    "occlusion_update",
    "occlusion_rgb_update",
    "opacity_polynomial",
]

_OPTS = dict(parallel=True, cache=True, nogil=True)
#: Multiply-adds may be fused (one rounding instead of two), nothing else relaxed.
_CONTRACT = {"contract"}


def _top(x, y):
    """Larger of x and y, NaN ignored (numpy.fmax); plain max for integers."""
    return np.fmax(x, y)


@overload(_top, inline="always")
def _top_impl(x, y):
    if isinstance(x, types.Float) or isinstance(y, types.Float):
        return lambda x, y: np.fmax(x, y)
    return lambda x, y: max(x, y)  # integer max vectorises better than fmax


def _ordered(which: str):
    """``llvm.maxnum``/``llvm.minnum`` flagged *no NaN*: one vmaxps/vminps.

    Only for operands that cannot be NaN (the result is unspecified
    otherwise). numpy's maximum/fmax must propagate or skip NaN and cost three
    instructions per vector; a plain ``a if a > b else b`` store becomes a
    masked store once vectorised, which is slow on AMD processors.
    """

    @intrinsic
    def _impl(typingctx, a, b):
        if not (isinstance(a, types.Float) and a == b):
            return None

        def codegen(context, builder, signature, args):
            ty = args[0].type
            bits = 32 if ty == ir.FloatType() else 64
            fn = cgutils.get_or_insert_function(
                builder.module, ir.FunctionType(ty, [ty, ty]), f"llvm.{which}.f{bits}")
            return builder.call(fn, args, fastmath=("nnan", "nsz"))

        return a(a, b), codegen

    return _impl


_max_ordered = _ordered("maxnum")
_min_ordered = _ordered("minnum")


#: Largest signal above the lower limit the folds carry, in units of the display range
#: (2**100): keeps infinite or huge float values finite, so sums and ratios stay numbers.
_HUGE = np.float32(2.0**100)


def _above(x, lo, scale):
    """Signal above *lo*: ``min(max((x - lo) * scale, 0), 2**100)`` in float32; NaN -> 0.

    Not clipped at 1 (the upper display limit): "weighted" and "tinted" apply
    the upper limit only after the fold, so that saturation cannot move depths.
    """


@overload(_above)
def _above_impl(x, lo, scale):
    if isinstance(x, types.Integer):
        def above_int(x, lo, scale):  # no NaN possible: one max and one min
            u = (np.float32(x) - lo) * scale
            return _min_ordered(_max_ordered(u, np.float32(0.0)), _HUGE)
        return above_int

    def above_float(x, lo, scale):  # NaN compares false and becomes 0
        u = (np.float32(x) - lo) * scale
        u = u if u > np.float32(0.0) else np.float32(0.0)
        return _min_ordered(u, _HUGE)
    return above_float


def _takes(x, cur, i):
    """Whether value *x* replaces the running maximum *cur* (index *i*)."""


@overload(_takes, inline="always")
def _takes_impl(x, cur, i):
    if isinstance(x, types.Integer):
        # the maximum starts at the dtype's minimum with index -1: a ray of
        # only that value keeps -1 (read as 0, numpy's argmax) -- no first-seen test
        return lambda x, cur, i: x > cur
    return lambda x, cur, i: (x > cur) | ((i < 0) & (x == x))


def _as_index(i, value):
    """*value* cast to the integer type of the index *i* (a scalar or an array)."""


@overload(_as_index, inline="always")
def _as_index_impl(i, value):
    kind = as_dtype(i.dtype if isinstance(i, types.Array) else i).type
    return lambda i, value: kind(value)


@njit(inline="always")
def _replace(i, take, zz):
    """``zz if take else i`` without a branch (a select would become a masked store)."""
    return i ^ ((i ^ zz) & -_as_index(i, take))


#: Rows one thread folds together, four slices at a time: each slice is then
#: read as one long run instead of one short row at a time (docs/performance.md).
_BAND = 16


@njit(inline="always")
def _n_bands(nr):
    """Number of bands of ``_BAND`` rows covering *nr* rows."""
    return (nr + _BAND - 1) // _BAND


@njit(inline="always")
def _band(b, nr):
    """The rows of band *b*."""
    return range(b * _BAND, min(nr, (b + 1) * _BAND))


@njit(inline="always")
def _four_rows(block, z, r):
    """Row *r* of slices z .. z+3 of *block*."""
    return block[z, r], block[z + 1, r], block[z + 2, r], block[z + 3, r]


@njit(inline="always")
def _four_indices(ix, g):
    """Global slice indices g .. g+3 in the integer type of the index state *ix*."""
    return _as_index(ix, g), _as_index(ix, g + 1), _as_index(ix, g + 2), _as_index(ix, g + 3)


@njit(inline="always")
def _max_first(x, cur, i, zz):
    """(maximum, index) after seeing *x* at slice *zz*; a tie keeps the earlier index."""
    return _top(x, cur), _replace(i, _takes(x, cur, i), zz)


@njit(inline="always")
def _max_first4(x4, cur, i, z4):
    """:func:`_max_first` over four values *x4* seen at slices *z4*, in that order."""
    cur, i = _max_first(x4[0], cur, i, z4[0])
    cur, i = _max_first(x4[1], cur, i, z4[1])
    cur, i = _max_first(x4[2], cur, i, z4[2])
    return _max_first(x4[3], cur, i, z4[3])


@njit(inline="always")
def _rgb32(colours, z):
    """The colour of slice *z* as three float32 scalars."""
    return np.float32(colours[z, 0]), np.float32(colours[z, 1]), np.float32(colours[z, 2])


@njit(inline="always")
def _tint(t, ca, ua, cb, ub, cc, uc, cd, ud):
    """Channel state *t* after four slices: max(t, ca*ua, cb*ub, cc*uc, cd*ud)."""
    return _max_ordered(_max_ordered(t, ca * ua),
                        _max_ordered(_max_ordered(cb * ub, cc * uc), cd * ud))


@njit(**_OPTS)
def peak_update(block, z0, vals, idx):
    """Fold *block* into (maximum, index of first maximum); NaN is skipped.

    State: ``vals`` (block dtype; NaN for floats and the dtype's minimum for
    integers at the start) and ``idx`` (int16 or int32, -1 = nothing above
    the starting value seen yet). Ties keep the earlier index; ``fmax``
    ignores NaN. int16 indices (stacks of fewer than 32768 slices) halve the
    vector width of the index update. Bands of rows, four slices at a time,
    as in :func:`tinted_update`.
    """
    nz, nr, nc = block.shape
    for b in prange(_n_bands(nr)):
        rows = _band(b, nr)
        z = 0
        while z + 4 <= nz:
            for r in rows:
                ra, rb, rc, rd = _four_rows(block, z, r)
                v = vals[r]
                ix = idx[r]
                z4 = _four_indices(ix, z0 + z)
                for c in range(nc):
                    v[c], ix[c] = _max_first4((ra[c], rb[c], rc[c], rd[c]), v[c], ix[c], z4)
            z += 4
        while z < nz:
            for r in rows:
                row = block[z, r]
                v = vals[r]
                ix = idx[r]
                za = _as_index(ix, z0 + z)
                for c in range(nc):
                    v[c], ix[c] = _max_first(row[c], v[c], ix[c], za)
            z += 1


#: Planes summed in float32 before the partial sums go into float64 state.
_GROUP = 16


@njit(**_OPTS)
def peak_merge(vals, idx, later_vals, later_idx, out_vals, out_idx):
    """The combine of two (maximum, index) states; *later* covers the deeper slices.

    2-D arrays of equal shape; the outputs may be the first inputs (in
    place). The later index wins only where it saw a value (index >= 0) that
    is strictly larger, or where the earlier saw none: ties keep the
    earlier, smaller index. The maximum itself is then ``_top`` of both (a
    state that saw nothing holds NaN or the dtype's minimum).
    """
    nr, nc = vals.shape
    for r in prange(nr):
        v = vals[r]
        ix = idx[r]
        w = later_vals[r]
        jx = later_idx[r]
        ov = out_vals[r]
        ox = out_idx[r]
        for c in range(nc):
            take = (jx[c] >= 0) & ((w[c] > v[c]) | (ix[c] < 0))
            ox[c] = _replace(ix[c], take, jx[c])
            ov[c] = _top(v[c], w[c])


@njit(**_OPTS)
def weighted_update(block, z0, lo, scale, vals, sum_u, sum_uz):
    """Fold *block* into (max, sum of u, sum of u * z), u the signal above *lo* (:func:`_above`).

    *lo* is the background floor (not a display limit) and u is not clipped at
    the top, so the weighted depth does not depend on the display limits.
    ``vals`` starts at the dtype's minimum for integers and NaN for floats.
    u is float32; groups of up to 16 planes are summed in float32 (exact to
    ~1e-6 relative) and then added to the float64 accumulators. Four planes
    are combined in registers before the group sums are touched.
    """
    nz, nr, nc = block.shape
    lo32 = np.float32(lo)
    sc32 = np.float32(scale)
    two = np.float32(2.0)
    three = np.float32(3.0)
    for r in prange(nr):
        v = vals[r]
        su = sum_u[r]
        suz = sum_uz[r]
        gu = np.empty(nc, np.float32)
        guz = np.empty(nc, np.float32)
        for g0 in range(0, nz, _GROUP):
            g1 = min(nz, g0 + _GROUP)
            gu[:] = 0.0
            guz[:] = 0.0
            z = g0
            while z + 4 <= g1:
                r0 = block[z, r]
                r1 = block[z + 1, r]
                r2 = block[z + 2, r]
                r3 = block[z + 3, r]
                zf = np.float32(z - g0)
                for c in range(nc):
                    x0 = r0[c]
                    x1 = r1[c]
                    x2 = r2[c]
                    x3 = r3[c]
                    v[c] = _top(_top(_top(x0, x1), _top(x2, x3)), v[c])
                    u0 = _above(x0, lo32, sc32)
                    u1 = _above(x1, lo32, sc32)
                    u2 = _above(x2, lo32, sc32)
                    u3 = _above(x3, lo32, sc32)
                    s4 = (u0 + u1) + (u2 + u3)
                    gu[c] += s4
                    guz[c] += zf * s4 + (u1 + two * u2 + three * u3)
                z += 4
            while z < g1:
                row = block[z, r]
                zf = np.float32(z - g0)
                for c in range(nc):
                    x = row[c]
                    v[c] = _top(x, v[c])
                    u = _above(x, lo32, sc32)
                    gu[c] += u
                    guz[c] += u * zf
                z += 1
            base = np.float64(z0 + g0)
            for c in range(nc):
                su[c] += gu[c]
                suz[c] += guz[c] + base * gu[c]


@njit(**_OPTS)
def tinted_update(block, z0, lo, scale, colours, vals, idx, tint):
    """Fold *block* into (max, argmax, channel-wise max of colour * u).

    u is the signal above *lo* (:func:`_above`), not clipped at the upper
    display limit: :func:`finish_tint` applies that limit to the whole pixel
    after the fold, so a saturated object keeps the colour of its centre.
    ``colours[z]`` is the (already gamma-adjusted, non-negative) colour of
    global slice z; ``tint`` is planar, shape (3, rows, cols), float32,
    starting at 0. ``idx`` is int16 or int32 as in :func:`peak_update`.
    Threads take bands of ``_BAND`` rows and fold four slices at a time with
    the state in registers (four times fewer state reads and writes); the
    slices are still seen in increasing depth, so ties resolve as before.
    """
    nz, nr, nc = block.shape
    lo32 = np.float32(lo)
    sc32 = np.float32(scale)
    for b in prange(_n_bands(nr)):
        rows = _band(b, nr)
        z = 0
        while z + 4 <= nz:
            g = z0 + z
            a0, a1, a2 = _rgb32(colours, g)
            b0, b1, b2 = _rgb32(colours, g + 1)
            c0, c1, c2 = _rgb32(colours, g + 2)
            d0, d1, d2 = _rgb32(colours, g + 3)
            for r in rows:
                ra, rb, rc, rd = _four_rows(block, z, r)
                v = vals[r]
                ix = idx[r]
                t0 = tint[0, r]
                t1 = tint[1, r]
                t2 = tint[2, r]
                z4 = _four_indices(ix, g)
                for c in range(nc):
                    xa = ra[c]
                    xb = rb[c]
                    xc = rc[c]
                    xd = rd[c]
                    v[c], ix[c] = _max_first4((xa, xb, xc, xd), v[c], ix[c], z4)
                    # u is never NaN, so the ordered max is exact
                    ua = _above(xa, lo32, sc32)
                    ub = _above(xb, lo32, sc32)
                    uc = _above(xc, lo32, sc32)
                    ud = _above(xd, lo32, sc32)
                    t0[c] = _tint(t0[c], a0, ua, b0, ub, c0, uc, d0, ud)
                    t1[c] = _tint(t1[c], a1, ua, b1, ub, c1, uc, d1, ud)
                    t2[c] = _tint(t2[c], a2, ua, b2, ub, c2, uc, d2, ud)
            z += 4
        while z < nz:
            zz = z0 + z
            a0, a1, a2 = _rgb32(colours, zz)
            for r in rows:
                row = block[z, r]
                v = vals[r]
                ix = idx[r]
                t0 = tint[0, r]
                t1 = tint[1, r]
                t2 = tint[2, r]
                za = _as_index(ix, zz)
                for c in range(nc):
                    x = row[c]
                    v[c], ix[c] = _max_first(x, v[c], ix[c], za)
                    u = _above(x, lo32, sc32)
                    t0[c] = _max_ordered(t0[c], a0 * u)
                    t1[c] = _max_ordered(t1[c], a1 * u)
                    t2[c] = _max_ordered(t2[c], a2 * u)
            z += 1


@intrinsic
def _pow2(typingctx, n):
    """``2.0 ** n`` in float32 for an int32 n in [-126, 127], from its bits (vectorises)."""
    if not isinstance(n, types.Integer):
        return None

    def codegen(context, builder, signature, args):
        i32 = ir.IntType(32)
        n32 = context.cast(builder, args[0], signature.args[0], types.int32)
        biased = builder.add(n32, ir.Constant(i32, 127))
        return builder.bitcast(builder.shl(biased, ir.Constant(i32, 23)), ir.FloatType())

    return types.float32(n), codegen


#: ln 2 in two parts (Cody & Waite): n * _LN2_HI is exact in float32 for |n| < 512.
_LN2_HI = np.float32(0.693359375)
_LN2_LO = np.float32(-2.12194440e-4)
_LOG2E = np.float32(1.4426950408889634)


#: Optical depth of one slice up to which the opacity is a fitted polynomial ("thin" slices).
SERIES_DEPTH = 0.34657359  # ln(2) / 2
#: Optical depth of one slice up to which a cubic suffices (a quartic above): the
#: polynomial's own error stays below 2**-24 relative (half a float32 ulp).
CUBIC_DEPTH = 0.17
#: Below this optical depth the Taylor polynomial is used as it is (error below 1e-10).
_TAYLOR_DEPTH = 0.01


@functools.lru_cache(maxsize=64)
def opacity_polynomial(kappa: float) -> tuple[int, tuple]:
    """(degree, coefficients) of ``1 - exp(-w) ~= w * (c0 + c1 w + ... + c_d w**d)`` on [0, kappa].

    For ``kappa <= SERIES_DEPTH``: degree 3 up to ``CUBIC_DEPTH``, 4 above; the
    coefficients interpolate ``(1 - exp(-w)) / w`` at the Chebyshev points of
    [0, kappa] (numpy.polynomial), which keeps the error near its minimax value
    (below 2**-24 relative), and are returned as five float32 (a zero fifth
    for the cubic). Tiny kappa takes the Taylor coefficients.
    """
    kappa = float(kappa)
    degree = 3 if kappa <= CUBIC_DEPTH else 4
    if kappa <= _TAYLOR_DEPTH:
        coef = np.array([1.0, -1 / 2, 1 / 6, -1 / 24, 1 / 120][:degree + 1])
    else:
        fit = np.polynomial.Chebyshev.interpolate(
            lambda w: -np.expm1(-w) / w, degree, domain=[0.0, kappa])
        coef = fit.convert(kind=np.polynomial.Polynomial, domain=[-1, 1], window=[-1, 1]).coef
    coef = np.concatenate([coef, np.zeros(5 - len(coef))])
    return degree, tuple(np.float32(c) for c in coef)


def _opacity_model(kappa: float, thin: bool) -> tuple[int, tuple]:
    """(degree, coefficients) for the compiled loops: degree 0 selects the range reduction."""
    if thin:
        return opacity_polynomial(kappa)
    return 0, (np.float32(0.0),) * 5


@njit(inline="always", fastmath=_CONTRACT)
def _expm1_series(r):
    """``exp(r) - 1`` for ``|r| <= ln2 / 2`` in float32: Taylor to r**7, error below 2e-8 relative."""
    return r * (np.float32(1.0) + r * (np.float32(1 / 2) + r * (np.float32(1 / 6) + r * (
        np.float32(1 / 24) + r * (np.float32(1 / 120) + r * (
            np.float32(1 / 720) + r * np.float32(1 / 5040)))))))


@njit(inline="always", fastmath=_CONTRACT)
def _reduced_absorbance(w):
    """``1 - exp(-w)`` in float32 for w >= 0, to about one ulp, without a branch per voxel.

    ``-w = n ln2 + r`` with ``|r| <= ln2 / 2`` and ``1 - exp(-w) = (1 - 2**n)
    - 2**n expm1(r)``, without cancellation for small w; w is clamped at 87
    (exp(-87) ~ 1.6e-38: opaque).
    """
    y = -_min_ordered(w, np.float32(87.0))
    n = np.floor(y * _LOG2E + np.float32(0.5))
    r = (y - n * _LN2_HI) - n * _LN2_LO
    s = _pow2(np.int32(n))
    return (np.float32(1.0) - s) - s * _expm1_series(r)


@njit(inline="always", fastmath=_CONTRACT)
def _absorbance(w, p, degree):
    """``1 - exp(-w)`` in float32 for w >= 0; *degree* is a constant where this is inlined.

    *degree* 3 or 4: the polynomial *p* of :func:`opacity_polynomial`, for
    slices no thicker than the kappa it was fitted for; 0: range reduction
    (:func:`_reduced_absorbance`).
    """
    if degree == 3:
        return w * (p[0] + w * (p[1] + w * (p[2] + w * p[3])))
    if degree == 4:
        return w * (p[0] + w * (p[1] + w * (p[2] + w * (p[3] + w * p[4]))))
    return _reduced_absorbance(w)


def _depth_of(x, norm):
    """Optical depth ``w = kappa * clip((x - lo) * scale, 0, 1)`` of a voxel, float32; NaN -> 0."""


@overload(_depth_of, inline="always")  # into numba's IR: see the module docstring
def _depth_of_impl(x, norm):
    if isinstance(x, types.Integer):  # 8/16-bit values are exact in float32: one multiply-add
        def from_int(x, norm):
            w = np.float32(x) * norm[2] - norm[3]
            return _min_ordered(_max_ordered(w, np.float32(0.0)), norm[4])
        return from_int

    def from_float64(x, norm):  # offset data keeps its precision; fmax takes NaN to 0
        w = np.fmax((np.float64(x) - norm[0]) * norm[1], 0.0)
        return np.float32(min(w, np.float64(norm[4])))
    return from_float64


@njit(inline="always", fastmath=_CONTRACT)
def _absorb(x, norm, p, degree):
    """(opacity ``a = 1 - exp(-w)``, ``a * w``) of a voxel, float32.

    The emission is ``a * u = a * w / kappa``: the loops divide by kappa once
    per step, not per voxel.
    """
    w = _depth_of(x, norm)
    a = _absorbance(w, p, degree)
    return a, a * w


#: Slices composited in registers before the state is updated: 8 with a polynomial
#: opacity, 4 with the range-reduced one (LLVM would not unroll a loop of 8 of those,
#: and the row loop would not be vectorised).
_POLY_STEPS = 8
_REDUCED_STEPS = 4


@njit(inline="always", fastmath=_CONTRACT)
def _composite(block, z, dz, r, c, m, norm, p, degree):
    """(opacity, emission) of voxel (r, c) of the *m* slices z, z - dz, ... composited, float32.

    *z* is the slice composited last (the back), *dz* +1 from the top, -1
    from the bottom. ``A = 1 - prod(1 - a_i)`` and ``E = sum_i e_i prod_{j<i}
    (1 - a_j)`` in Horner form, from the back: both stay accurate to a few
    ulp relative however small they are, so ``T * (1 - A)`` in float64 loses
    nothing that accumulates. *m* is a constant, so the loop unrolls.
    """
    one = np.float32(1.0)
    big_a, big_e = _absorb(block[z, r, c], norm, p, degree)
    for i in range(1, m):
        a, e = _absorb(block[z - i * dz, r, c], norm, p, degree)
        k = one - a
        big_a = a + k * big_a
        big_e = e + k * big_e
    return big_a, big_e


@njit(inline="always", fastmath=_CONTRACT)
def _composite_rgb(block, z, dz, r, c, m, norm, p, degree, q):
    """As :func:`_composite`, step s (0 = front) emitting in colour ``q[3 s : 3 s + 3]``.

    Returns (opacity, red, green, blue emission).
    """
    one = np.float32(1.0)
    j = 3 * (m - 1)
    big_a, e = _absorb(block[z, r, c], norm, p, degree)
    e0, e1, e2 = e * q[j], e * q[j + 1], e * q[j + 2]
    for i in range(1, m):
        a, e = _absorb(block[z - i * dz, r, c], norm, p, degree)
        j = 3 * (m - 1 - i)
        k = one - a
        big_a = a + k * big_a
        e0 = e * q[j] + k * e0
        e1 = e * q[j + 1] + k * e1
        e2 = e * q[j + 2] + k * e2
    return big_a, e0, e1, e2


@njit(inline="always", fastmath=_CONTRACT)
def _grey_row(block, z, dz, r, norm, p, degree, a_out, e_out):
    """Opacity and emission of row *r* of a group of slices composited, into a_out, e_out.

    The group is :func:`_group`'s slices; one loop per opacity form (a
    test inside would leave the vector loop), each pure float32 so that it
    vectorises at full width.
    """
    if degree == 3:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[c] = _composite(block, z, dz, r, c, _POLY_STEPS, norm, p, 3)
    elif degree == 4:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[c] = _composite(block, z, dz, r, c, _POLY_STEPS, norm, p, 4)
    else:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[c] = _composite(block, z, dz, r, c, _REDUCED_STEPS, norm, p, 0)


@njit(inline="always", fastmath=_CONTRACT)
def _grey_slice_row(block, z, r, norm, p, degree, a_out, e_out):
    """As :func:`_grey_row` for one slice (the last slices of a block)."""
    if degree == 3:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[c] = _absorb(block[z, r, c], norm, p, 3)
    elif degree == 4:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[c] = _absorb(block[z, r, c], norm, p, 4)
    else:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[c] = _absorb(block[z, r, c], norm, p, 0)


@njit(inline="always", fastmath=_CONTRACT)
def _rgb_row(block, z, dz, r, norm, p, degree, q, a_out, e_out):
    """As :func:`_grey_row` with colours *q* (:func:`_composite_rgb`), into a_out and e_out (3, cols)."""
    if degree == 3:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[0, c], e_out[1, c], e_out[2, c] = _composite_rgb(
                block, z, dz, r, c, _POLY_STEPS, norm, p, 3, q)
    elif degree == 4:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[0, c], e_out[1, c], e_out[2, c] = _composite_rgb(
                block, z, dz, r, c, _POLY_STEPS, norm, p, 4, q)
    else:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[0, c], e_out[1, c], e_out[2, c] = _composite_rgb(
                block, z, dz, r, c, _REDUCED_STEPS, norm, p, 0, q)


@njit(inline="always", fastmath=_CONTRACT)
def _rgb_slice_row(block, z, r, norm, p, degree, q, a_out, e_out):
    """As :func:`_rgb_row` for one slice of colour ``q[:3]``."""
    if degree == 3:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[0, c], e_out[1, c], e_out[2, c] = _composite_rgb(
                block, z, 0, r, c, 1, norm, p, 3, q)
    elif degree == 4:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[0, c], e_out[1, c], e_out[2, c] = _composite_rgb(
                block, z, 0, r, c, 1, norm, p, 4, q)
    else:
        for c in range(a_out.shape[0]):
            a_out[c], e_out[0, c], e_out[1, c], e_out[2, c] = _composite_rgb(
                block, z, 0, r, c, 1, norm, p, 0, q)


@njit(inline="always")
def _step_slice(nz, k, reverse):
    """The slice composited at step *k*: k from the front, or from the back if *reverse*."""
    return nz - 1 - k if reverse else k


@njit(inline="always")
def _group(nz, k, reverse, degree):
    """(slices composited together from step *k*: a group of 8 (polynomial opacity)
    or 4 (range-reduced), or 1 near the end of the block; the slice of the last of
    them; the direction towards the front)."""
    steps = _POLY_STEPS if degree else _REDUCED_STEPS
    m = steps if k + steps <= nz else 1
    return m, _step_slice(nz, k + m - 1, reverse), -1 if reverse else 1


@njit(inline="always")
def _add_grey(col, tr, a, e, per_kappa):
    """State after the composited slices: ``C += T * E / kappa`` (float32), ``T -= T * A`` (float64)."""
    for c in range(a.shape[0]):
        t = tr[c]
        col[c] += np.float32(t) * (e[c] * per_kappa)
        tr[c] = t - t * np.float64(a[c])


@njit(fastmath=_CONTRACT, **_OPTS)
def _occlusion_grey(block, norm, p, degree, reverse, per_kappa, colour, trans):
    """The loops of :func:`occlusion_update`."""
    nz, nr, nc = block.shape
    for b in prange(_n_bands(nr)):
        a_g = np.empty(nc, np.float32)
        e_g = np.empty(nc, np.float32)
        k = 0
        while k < nz:
            m, z, dz = _group(nz, k, reverse, degree)
            for r in _band(b, nr):
                if m > 1:
                    _grey_row(block, z, dz, r, norm, p, degree, a_g, e_g)
                else:
                    _grey_slice_row(block, z, r, norm, p, degree, a_g, e_g)
                _add_grey(colour[r], trans[r], a_g, e_g, per_kappa)
            k += m


def _norm_of(lo, scale, kappa):
    """What the compositing loops need of the normalisation and the slice's optical depth.

    ``(lo, kappa * scale)`` in float64 for floating-point input;
    ``(kappa * scale, kappa * scale * lo)`` in float32 for 8/16-bit input;
    kappa in float32.
    """
    ks = float(kappa) * float(scale)
    return (np.float64(lo), np.float64(ks), np.float32(ks), np.float32(ks * float(lo)),
            np.float32(kappa))


def occlusion_update(block, lo, scale, kappa, thin, reverse, colour, trans):
    """Front-to-back compositing of *block* into (colour, float64 transmittance).

    Each voxel has optical depth ``w = kappa * u``, ``u = clip((x - lo) *
    scale, 0, 1)``, opacity ``a = 1 - exp(-w)`` and emits ``a * u``. *thin*
    (``kappa <= SERIES_DEPTH``): the opacity is the polynomial of
    :func:`opacity_polynomial` (a cubic or a quartic: no table, no branch);
    otherwise it is range-reduced (:func:`_reduced_absorbance`). Eight
    slices at a time are composited in float32 (:func:`_composite`,
    vectorised; one at a time at the end of the block), then added to the
    state: ``C += T * E / kappa`` in float32 (one rounding per eight slices)
    and ``T -= T * A`` in float64. *reverse* composites from the last slice of
    the block to the first. Threads take bands of ``_BAND`` rows, as
    :func:`peak_update`. A Python function: it picks the opacity polynomial,
    then runs the compiled loops.
    """
    degree, p = _opacity_model(kappa, thin)
    per_kappa = np.float32(1.0 / kappa if kappa > 0.0 else 0.0)
    _occlusion_grey(block, _norm_of(lo, scale, kappa), p, degree, bool(reverse), per_kappa,
                    colour, trans)


@njit(inline="always")
def _colours(colours, z0, nz, k, reverse):
    """The float32 colour of the slice of step *k*: three values."""
    return _rgb32(colours, z0 + _step_slice(nz, k, reverse))


@njit(inline="always")
def _colours4(colours, z0, nz, k, reverse):
    """The float32 colours of the slices of steps k .. k+3, flat (step-major), 12 values."""
    return (_colours(colours, z0, nz, k, reverse) + _colours(colours, z0, nz, k + 1, reverse)
            + _colours(colours, z0, nz, k + 2, reverse) + _colours(colours, z0, nz, k + 3, reverse))


@njit(inline="always")
def _add_rgb(k0, k1, k2, tr, a, e3):
    """RGB state after the composited slices: ``C += T * E`` per channel (float32), ``T -= T * A``."""
    for c in range(a.shape[0]):
        t = tr[c]
        t32 = np.float32(t)
        k0[c] += t32 * e3[0, c]
        k1[c] += t32 * e3[1, c]
        k2[c] += t32 * e3[2, c]
        tr[c] = t - t * np.float64(a[c])


@njit(fastmath=_CONTRACT, **_OPTS)
def _occlusion_rgb(block, z0, norm, p, degree, reverse, colours, colour, trans):
    """The loops of :func:`occlusion_rgb_update`."""
    nz, nr, nc = block.shape
    for b in prange(_n_bands(nr)):
        a_g = np.empty(nc, np.float32)
        e3 = np.empty((3, nc), np.float32)
        k = 0
        while k < nz:
            m, z, dz = _group(nz, k, reverse, degree)
            if m > 1:  # colours of the group's steps (a group of 4 reads the first 12)
                q = (_colours4(colours, z0, nz, k, reverse)
                     + _colours4(colours, z0, nz, k + 4 if m == _POLY_STEPS else k, reverse))
                for r in _band(b, nr):
                    _rgb_row(block, z, dz, r, norm, p, degree, q, a_g, e3)
                    _add_rgb(colour[0, r], colour[1, r], colour[2, r], trans[r], a_g, e3)
            else:
                q1 = _colours(colours, z0, nz, k, reverse)
                for r in _band(b, nr):
                    _rgb_slice_row(block, z, r, norm, p, degree, q1, a_g, e3)
                    _add_rgb(colour[0, r], colour[1, r], colour[2, r], trans[r], a_g, e3)
            k += m


def occlusion_rgb_update(block, z0, lo, scale, kappa, thin, reverse, colours, colour, trans):
    """As :func:`occlusion_update`, slice z emitting ``a * u * colours[z0 + z]``.

    ``colour`` is planar float32 (3, rows, cols); the transmittance float64.
    *colours* are the slice colours divided by kappa (0 where kappa is 0).
    """
    degree, p = _opacity_model(kappa, thin)
    _occlusion_rgb(block, z0, _norm_of(lo, scale, kappa), p, degree, bool(reverse), colours,
                   colour, trans)
