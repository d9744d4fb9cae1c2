"""Turning views: a stack resampled to cubic voxels and projected from angles around one axis.

:func:`turn_volume` resamples a z-stack once (block means where it must be
coarsened, cubic voxels along the turning axis); :func:`turned_view` rotates
it with :func:`scipy.ndimage.affine_transform` (order 1, the voxel size folded
into the matrix) onto a canvas large enough that nothing is cut off at any
angle; :func:`turning_views` and :func:`series_views` render a sequence of
frames with the projection kernels of this package, with one display range,
one density and one depth range for all frames, so that brightness and
colour mean the same in every frame.

Angles: the view at angle t about the y axis looks along ``cos t * z - sin t
* x`` and its columns run along ``sin t * z + cos t * x`` (about the x axis the
same with y for x: the rows turn). Angle 0 is the top view from the first
slice; at 90 degrees depth runs along the columns (about y, first slice at
the left) or down the rows (about x, first slice at the top).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterator, NamedTuple, Optional

import numpy as np
from scipy import ndimage

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import (
    check_choice,
    check_int,
    check_interval,
    check_number,
    check_stack,
    depth_first,
    fail,
    is_dask,
)
from ..primitives.chunks import DEFAULT_CHUNK_BYTES, plane_nbytes
from .colour import DEFAULT_CMAP, resolve_lut
from .depth_colour import depth_coded_projection
from .limits import display_limits
from .occlusion import DEFAULT_OPTICAL_DEPTH, occlusion_projection
from .peak import peak_projection

__all__ = [
    "MAX_SIDE",
    "TURN_AXES",
    "TURN_METHODS",
    "TurnVolume",
    "Views",
    "series_views",
    "turn_volume",
    "turned_view",
    "turning_views",
]

#: Axes a stack can turn about: the image's vertical (y) and horizontal (x) axis.
TURN_AXES = ("y", "x")
#: How frames are rendered: :func:`occlusion_projection`, the maximum of
#: :func:`peak_projection` in grey, or :func:`depth_coded_projection` (method
#: "peak": colour = depth of the strongest voxel, measured from the viewer).
TURN_METHODS = ("occlusion", "peak", "depth-colour")
#: Default cap on the resampled volume: at most this many cubic voxels along its
#: longest side. A larger stack is block-averaged to a coarser voxel first, so that
#: a movie of it stays feasible (each view then takes about a second).
MAX_SIDE = 256


@dataclass(frozen=True, eq=False)
class TurnVolume:
    """A stack resampled for turning views (from :func:`turn_volume`).

    Attributes
    ----------
    data : ndarray of float32, shape (a, z, b)
        The resampled stack, turning axis first: *a* is y (turn "y") or x
        (turn "x") at ``step_um`` spacing, then depth and the other lateral
        axis *b* at ``voxel_um`` spacing. C-contiguous.
    turn : str
        "y" or "x".
    step_um : float
        Edge of the cubic voxels of every view, in µm.
    voxel_um : (float, float)
        Spacing of ``data`` along z and b in µm (folded into the rotation matrix).
    spans : (float, float)
        Distance from the first to the last voxel centre of the stack along z
        and b, in units of ``step_um``.
    pivot : (float, float)
        The centre of rotation along z and b, in units of ``step_um`` from the
        first voxel centre: the stack's centre, moved by half a step along z
        when the two spans differ in parity, so that the voxels meet the
        canvas grid at every multiple of 90 degrees.
    centre : (float, float)
        The pivot in index units of ``data`` (z, b).
    depth_um : float
        Thickness of the stack (slices times z-step), the reference of the
        default occlusion density.
    factors : (int, int, int)
        Block-mean factors along the stack's (z, y, x); 1 where not coarsened.
    shape : (int, int, int)
        (depth, rows, cols) of the canvas of every view.
    capped : bool
        True when ``step_um`` is coarser than the finest voxel edge, because
        the volume would have exceeded its cap on size.
    """

    data: np.ndarray
    turn: str
    step_um: float
    voxel_um: tuple[float, float]
    spans: tuple[float, float]
    pivot: tuple[float, float]
    centre: tuple[float, float]
    depth_um: float
    factors: tuple[int, int, int]
    shape: tuple[int, int, int]
    capped: bool


def _voxel(voxel_um: Any) -> tuple[float, float, float]:
    values = list(np.ravel(voxel_um)) if np.ndim(voxel_um) == 1 else []
    if len(values) != 3:
        fail("voxel_um", "three voxel edges (z, y, x) in µm", voxel_um)
    z, y, x = (check_number(v, name=f"voxel_um[{i}]", low=0.0, low_open=True)
               for i, v in enumerate(values))
    return z, y, x


def _pivot(spans: tuple[float, float]) -> tuple[float, float]:
    """The centre of the rotation plane, half a step deeper when the spans' parities differ.

    Whole spans of different parity put one axis' voxels on whole and the
    other's on half positions from the centre; moving the pivot by half a step
    puts both on whole ones, so views at 90 and 270 degrees sample voxels
    exactly too (spans that are not whole steps are sampled between voxels anyway).
    """
    lz, lb = spans
    whole = all(abs(v - round(v)) < 1e-6 for v in spans)
    odd = whole and (round(lz) - round(lb)) % 2 == 1
    return lz / 2 + (0.5 if odd else 0.0), lb / 2


def _canvas_side(spans: tuple[float, float], pivot: tuple[float, float]) -> int:
    """Side of the square canvas of the rotation plane: every corner fits at any angle.

    Its centre (side - 1) / 2 has the pivot's fraction, so voxels meet grid points.
    """
    reach = math.hypot(max(pivot[0], spans[0] - pivot[0]), max(pivot[1], spans[1] - pivot[1]))
    half = math.ceil(reach - 1e-9)
    if abs(pivot[1] - round(pivot[1])) > 1e-6 and abs(pivot[1] % 1 - 0.5) < 1e-6:
        half = math.ceil(reach - 0.5 - 1e-9) + 0.5  # the pivot lies half-way between voxels
    return int(round(2 * half)) + 1


def _block_mean(v: Any, factors: tuple[int, ...], order: tuple[int, int, int],
                progress: Progress) -> np.ndarray:
    """Block means of the depth-first *v* (float32), axes in *order*; read slab by slab.

    A dask array is computed one slab of whole blocks at a time, never whole.
    """
    fz, fy, fx = factors
    nz, ny, nx = (int(n) // f for n, f in zip(v.shape, factors))
    sizes = (nz, ny, nx)
    out = np.empty(tuple(sizes[i] for i in order), np.float32)
    dst = out.transpose(tuple(np.argsort(order)))  # a (z, y, x) view of the result
    per_slab = max(1, DEFAULT_CHUNK_BYTES // max(1, fz * plane_nbytes(v.shape, v.dtype)))
    starts = list(range(0, nz, per_slab))
    report_progress(progress, 0, len(starts))
    for done, k0 in enumerate(starts, 1):
        k1 = min(nz, k0 + per_slab)
        slab = v[k0 * fz:k1 * fz, :ny * fy, :nx * fx]
        slab = np.asarray(slab.compute() if is_dask(slab) else slab)
        if fz == fy == fx == 1:
            dst[k0:k1] = slab
        else:
            dst[k0:k1] = slab.reshape(k1 - k0, fz, ny, fy, nx, fx).mean(axis=(1, 3, 5),
                                                                         dtype=np.float32)
        del slab
        report_progress(progress, done, len(starts))
    return out


def turn_volume(stack: Any, *, voxel_um: Any, turn: str = "y", max_side: int = MAX_SIDE,
                axis: int = 0, progress: Progress = None) -> TurnVolume:
    """Resample a z-stack once for views from any angle about one axis.

    The voxel edge of the views is the stack's finest voxel edge, or coarser
    so that the longest side holds at most *max_side* voxels. Where the
    stack's voxels are finer than that edge they are first averaged in blocks
    of whole voxels (an anti-aliasing step; a dask array is read slab by slab,
    never whole); the turning axis is then resampled linearly to the cubic
    edge. Depth and the other lateral axis keep their spacing: it is folded
    into the rotation matrix of :func:`turned_view`, so each view is
    interpolated once and the object keeps its true shape.

    Parameters
    ----------
    stack : array_like or dask array
        A 3-D stack (depth, rows, cols after moving *axis* to the front);
        integer, boolean or floating point; NaN counts as no signal. Not modified.
    voxel_um : (float, float, float)
        Voxel edges (z, y, x) in µm, positive.
    turn : {"y", "x"}, optional
        Turn about the image's vertical (y) or horizontal (x) axis.
    max_side : int, optional
        Cap on the voxels along the longest side of the resampled volume (>= 8).
    axis : int, optional
        The depth axis of *stack* (default 0).
    progress : callable, optional
        ``progress(done, total)`` after each slab read; may raise Cancelled.

    Returns
    -------
    TurnVolume
        ``data`` float32 of shape (a, z, b), the cubic edge ``step_um``, the
        canvas ``shape`` (depth, rows, cols) and the geometry of the views.

    Raises
    ------
    ParameterError
        For a stack that is not a 3-D numeric array, a bad voxel size, an
        unknown turning axis or a cap below 8.

    References
    ----------
    .. [1] SciPy documentation, ``scipy.ndimage.affine_transform`` (order 1:
       linear interpolation; a diagonal matrix resamples axis by axis).

    Examples
    --------
    >>> import numpy as np
    >>> vol = turn_volume(np.zeros((10, 20, 30), np.uint16), voxel_um=(3.0, 1.0, 1.0))
    >>> vol.step_um, vol.data.shape, vol.shape
    (1.0, (20, 10, 30), (42, 20, 42))
    """
    stack, axis = check_stack(stack, axis=axis)
    if stack.ndim != 3:
        fail("stack", "a single z-stack of 3 dimensions",
             f"<an array of shape {tuple(stack.shape)}>")
    v = depth_first(stack, axis)
    voxel = _voxel(voxel_um)
    turn = check_choice(turn, name="turn", choices=TURN_AXES)
    max_side = check_int(max_side, name="max_side", low=8)
    n = tuple(int(k) for k in v.shape)
    finest = min(voxel)
    step = max(finest, max((k - 1) * e for k, e in zip(n, voxel)) / (max_side - 1))
    factors = tuple(max(1, round(step / e)) for e in voxel)
    a, b = (1, 2) if turn == "y" else (2, 1)
    data = _block_mean(v, factors, (a, 0, b), progress)
    reduced = tuple(e * f for e, f in zip(voxel, factors))
    spans = tuple((k - 1) * e / step for k, e in zip(n, voxel))
    pivot = _pivot((spans[0], spans[b]))
    # a position x in µm from the first voxel centre is reduced index (x / e - (f - 1) / 2) / f
    centre = tuple((p * step / voxel[i] - (factors[i] - 1) / 2) / factors[i]
                   for p, i in zip(pivot, (0, b)))
    rows = math.ceil(spans[a] - 1e-9) + 1
    ratio = step / reduced[a]
    shift = ((n[a] - 1) / 2 - (factors[a] - 1) / 2) / factors[a] - ratio * (rows - 1) / 2
    if ratio != 1.0 or shift != 0.0 or rows != data.shape[0]:  # cubic voxels along the turning axis
        data = ndimage.affine_transform(data, np.array([ratio, 1.0, 1.0]), offset=(shift, 0.0, 0.0),
                                        output_shape=(rows,) + data.shape[1:], order=1,
                                        mode="nearest", output=np.float32)
    side = _canvas_side((spans[0], spans[b]), pivot)
    shape = (side, rows, side) if turn == "y" else (side, side, rows)
    return TurnVolume(np.ascontiguousarray(data), turn, float(step), (reduced[0], reduced[b]),
                      (spans[0], spans[b]), pivot, centre, n[0] * voxel[0], factors, shape,
                      step > finest * (1 + 1e-9))


def _cos_sin(angle_deg: float) -> tuple[float, float]:
    """cos and sin of an angle in degrees, exact at multiples of 90 degrees."""
    quarter, rest = divmod(float(angle_deg), 90.0)
    if rest == 0.0:
        return ((1.0, 0.0), (0.0, 1.0), (-1.0, 0.0), (0.0, -1.0))[int(quarter) % 4]
    t = math.radians(angle_deg)
    return math.cos(t), math.sin(t)


def _bounds(volume: TurnVolume, c: float, s: float, full_depth: bool) -> tuple[int, int, int, int]:
    """(d0, d1, b0, b1): the canvas box (depth, turned lateral axis) the turned stack occupies."""
    side = volume.shape[0]
    (lz, lb), (pz, pb) = volume.spans, volume.pivot
    corners = [(z - pz, x - pb) for z in (0.0, lz) for x in (0.0, lb)]
    depths = [c * z - s * x for z, x in corners]
    across = [s * z + c * x for z, x in corners]
    centre = (side - 1) / 2
    d0 = max(0, math.floor(centre + min(depths)) - 1)
    d1 = min(side, math.ceil(centre + max(depths)) + 2)
    b0 = max(0, math.floor(centre + min(across)) - 1)
    b1 = min(side, math.ceil(centre + max(across)) + 2)
    return (0, side, b0, b1) if full_depth else (d0, d1, b0, b1)


def _rotate_into(volume: TurnVolume, c: float, s: float, bounds: tuple[int, int, int, int],
                 box: np.ndarray) -> None:
    """Fill *box* (depth, rows, cols of the canvas region *bounds*) with the turned stack.

    Each plane across the turning axis is one 2-D affine_transform: output
    (d, b) -> physical (rotated back) -> input index (divided by the voxel size).
    """
    d0, _, b0, _ = bounds
    step, (vz, vb), (cz, cb) = volume.step_um, volume.voxel_um, volume.centre
    centre = (volume.shape[0] - 1) / 2  # the pivot's place on the square canvas
    matrix = np.array([[c * step / vz, s * step / vz], [-s * step / vb, c * step / vb]])
    offset = np.array([cz, cb]) + matrix @ np.array([d0 - centre, b0 - centre])
    planes = box if volume.turn == "y" else np.moveaxis(box, 2, 1)  # (depth, a, b) either way
    for j in range(volume.data.shape[0]):
        ndimage.affine_transform(volume.data[j], matrix, offset, output=planes[:, j, :], order=1,
                                 mode="constant", cval=np.nan)


def turned_view(volume: TurnVolume, angle_deg: float) -> np.ndarray:
    """The resampled stack turned by *angle_deg*, on the full canvas, depth first.

    Parameters
    ----------
    volume : TurnVolume
        From :func:`turn_volume`.
    angle_deg : float
        Angle of the view about the volume's turning axis, in degrees
        (0: the top view from the first slice; see the module docstring).

    Returns
    -------
    ndarray of float32, shape ``volume.shape``
        (depth from the viewer, rows, cols) in cubic voxels of
        ``volume.step_um``; NaN outside the stack. The pivot (the stack's
        centre, see :class:`TurnVolume`) is the canvas centre; its depth and
        width reach the farthest corner of the rotation plane, so no angle cuts
        anything off.

    Raises
    ------
    ParameterError
        For an angle that is not a finite number.

    References
    ----------
    .. [1] SciPy documentation, ``scipy.ndimage.affine_transform``.

    Examples
    --------
    >>> import numpy as np
    >>> stack = np.zeros((5, 5, 5), np.float32); stack[0, 2, 2] = 1.0   # centre of slice 0
    >>> vol = turn_volume(stack, voxel_um=(1.0, 1.0, 1.0))
    >>> vol.shape
    (7, 5, 7)
    >>> view = turned_view(vol, 90.0)    # first slice at the left, two columns off centre
    >>> [int(i) for i in np.unravel_index(np.nanargmax(view), view.shape)]
    [3, 2, 1]
    """
    angle = check_number(angle_deg, name="angle_deg")
    c, s = _cos_sin(angle)
    out = np.full(volume.shape, np.nan, np.float32)
    bounds = (0, volume.shape[0], 0, volume.shape[0])
    _rotate_into(volume, c, s, bounds, out)
    return out


class _Shared(NamedTuple):
    """The settings every frame of a :class:`Views` shares."""

    method: str
    step_um: float
    clim: tuple[float, float]
    density: Optional[float]
    depth_range: tuple[float, float]
    lut: Optional[np.ndarray]


class Views:
    """A sequence of frames rendered with one method and shared settings.

    Made by :func:`turning_views` (one frame per angle) or
    :func:`series_views` (one top view per time point). Every frame uses the
    same display limits ``clim``, occlusion ``density`` and colour
    ``depth_range``, so brightness and colour mean the same in all of them.

    Attributes
    ----------
    method : str
        One of :data:`TURN_METHODS`.
    count : int
        Number of frames.
    shape : (int, int)
        (rows, cols) of every frame.
    step_um : float
        Spacing of the samples along each ray, in µm.
    clim : (float, float)
        Display limits in input units.
    density : float or None
        Extinction per µm of a fully bright voxel ("occlusion").
    depth_range : (float, float) or None
        Depths in µm from the viewer at the two ends of the colour table
        ("depth-colour"; also the depth of the occlusion colours).
    lut : ndarray or None
        The colour table, (N, 3) float64; None for grey frames.
    angles_deg : tuple of float or None
        The angle of each frame (turning views).
    volume : TurnVolume or None
        The resampled stack of turning views (None for a series).
    """

    def __init__(self, shared: _Shared, count: int, shape: tuple[int, int], *,
                 volume: Optional[TurnVolume] = None, series: Any = None,
                 angles_deg: Optional[tuple[float, ...]] = None, axis: int = 0) -> None:
        self.method, self.step_um, self.clim = shared.method, shared.step_um, shared.clim
        self.density, self.depth_range, self.lut = shared.density, shared.depth_range, shared.lut
        self.count, self.shape = count, shape
        self.angles_deg, self.volume = angles_deg, volume
        self._series, self._axis = series, axis
        self._buffer: Optional[np.ndarray] = None

    def render(self, k: int) -> np.ndarray:
        """Frame *k* (0-based) as float32 RGB in [0, 1], shape ``shape + (3,)``; before overlays."""
        k = check_int(k, name="frame")
        if not 0 <= k < self.count:
            fail("frame", f"an index from 0 to {self.count - 1}", k)
        if self.volume is None:
            return self._project(self._series[k], self._axis, 0.0)
        return self._turned(k)

    def frames(self, *, progress: Progress = None) -> Iterator[np.ndarray]:
        """Yield every frame in order (see :meth:`render`); ``progress(done, count)`` after each."""
        report_progress(progress, 0, self.count)
        for k in range(self.count):
            frame = self.render(k)
            report_progress(progress, k + 1, self.count)
            yield frame

    def _turned(self, k: int) -> np.ndarray:
        volume = self.volume
        c, s = _cos_sin(self.angles_deg[k])
        full_depth = self.method == "occlusion" and self.lut is not None
        d0, d1, b0, b1 = bounds = _bounds(volume, c, s, full_depth)
        a = volume.data.shape[0]
        if self._buffer is None:
            self._buffer = np.empty(int(np.prod(volume.shape)), np.float32)
        size = (d1 - d0, a, b1 - b0) if volume.turn == "y" else (d1 - d0, b1 - b0, a)
        box = self._buffer[:int(np.prod(size))].reshape(size)
        _rotate_into(volume, c, s, bounds, box)
        image = self._project(box, 0, d0 * self.step_um)
        frame = np.zeros(self.shape + (3,), np.float32)
        if volume.turn == "y":
            frame[:, b0:b1] = image
        else:
            frame[b0:b1, :] = image
        return frame

    def _project(self, box: Any, axis: int, shift_um: float) -> np.ndarray:
        """A frame from the depth-first *box*; its first slice lies *shift_um* behind the front."""
        step, method = self.step_um, self.method
        if method == "depth-colour":
            d0, d1 = self.depth_range
            result = depth_coded_projection(box, z_step=step, method="peak", cmap=self.lut,
                                            depth_range=(d0 - shift_um, d1 - shift_um),
                                            clim=self.clim, axis=axis)
            return np.asarray(result.rgb, np.float32)
        if method == "occlusion":
            image = np.asarray(occlusion_projection(box, z_step=step, density=self.density,
                                                    clim=self.clim, cmap=self.lut, axis=axis))
            return image if image.ndim == 3 else np.repeat(image[..., None], 3, axis=-1)
        peak = np.asarray(peak_projection(box, z_step=step, axis=axis).peak, np.float32)
        lo, hi = self.clim
        grey = np.clip(np.nan_to_num((peak - np.float32(lo)) / np.float32(hi - lo)), 0.0, 1.0)
        return np.repeat(grey[..., None], 3, axis=-1)


def _shared(options: tuple, sample: Any, axis: int, step_um: float, thickness_um: float,
            deepest_um: float) -> _Shared:
    """The shared settings from (method, cmap, clim, density), checked; defaults from *sample*.

    Display limits default to the percentiles of *sample* (depth along
    *axis*), the occlusion density to 10 / *thickness_um*; colours run over
    depths 0 to *deepest_um*.
    """
    method, cmap, clim, density = options
    method = check_choice(method, name="method", choices=TURN_METHODS)
    if method == "peak" and cmap is not None:
        fail("cmap", "no colour map for method 'peak' (grey frames)", cmap)
    if method == "depth-colour" and cmap is None:
        cmap = DEFAULT_CMAP
    lut = None if cmap is None else resolve_lut(cmap)
    if density is not None:
        density = check_number(density, name="density", low=0.0)
    elif method == "occlusion":
        density = DEFAULT_OPTICAL_DEPTH / thickness_um
    lo_hi = check_interval(clim, name="clim") or display_limits(sample, axis=axis)
    return _Shared(method, step_um, lo_hi, density if method == "occlusion" else None,
                   (0.0, deepest_um), lut)


def turning_views(volume: TurnVolume, *, frames: int = 36, method: str = "occlusion",
                  cmap: Any = None, clim: Optional[tuple[float, float]] = None,
                  density: Optional[float] = None) -> Views:
    """Views of a resampled stack from angles evenly spaced through 360 degrees.

    Frame k looks from ``360 * k / frames`` degrees about the volume's turning
    axis (frame 0: the top view) and is rendered from :func:`turned_view` by
    :func:`occlusion_projection`, :func:`peak_projection` or
    :func:`depth_coded_projection`, all frames with the same settings.

    Parameters
    ----------
    volume : TurnVolume
        From :func:`turn_volume`.
    frames : int, optional
        Number of views (>= 2).
    method : {"occlusion", "peak", "depth-colour"}, optional
        Occlusion rendering (grey, or coloured by depth with *cmap*); the
        maximum along each ray in grey; or colour = depth of the strongest
        voxel measured from the viewer, with brightness from its intensity.
    cmap : str, Colormap or (N, 3) array, optional
        Colour table of depth ("depth-colour": default :data:`DEFAULT_CMAP`;
        "occlusion": each voxel emits the colour of its depth, default grey).
    clim : (float, float), optional
        Display limits; default the 0.1 and 99.9 percentiles of the resampled volume.
    density : float, optional
        Occlusion extinction per µm of a fully bright voxel; default
        ``DEFAULT_OPTICAL_DEPTH / volume.depth_um``, as the top-view projection.

    Returns
    -------
    Views
        Render frames with ``views.render(k)`` or ``views.frames(progress=...)``.
        Depths run from the canvas front (the nearest the turning stack comes
        to the viewer) over the canvas depth, ``(0, (depth - 1) * step_um)``.

    Raises
    ------
    ParameterError
        For fewer than 2 frames, an unknown method or colour table, a colour
        table with "peak", a bad clim or a negative density.

    References
    ----------
    .. [1] N. Max, "Optical models for direct volume rendering", IEEE TVCG
       1(2):99-108, 1995 (the occlusion rendering).

    Examples
    --------
    >>> import numpy as np
    >>> stack = np.zeros((4, 6, 6), np.uint8); stack[1, 2:4, 1:5] = 200
    >>> views = turning_views(turn_volume(stack, voxel_um=(1, 1, 1)), frames=4, method="peak")
    >>> views.angles_deg, views.render(0).shape
    ((0.0, 90.0, 180.0, 270.0), (6, 8, 3))
    """
    frames = check_int(frames, name="frames", low=2)
    shared = _shared((method, cmap, clim, density), volume.data, 1, volume.step_um,
                     volume.depth_um, (volume.shape[0] - 1) * volume.step_um)
    angles = tuple(360.0 * k / frames for k in range(frames))
    return Views(shared, frames, volume.shape[1:], volume=volume, angles_deg=angles)


def series_views(stack: Any, *, z_step: float = 1.0, method: str = "depth-colour",
                 cmap: Any = None, clim: Optional[tuple[float, float]] = None,
                 density: Optional[float] = None, axis: int = 1) -> Views:
    """Top views of a series of z-stacks (e.g. time points), one frame each, shared settings.

    Parameters
    ----------
    stack : array_like or dask array
        4-D: frames along axis 0 (e.g. TZYX), depth along *axis*. Not modified.
    z_step : float, optional
        Slice spacing in µm (> 0).
    method : {"depth-colour", "occlusion", "peak"}, optional
        As in :func:`turning_views`; depth is measured from the first slice.
    cmap : str, Colormap or (N, 3) array, optional
        Colour table of depth (default :data:`DEFAULT_CMAP` for "depth-colour").
    clim : (float, float), optional
        Display limits; default the 0.1 and 99.9 percentiles of the whole series.
    density : float, optional
        Occlusion extinction per µm; default 10 / stack depth.
    axis : int, optional
        The depth axis (1, 2 or 3; default 1).

    Returns
    -------
    Views
        One frame per index of axis 0, all with the same display limits,
        density and depth range ``(0, (n - 1) * z_step)``.

    Raises
    ------
    ParameterError
        For a stack that is not 4-D, a depth axis of 0, or a bad option.

    References
    ----------
    .. [1] numpy documentation, ``numpy.percentile`` (the shared display limits).

    Examples
    --------
    >>> import numpy as np
    >>> series = np.zeros((3, 4, 5, 6), np.uint16); series[:, 2, 1, 1] = 500
    >>> views = series_views(series, z_step=2.0)
    >>> views.count, views.depth_range, views.render(2).shape
    (3, (0.0, 6.0), (5, 6, 3))
    """
    stack, axis = check_stack(stack, axis=axis, min_ndim=4)
    if stack.ndim != 4 or axis == 0:
        fail("stack", "a series of z-stacks: 4 dimensions, frames along axis 0 and depth along "
             "another", f"<an array of shape {tuple(stack.shape)} with depth axis {axis}>")
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    n = int(stack.shape[axis])
    shared = _shared((method, cmap, clim, density), stack, axis, z_step, n * z_step,
                     (n - 1) * z_step if n > 1 else z_step)
    rows_cols = tuple(int(k) for i, k in enumerate(stack.shape) if i not in (0, axis))
    return Views(shared, int(stack.shape[0]), rows_cols, series=stack, axis=axis - 1)
