"""Depth along a drawn path: the depth and peak of a peak projection sampled along a polyline.

A path drawn on a peak projection (for example a napari Shapes "path" traced
along a fibre) is sampled every pixel. At each sample the depth is the
peak-weighted median of the depths in a small window, so one noisy pixel does
not make the profile jump; the peak is interpolated bilinearly. The planar
length of the path is exact from its vertices; the 3-D length is measured on
a smoothed depth profile and comes with a range that states how far
quantisation to the slice step and noise leave it open.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Optional

import numpy as np
from scipy import ndimage

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import check_int, check_number, fail

__all__ = ["PathProfile", "depth_along_path", "SMOOTHING_STEPS", "MAX_NEIGHBOURHOOD"]

#: Width of the depth smoothing, in slice steps (or pixels, whichever is longer).
SMOOTHING_STEPS = 4.0
#: Largest accepted ``neighbourhood`` (a 41 x 41 window).
MAX_NEIGHBOURHOOD = 20


@dataclass(frozen=True, eq=False)
class PathProfile:
    """Result of :func:`depth_along_path`. Arrays are read-only float64, one value per sample.

    Attributes
    ----------
    distance_um : ndarray of float64, shape (M,)
        Distance along the path in the image plane, from 0 at the first vertex
        to ``length_2d_um`` at the last one.
    depth_um : ndarray of float64, shape (M,)
        Depth at each sample (µm below the first slice): the peak-weighted
        median of the depths in the window around the nearest pixel. For a
        peak projection a whole number of slice steps (half-way between two
        on an exact tie of weights); NaN where the window holds no pixel with
        a finite peak and depth.
    peak : ndarray of float64, shape (M,)
        Peak (maximum) value interpolated bilinearly at each sample.
    yx : ndarray of float64, shape (M, 2)
        The sample positions (y, x) in pixels; every vertex is one of them.
    depth_smoothed_um : ndarray of float64, shape (M,)
        The depth profile the 3-D length is measured on: a running median then
        a local linear fit over ``smoothing_um``.
    length_2d_um : float
        Length of the path in the image plane (from the vertices, exact).
    length_3d_um : float
        Length of the smoothed depth profile over the plane:
        ``sum(sqrt(d_plane**2 + d_depth**2))`` between samples (NaN, as its
        range, when no sample has a depth).
    length_3d_range_um : tuple of float
        (low, high): low is the length of the straightest depth profile that
        stays within ``depth_tolerance_um`` of the measured depths (a
        lower bound when the fibre lies within the path's pixels and the depths are
        right to that tolerance); high is as far above the estimate, profile
        for profile (see :func:`depth_along_path`, Notes).
    smoothing_um : float
        Width of the local linear fit in µm.
    depth_step_um : float
        Quantisation step of the depths (the slice step); 0 when unknown.
    depth_tolerance_um : float
        Half-width of the depth interval each sample is taken to lie in:
        ``max(depth_step_um / 2, 2 * MAD)`` of the measured minus the smoothed
        depths.
    """

    distance_um: np.ndarray
    depth_um: np.ndarray
    peak: np.ndarray
    yx: np.ndarray
    depth_smoothed_um: np.ndarray
    length_2d_um: float
    length_3d_um: float
    length_3d_range_um: tuple[float, float]
    smoothing_um: float
    depth_step_um: float
    depth_tolerance_um: float

    @property
    def ratio(self) -> float:
        """3-D length over planar length (>= 1 for a fibre that changes depth)."""
        return self.length_3d_um / self.length_2d_um

    @property
    def ratio_range(self) -> tuple[float, float]:
        """``length_3d_range_um`` divided by the planar length."""
        low, high = self.length_3d_range_um
        return low / self.length_2d_um, high / self.length_2d_um


def depth_along_path(peak_result: Any, path_yx: Any, *, pixel_size_um: Any,
                     z_step: Optional[float] = None, neighbourhood: int = 1,
                     progress: Progress = None) -> PathProfile:
    """Depth and peak along a polyline drawn on a peak projection, with planar and 3-D lengths.

    Parameters
    ----------
    peak_result : PeakProjection or object
        The result of :func:`peak_projection` of one z-stack (2-D ``peak``),
        or any object with ``.peak`` and ``.depth_um`` (µm), or with
        ``.peak``, ``.index`` and a slice step (``.z_step`` or *z_step*).
        Not modified.
    path_yx : array_like, shape (N, 2)
        Vertices (y, x) in pixels, N >= 2, as a napari Shapes "path" gives
        them in data coordinates (pixel centres at integers). Every vertex
        must lie on the image: -0.5 <= y <= height - 0.5, likewise x.
        Repeated consecutive vertices are dropped.
    pixel_size_um : float or (float, float)
        Pixel size in µm, one number or (dy, dx) for anisotropic pixels.
    z_step : float, optional
        Slice spacing in µm. When given, depths are ``index * z_step`` (or
        ``depth_um`` rescaled from the result's own ``z_step``); otherwise
        the result's ``depth_um`` is used.
    neighbourhood : int, optional
        Half-width of the window whose depths give each sample's depth: the
        (2n+1) x (2n+1) pixels around the nearest pixel (default 1: 3 x 3;
        0: the nearest pixel alone).
    progress : callable, optional
        ``progress(done, total)`` between the steps (sampling, smoothing,
        bounds); may raise :class:`~viewer_plugin.kernels.Cancelled`.

    Returns
    -------
    PathProfile
        float64 profiles ``distance_um``, ``depth_um``, ``peak``,
        ``depth_smoothed_um`` and sample positions ``yx``; ``length_2d_um``,
        ``length_3d_um``, ``length_3d_range_um``; property ``ratio``.

    Raises
    ------
    ParameterError
        When *peak_result* has no 2-D ``peak`` and depth of the same shape,
        *path_yx* is not (N >= 2, 2), holds non-finite values or vertices off
        the image, or has length zero; *pixel_size_um* is not one or two
        positive numbers; *z_step* is not positive (or given for a result
        without ``.index``/``.z_step``); *neighbourhood* is not an integer in
        [0, 20].

    Notes
    -----
    *Sampling.* Each segment is cut into ``ceil(length in pixels)`` equal
    steps, so samples are at most one pixel apart and every vertex is a
    sample; distances in µm use (dy, dx). The depth of a sample is the
    weighted median of the depths in its window, each pixel weighted by its
    peak minus the lowest peak in the window (equal weights when all are
    equal; pixels whose peak or depth is NaN are left out); the peak is
    interpolated bilinearly (edge pixels repeated outside the centres).

    *Smoothing.* A peak projection's depths are whole slices, so the raw
    profile of a gently inclined fibre is a staircase whose steps would each
    add nearly a slice step to the 3-D length. The profile is therefore
    smoothed before it is measured: a running median over about
    ``smoothing_um / 4`` on each side (single outliers go), then a local
    linear least-squares fit over ``smoothing_um = SMOOTHING_STEPS *
    max(slice step, pixel size)`` (the window is shifted inwards at the
    ends). A straight ramp passes unchanged; steps further apart than the
    window still add about ``step**2 / (2 * smoothing_um)`` each, and depth
    undulations shorter than a few windows are flattened (a sinusoid of
    period P keeps ``sin(pi u) / (pi u)``, ``u = smoothing_um / P``, of its
    amplitude: 0.95 for P = 6 windows, 0.90 for P = 4). Samples without a
    depth are bridged linearly for the lengths.

    *Range.* Each measured (median-filtered) depth is taken to lie within
    ``t = max(step / 2, 2 * MAD)`` of the truth (half a slice: the nearest
    slice to the fibre's axis holds its maximum; 2 MAD of the residuals from
    the smoothed profile is the half-width of a uniform spread with that
    MAD, for noisier depths). ``low`` is the length of the shortest profile
    within ``± t`` of the measured depths (the taut string, ends free): no
    fibre whose depths at the samples lie in those intervals is shorter.
    ``high`` is the longer of two profiles: the string mirrored about the
    smoothed profile, ``2 * smoothed - string`` (as much steeper than the
    estimate wherever the string is flatter), and the smoothed profile
    tilted by ``± t`` at its two ends (its rise 2 t larger; this covers a
    fibre that stays within one slice). A straight fibre of planar length L
    and rise r gets roughly ``sqrt(L**2 + (r - 2 t)**2)`` to
    ``sqrt(L**2 + (r + 2 t)**2)``. Both ends are widened to include the
    estimate if needed.
    It is not a bound on what the data cannot show: a fibre that leaves the
    path's pixels, wiggles within one slice, or is crossed by a brighter one
    at another depth is measured short or wrong.

    References
    ----------
    .. [1] P. L. Davies, A. Kovac, "Local extremes, runs, strings and
       multiresolution", Ann. Statist. 29(1):1-65, 2001 -- the taut string
       through a tube (volume and pages from memory).
    .. [2] D. T. Lee, F. P. Preparata, "Euclidean shortest paths in the
       presence of rectilinear barriers", Networks 14(3):393-410, 1984 --
       the funnel method for shortest paths (from memory).
    .. [3] W. S. Cleveland, "Robust locally weighted regression and smoothing
       scatterplots", JASA 74(368):829-836, 1979 -- local linear fits
       (pages from memory).

    Examples
    --------
    >>> import numpy as np
    >>> from viewer_plugin.kernels.projection import peak_projection
    >>> stack = np.zeros((20, 5, 41), np.uint16)
    >>> x = np.arange(41)
    >>> stack[x // 4, 2, x] = 100            # a fibre rising one slice every 4 pixels
    >>> result = peak_projection(stack, z_step=1.0)
    >>> profile = depth_along_path(result, [[2, 0], [2, 40]], pixel_size_um=0.5,
    ...                            neighbourhood=0)
    >>> profile.length_2d_um, profile.depth_um[:6]
    (20.0, array([0., 0., 0., 0., 1., 1.]))
    >>> round(profile.length_3d_um, 1)  # a 10 µm rise over 20 µm: sqrt(20**2 + 10**2) = 22.36
    22.4
    >>> low, high = profile.length_3d_range_um
    >>> bool(low <= 22.36 <= high), round(profile.ratio, 2)
    (True, 1.12)
    """
    depth_map, scale, step, peak = _depth_source(peak_result, z_step)
    vertices = _check_path(path_yx, peak.shape)
    dy, dx = _check_pixel_size(pixel_size_um)
    radius = check_int(neighbourhood, name="neighbourhood", low=0)
    if radius > MAX_NEIGHBOURHOOD:
        fail("neighbourhood", f"an integer from 0 to {MAX_NEIGHBOURHOOD}", neighbourhood)
    report_progress(progress, 0, 3)
    yx, distance, length_2d = _sample_polyline(vertices, dy, dx)
    depth = _window_depth(depth_map, scale, peak, yx, radius)
    peak_values = _bilinear(peak, yx)
    if step is None:
        step = _smallest_step(depth_map) * scale
    report_progress(progress, 1, 3)
    smoothing = SMOOTHING_STEPS * max(step, dy, dx)
    if np.isfinite(depth).any():
        smooth, length_3d, bounds, tolerance = _measure(distance, depth, step, smoothing, progress)
    else:  # no sample with signal: nothing to measure
        smooth, length_3d, tolerance = np.full_like(depth, np.nan), math.nan, math.nan
        bounds = (math.nan, math.nan)
    report_progress(progress, 3, 3)
    return PathProfile(
        distance_um=_frozen(distance), depth_um=_frozen(depth), peak=_frozen(peak_values),
        yx=_frozen(yx), depth_smoothed_um=_frozen(smooth), length_2d_um=length_2d,
        length_3d_um=length_3d, length_3d_range_um=bounds,
        smoothing_um=float(smoothing), depth_step_um=float(step), depth_tolerance_um=float(tolerance),
    )


def _measure(distance: np.ndarray, depth: np.ndarray, step: float, smoothing: float,
             progress: Progress) -> tuple[np.ndarray, float, tuple[float, float], float]:
    """Smoothed profile, 3-D length, its (low, high) range and the depth tolerance."""
    filled = _bridge_gaps(distance, depth)
    median = _running_median(distance, filled, smoothing / 4.0)
    smooth = _local_linear(distance, median, smoothing)
    length_3d = _length(distance, smooth)
    report_progress(progress, 2, 3)
    residual = median - smooth
    mad = float(np.median(np.abs(residual - np.median(residual))))
    tolerance = max(step / 2.0, 2.0 * mad)
    string = _taut_string(distance, median - tolerance, median + tolerance)
    low = _length(distance, string)
    high = max(_length(distance, 2.0 * smooth - string),
               _length(distance, _tilted(distance, smooth, tolerance)))
    return smooth, length_3d, (min(low, length_3d), max(high, length_3d)), tolerance


def _frozen(values: np.ndarray) -> np.ndarray:
    out = np.array(values, dtype=np.float64)
    out.setflags(write=False)
    return out


def _depth_source(result: Any, z_step: Any) -> tuple[np.ndarray, float, Optional[float], np.ndarray]:
    """(depth-like map, factor to µm, slice step or None, peak) of a peak result."""
    peak = getattr(result, "peak", None)
    index = getattr(result, "index", None)
    depth = getattr(result, "depth_um", None)
    own_step = getattr(result, "z_step", None)
    expected = "a peak_projection result (an object with .peak and .depth_um, or .peak and .index)"
    if peak is None or (depth is None and index is None):
        fail("peak_result", expected, f"<an object of type {type(result).__name__}>")
    peak = np.asarray(peak)
    if peak.ndim != 2 or peak.dtype.kind not in "uifb" or 0 in peak.shape:
        fail("peak_result", "a result with a 2-D numeric .peak (one z-stack's projection)",
             f"<.peak of shape {peak.shape} and dtype {peak.dtype}>",
             hint="select one time point or channel first")
    if own_step is not None:
        own_step = check_number(own_step, name="peak_result.z_step", low=0.0, low_open=True)
    if z_step is not None:
        z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
        if index is not None:
            source, scale = index, z_step
        elif own_step is not None:
            source, scale = depth, z_step / own_step
        else:
            fail("z_step", "None for a peak_result without .index or .z_step (its depth_um is used "
                 "as it is)", z_step)
        step = z_step
    elif depth is not None:
        source, scale, step = depth, 1.0, own_step
    elif own_step is not None:
        source, scale, step = index, own_step, own_step
    else:
        fail("z_step", "the slice step in µm for a peak_result with .index but no .depth_um", z_step)
    source = np.asarray(source)
    if source.shape != peak.shape or source.dtype.kind not in "uif":
        fail("peak_result", f"a numeric depth or index map of the peak's shape {peak.shape}",
             f"<an array of shape {source.shape} and dtype {source.dtype}>")
    return source, float(scale), step, peak


def _check_path(path_yx: Any, shape: tuple[int, int]) -> np.ndarray:
    """Vertices as float64 (N, 2), on the image, consecutive repeats dropped."""
    try:
        vertices = np.array(path_yx, dtype=np.float64)
    except (TypeError, ValueError):
        fail("path_yx", "an (N, 2) array of (y, x) vertices in pixels", path_yx)
    if vertices.ndim != 2 or vertices.shape[1] != 2:
        fail("path_yx", "an (N, 2) array of (y, x) vertices in pixels",
             f"<an array of shape {vertices.shape}>")
    if vertices.shape[0] < 2:
        fail("path_yx", "at least 2 vertices", f"<{vertices.shape[0]} vertex>")
    if not np.all(np.isfinite(vertices)):
        fail("path_yx", "finite vertex coordinates", "<NaN or infinite values>")
    height, width = shape
    off = (vertices < -0.5) | (vertices > np.array([height, width]) - 0.5)
    if np.any(off):
        i = int(np.flatnonzero(off.any(axis=1))[0])
        fail("path_yx", f"vertices on the image (y in [-0.5, {height - 0.5}], x in [-0.5, "
             f"{width - 0.5}] pixels)", f"<vertex {i} at (y, x) = ({vertices[i, 0]:g}, "
             f"{vertices[i, 1]:g})>")
    keep = np.ones(len(vertices), bool)
    keep[1:] = np.any(np.diff(vertices, axis=0) != 0, axis=1)
    vertices = vertices[keep]
    if len(vertices) < 2:
        fail("path_yx", "a path of non-zero length", "<all vertices at one point>")
    return vertices


def _check_pixel_size(pixel_size_um: Any) -> tuple[float, float]:
    """(dy, dx) in µm from one number or a pair."""
    if isinstance(pixel_size_um, (list, tuple, np.ndarray)):
        if len(pixel_size_um) != 2:
            fail("pixel_size_um", "one number or a pair (dy, dx) in µm", pixel_size_um)
        dy = check_number(pixel_size_um[0], name="pixel_size_um[0]", low=0.0, low_open=True)
        dx = check_number(pixel_size_um[1], name="pixel_size_um[1]", low=0.0, low_open=True)
        return dy, dx
    size = check_number(pixel_size_um, name="pixel_size_um", low=0.0, low_open=True)
    return size, size


def _sample_polyline(vertices: np.ndarray, dy: float, dx: float
                     ) -> tuple[np.ndarray, np.ndarray, float]:
    """Samples at most one pixel apart (every vertex included), their distance in µm, the length."""
    delta = np.diff(vertices, axis=0)
    steps = np.maximum(1, np.ceil(np.hypot(delta[:, 0], delta[:, 1]) - 1e-9)).astype(np.int64)
    seg_um = np.hypot(delta[:, 0] * dy, delta[:, 1] * dx)
    seg = np.repeat(np.arange(len(delta)), steps)
    within = np.arange(int(steps.sum())) - np.repeat(np.cumsum(steps) - steps, steps)
    frac = within / steps[seg]
    yx = np.vstack([vertices[seg] + frac[:, None] * delta[seg], vertices[-1:]])
    start_um = np.concatenate([[0.0], np.cumsum(seg_um)])
    distance = np.append(start_um[seg] + frac * seg_um[seg], start_um[-1])
    return yx, distance, math.fsum(seg_um.tolist())


def _window_depth(depth_map: np.ndarray, scale: float, peak: np.ndarray, yx: np.ndarray,
                  radius: int) -> np.ndarray:
    """Peak-weighted median depth in the (2r+1)^2 window around each sample's nearest pixel."""
    height, width = peak.shape
    iy = np.clip(np.rint(yx[:, 0]).astype(np.int64), 0, height - 1)
    ix = np.clip(np.rint(yx[:, 1]).astype(np.int64), 0, width - 1)
    offsets = np.arange(-radius, radius + 1)
    wy = (iy[:, None] + offsets[None, :])[:, :, None] + 0 * offsets[None, None, :]
    wx = (ix[:, None] + offsets[None, :])[:, None, :] + 0 * offsets[None, :, None]
    inside = ((wy >= 0) & (wy < height) & (wx >= 0) & (wx < width)).reshape(len(yx), -1)
    wy = np.clip(wy, 0, height - 1).reshape(len(yx), -1)
    wx = np.clip(wx, 0, width - 1).reshape(len(yx), -1)
    depth = depth_map[wy, wx].astype(np.float64) * scale
    weight = peak[wy, wx].astype(np.float64)
    ok = inside & np.isfinite(depth) & np.isfinite(weight)
    floor = np.min(np.where(ok, weight, np.inf), axis=1, keepdims=True)
    weight = np.where(ok, weight - np.where(np.isfinite(floor), floor, 0.0), 0.0)
    flat = weight.sum(axis=1) <= 0
    weight[flat] = ok[flat]
    order = np.argsort(np.where(ok, depth, np.inf), axis=1, kind="stable")
    depth = np.take_along_axis(depth, order, axis=1)
    cumulative = np.cumsum(np.take_along_axis(weight, order, axis=1), axis=1)
    total = cumulative[:, -1]
    half = 0.5 * total[:, None]
    rows = np.arange(len(yx))
    lower = depth[rows, np.argmax(cumulative >= half * (1 - 1e-12), axis=1)]
    upper = depth[rows, np.argmax(cumulative > half * (1 + 1e-12), axis=1)]
    # exactly half the weight on each side: the mean of the two middle depths
    out = 0.5 * (lower + upper)
    out[total <= 0] = np.nan
    return out


def _bilinear(image: np.ndarray, yx: np.ndarray) -> np.ndarray:
    """Bilinear interpolation at (y, x), edge pixels repeated beyond the outer centres."""
    height, width = image.shape
    y = np.clip(yx[:, 0], 0, height - 1)
    x = np.clip(yx[:, 1], 0, width - 1)
    y0 = np.minimum(np.floor(y).astype(np.int64), max(height - 2, 0))
    x0 = np.minimum(np.floor(x).astype(np.int64), max(width - 2, 0))
    y1 = np.minimum(y0 + 1, height - 1)
    x1 = np.minimum(x0 + 1, width - 1)
    fy, fx = y - y0, x - x0
    v00, v01 = image[y0, x0].astype(np.float64), image[y0, x1].astype(np.float64)
    v10, v11 = image[y1, x0].astype(np.float64), image[y1, x1].astype(np.float64)
    return (v00 * (1 - fy) * (1 - fx) + v01 * (1 - fy) * fx
            + v10 * fy * (1 - fx) + v11 * fy * fx)


def _smallest_step(depth_map: np.ndarray) -> float:
    """Smallest positive difference between the map's distinct finite values (0 if none)."""
    values = np.unique(depth_map[np.isfinite(depth_map)] if depth_map.dtype.kind == "f" else depth_map)
    gaps = np.diff(values.astype(np.float64))
    gaps = gaps[gaps > 0]
    return float(gaps.min()) if gaps.size else 0.0


def _bridge_gaps(distance: np.ndarray, depth: np.ndarray) -> np.ndarray:
    """NaN depths replaced by linear interpolation along the path (ends held)."""
    good = np.isfinite(depth)
    if good.all():
        return depth.copy()
    return np.interp(distance, distance[good], depth[good])


def _running_median(distance: np.ndarray, depth: np.ndarray, half_um: float) -> np.ndarray:
    """Running median over about ±half_um (in samples at the mean spacing)."""
    if len(depth) < 3:
        return depth.copy()
    spacing = (distance[-1] - distance[0]) / (len(distance) - 1)
    half = max(1, int(round(half_um / spacing)))
    return ndimage.median_filter(depth, size=2 * half + 1, mode="nearest")


def _local_linear(distance: np.ndarray, depth: np.ndarray, width_um: float,
                  block: int = 2048) -> np.ndarray:
    """Value at each sample of a least-squares line through the samples within width_um.

    The window is centred on the sample and shifted inwards at the ends of the path.
    """
    start = np.clip(distance - width_um / 2, distance[0], max(distance[-1] - width_um, distance[0]))
    lo = np.searchsorted(distance, start, side="left")
    hi = np.searchsorted(distance, start + width_um, side="right")
    count = int(np.max(hi - lo))
    out = np.empty_like(depth)
    for first in range(0, len(depth), block):
        rows = slice(first, first + block)
        index = lo[rows, None] + np.arange(count)[None, :]
        valid = index < hi[rows, None]
        index = np.minimum(index, len(depth) - 1)
        t = np.where(valid, distance[index] - distance[rows, None], 0.0)
        z = np.where(valid, depth[index], 0.0)
        s0, s1, s2 = valid.sum(axis=1), t.sum(axis=1), (t * t).sum(axis=1)
        z0, z1 = z.sum(axis=1), (t * z).sum(axis=1)
        det = s0 * s2 - s1 * s1
        line = (s2 * z0 - s1 * z1) / np.where(det > 0, det, 1.0)
        out[rows] = np.where(det > 1e-12 * np.maximum(s2 * s0, 1e-300), line, z0 / s0)
    return out


def _tilted(distance: np.ndarray, depth: np.ndarray, shift: float) -> np.ndarray:
    """*depth* tilted by ±shift at the two ends, so that its overall rise grows by 2 * shift."""
    sign = 1.0 if depth[-1] >= depth[0] else -1.0
    centre, span = 0.5 * (distance[0] + distance[-1]), distance[-1] - distance[0]
    return depth + sign * shift * (distance - centre) / (0.5 * span)


def _length(distance: np.ndarray, depth: np.ndarray) -> float:
    """Length of the profile (distance, depth): sum of sqrt(d_plane^2 + d_depth^2)."""
    return math.fsum(np.hypot(np.diff(distance), np.diff(depth)).tolist())


def _taut_string(s: np.ndarray, low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """Shortest polyline over s with low <= z <= high at every sample, both ends free.

    The funnel method: from each bend point (apex) the cone of slopes that
    clears every gate ahead narrows until it closes; the path then bends at
    the gate end that set the closing side. The free start runs level until
    a level no longer fits; the free end takes the slope of the cone nearest 0.
    """
    n = len(s)
    span = float(np.max(np.abs(np.concatenate([low, high])))) + 1.0
    tol = 1e-12 * span
    top, bottom = np.minimum.accumulate(high), np.maximum.accumulate(low)
    closed = np.flatnonzero(bottom > top + tol)
    if closed.size == 0:
        return np.full(n, 0.5 * (bottom[-1] + top[-1]))
    j = int(closed[0])
    if low[j] > top[j - 1]:
        k = int(np.flatnonzero(high[:j] == top[j - 1])[-1])
        z = float(high[k])
    else:
        k = int(np.flatnonzero(low[:j] == bottom[j - 1])[-1])
        z = float(low[k])
    knots_i, knots_z = [0, k], [z, z]
    while k < n - 1:
        k, z = _next_bend(s, low, high, k, z, tol)
        knots_i.append(k)
        knots_z.append(z)
    return np.interp(s, s[knots_i], knots_z)


def _next_bend(s: np.ndarray, low: np.ndarray, high: np.ndarray, k: int, z: float,
               tol: float) -> tuple[int, float]:
    """The next bend (index, depth) of the taut string from the apex (s[k], z)."""
    n = len(s)
    ahead = 64
    while True:
        stop = min(n, k + 1 + ahead)
        run = s[k + 1:stop] - s[k]
        up = (high[k + 1:stop] - z) / run
        down = (low[k + 1:stop] - z) / run
        smax, smin = np.minimum.accumulate(up), np.maximum.accumulate(down)
        closed = np.flatnonzero(smin > smax + tol / run)
        if closed.size:
            j = int(closed[0])
            if down[j] > smax[j - 1]:  # the gate lies above the cone: bend under the upper side
                i = int(np.flatnonzero(up[:j] == smax[j - 1])[-1])
                return k + 1 + i, float(high[k + 1 + i])
            i = int(np.flatnonzero(down[:j] == smin[j - 1])[-1])
            return k + 1 + i, float(low[k + 1 + i])
        if stop == n:  # free end: the flattest slope the cone allows
            if smin[-1] > 0:
                i = int(np.flatnonzero(down == smin[-1])[-1])
                return k + 1 + i, float(low[k + 1 + i])
            if smax[-1] < 0:
                i = int(np.flatnonzero(up == smax[-1])[-1])
                return k + 1 + i, float(high[k + 1 + i])
            return n - 1, z
        ahead *= 2
