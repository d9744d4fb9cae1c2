"""Per-slice foreground profile of one stack: foreground chosen on the corrected stack, iterated.

What it is: the mean intensity above background of each slice's
foreground voxels, measured so that it does not depend on how much
structure a slice holds. The slices of one stack show different
structures, so a threshold per slice would select a different part of each
slice's signal as it dims. Here one threshold is applied to the *corrected*
stack (each slice times its gain from a depth model); since the selection
depends on the correction, selection and fit alternate until the gains
settle (:func:`iterate_foreground`). The stack is read once, as a lateral
sample (every ``step``-th row and column of each slice,
:func:`lateral_sample`); all iterations work on that sample, with each
slice's sigma-clipped background (:func:`.background.rows_background`)
subtracted. :class:`ForegroundSample` keeps the voxels that can ever be
foreground sorted per slice, with the lateral tile each lies in, so that a
measurement is a binary search per slice -- also with the tiles weighted by
a bootstrap resample (and slices counted as often as it drew them), which
re-runs the whole select-and-fit loop cheaply. Two threshold rules
(:meth:`ForegroundSample.threshold`): "pinned" to the brightest slice (the
attenuation estimate) and "noisiest" (following the noisiest measured slice,
the default of :func:`measure_depth_profile`).

Where it is used: :func:`~viewer_plugin.kernels.estimate_attenuation` (its
profile, with the exponential model and with its smooth model, and its
bootstrap interval) and the depth check of
:func:`~viewer_plugin.kernels.estimate_bleaching` for a single stack
(:func:`measure_depth_profile`, "noisiest" rule until that check is validated
with the pinned one).
"""

from __future__ import annotations

import copy
import math
import warnings
from dataclasses import dataclass
from typing import Any, Callable

import numba
import numpy as np

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import depth_first, fail, is_dask
from .background import SliceBackground, rows_background
from .chunks import depth_chunks, plane_nbytes
from .fitting import fit_log_profile
from .threshold import otsu_threshold

__all__ = [
    "DepthProfile",
    "Foreground",
    "ForegroundLoop",
    "ForegroundSample",
    "MAX_ITERATIONS",
    "PINNED_GROWTH",
    "THRESHOLD_RULES",
    "TILES_PER_SIDE",
    "auto_step",
    "exponential_gain",
    "iterate_foreground",
    "lateral_sample",
    "measure_depth_profile",
    "moved_mask",
    "profile_steps",
    "tile_index",
    "Weighting",
]

#: Wanted number of sampled voxels per slice (the lateral step is chosen for it).
TARGET_SAMPLE_PER_SLICE = 2**14

#: A slice needs at least this many foreground voxels in the sample to be measured.
MIN_FOREGROUND = 10

#: Slices needing a larger gain than this hold too little signal to measure.
MAX_SELECTION_GAIN = 50.0

#: Slices whose gain-corrected background noise exceeds this multiple of the
#: brightest slice's are too noisy after correction to be measured ("noisiest" rule).
MAX_NOISE_GROWTH = 5.0

#: The same for the "pinned" rule, whose threshold is NOISE_SIGMAS times this multiple
#: of the brightest slice's corrected noise (see ForegroundSample.threshold).
PINNED_GROWTH = 3.0

#: How the foreground threshold follows the gains (ForegroundSample.threshold).
THRESHOLD_RULES = ("noisiest", "pinned")

#: Foreground must exceed this many (corrected) background standard deviations of the
#: noisiest slice that is measured. Common practice is 3; 5 is used because
#: photon-counting backgrounds at low counts (a few photons of haze), and a
#: photomultiplier's random gain, have a much heavier bright tail than a Gaussian.
NOISE_SIGMAS = 5.0

#: Lateral tiles per side of the sample: the units a bootstrap resamples (up to 4 x 4 = 16).
#: Large tiles, because structures such as fibres can cross much of the field.
TILES_PER_SIDE = 4

#: Iteration limit and tolerance (largest change of ln gain) of the select-and-fit loop.
MAX_ITERATIONS = 40
TOLERANCE = 1e-4
DAMP_AFTER = 8
#: A loop still hopping between two foreground selections after 2 * DAMP_AFTER
#: passes is accepted when the gains move by less than this (1 %).
LOOSE_TOLERANCE = 1e-2


@dataclass(frozen=True)
class Foreground:
    """One foreground measurement: signal above background per slice (float64 arrays)."""

    signal: np.ndarray
    sem: np.ndarray
    fraction: np.ndarray
    threshold: float


#: ``gain_model(depth, foreground) -> (gain, model_curve)``: a depth model fitted to a measurement.
GainModel = Callable[[np.ndarray, Foreground], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class ForegroundLoop:
    """Outcome of :func:`iterate_foreground`."""

    foreground: Foreground
    gain: np.ndarray
    curve: np.ndarray
    n_iterations: int
    converged: bool


@dataclass(frozen=True)
class DepthProfile:
    """Outcome of :func:`measure_depth_profile`: the sample, its backgrounds and the loop.

    ``above`` is the sample minus each slice's background level;
    ``selection`` the same prepared for repeated measurements (and
    resampling); ``nan_fraction`` the share of sampled voxels that were NaN
    or infinite without a mask (0 with a mask); ``done`` the progress steps used.
    """

    sample: np.ndarray
    above: np.ndarray
    background: SliceBackground
    depth: np.ndarray
    step: int
    loop: ForegroundLoop
    nan_fraction: float
    done: int
    selection: "ForegroundSample"


def auto_step(plane_shape: tuple[int, ...]) -> int:
    """Lateral sampling step giving about :data:`TARGET_SAMPLE_PER_SLICE` voxels a slice."""
    voxels = int(np.prod(plane_shape, dtype=np.int64))
    return max(1, int(math.sqrt(voxels / TARGET_SAMPLE_PER_SLICE)))


def _chunk_count(moved: Any) -> int:
    return len(list(depth_chunks(moved.shape[0], plane_nbytes(moved.shape, moved.dtype))))


def profile_steps(moved: Any) -> int:
    """Progress steps :func:`measure_depth_profile` uses on a depth-first stack."""
    return _chunk_count(moved) + MAX_ITERATIONS


def lateral_sample(moved: Any, mask: Any, step: int, progress: Progress, total: int) -> np.ndarray:
    """Read a strided lateral sample of a depth-first 3-D stack as float32 rows.

    Returns the ``(n_slices, n_values)`` sample, NaN where the (depth-first)
    mask excludes a voxel or the voxel is not finite; reports one progress
    step per z-chunk read.
    """
    n_depth = moved.shape[0]
    plane = moved[0, ::step, ::step]
    n_values = int(np.prod(plane.shape))
    sample = np.empty((n_depth, n_values), dtype=np.float32)
    chunks = list(depth_chunks(n_depth, plane_nbytes(moved.shape, moved.dtype)))
    for done, part in enumerate(chunks, start=1):
        block = moved[part, ::step, ::step]
        if is_dask(block):
            block = block.compute()
        sample[part] = np.asarray(block).reshape(part.stop - part.start, n_values)
        report_progress(progress, done, total)
    if mask is not None:
        sub = mask[:, ::step, ::step]
        if is_dask(sub):
            sub = sub.compute()
        sub = np.broadcast_to(np.asarray(sub), (n_depth,) + plane.shape).reshape(n_depth, n_values)
        sample[~sub] = np.nan
    sample[~np.isfinite(sample)] = np.nan
    return sample


def moved_mask(mask: Any, shape: tuple[int, ...], axis: int) -> Any:
    """The mask broadcast to the stack's shape, with *axis* moved to the front (a view)."""
    if mask is None:
        return None
    if is_dask(mask):
        import dask.array as da

        return depth_first(da.broadcast_to(mask, shape), axis)
    return depth_first(np.broadcast_to(mask, shape), axis)


def brightest_slice(above: np.ndarray) -> int:
    """Index of the slice with the highest 99th percentile above background (best signal)."""
    thin = above[:, :: max(1, above.shape[1] // 4096)]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN (masked) slices
        bright = np.nanpercentile(thin, 99, axis=1)
    return int(np.nanargmax(bright)) if np.isfinite(bright).any() else 0


def tile_index(plane_shape: tuple[int, int], per_side: int = TILES_PER_SIDE) -> tuple[np.ndarray, int]:
    """Tile number of every sampled lateral position (row-major), and the number of tiles.

    The sampled plane is cut into at most *per_side* x *per_side* rectangular
    tiles of equal size (the last row and column of tiles may be smaller).

    Examples
    --------
    >>> tiles, n = tile_index((4, 6), per_side=2)
    >>> n, tiles.reshape(4, 6)[:, ::2].tolist()
    (4, [[0, 0, 1], [0, 0, 1], [2, 2, 3], [2, 2, 3]])
    """
    ny, nx = (int(v) for v in plane_shape)
    rows = np.arange(ny) // -(-ny // min(per_side, max(ny, 1)))
    cols = np.arange(nx) // -(-nx // min(per_side, max(nx, 1)))
    n_cols = int(cols[-1]) + 1 if nx else 1
    tiles = (rows[:, None] * n_cols + cols[None, :]).ravel()
    return tiles.astype(np.int64), (int(rows[-1]) + 1 if ny else 1) * n_cols


@dataclass(frozen=True)
class Weighting:
    """How often each lateral tile and each slice counts (a bootstrap resample), prepared.

    ``count``, ``total`` and ``square`` are the candidates' weighted suffix
    sums (see :class:`ForegroundSample`), ``finite`` the weighted number of
    finite voxels of each slice, ``slices`` each slice's multiplicity in the
    fit (None: every slice once).
    """

    count: np.ndarray
    total: np.ndarray
    square: np.ndarray
    finite: np.ndarray
    slices: np.ndarray | None = None


class ForegroundSample:
    """The lateral sample, prepared for repeated foreground measurements.

    Built once from the sample above background (*above*, one row per
    slice, ``plane_shape`` lateral positions) and each slice's background
    standard deviation (*noise*). The voxels that can ever be foreground
    (above :data:`NOISE_SIGMAS` times their slice's noise, or above 0 for
    noise-free slices) are kept sorted by value within each slice, with the
    lateral tile they lie in (:func:`tile_index`). A measurement for given
    gains then needs only a binary search per slice, also when the tiles are
    weighted (counted as often as a bootstrap resample drew them).
    """

    def __init__(self, above: np.ndarray, noise: np.ndarray, plane_shape: tuple[int, int], *,
                 rule: str = "noisiest", growth: float | None = None) -> None:
        self.above = above
        self.rule = rule
        self.growth = float(growth if growth is not None else
                            PINNED_GROWTH if rule == "pinned" else MAX_NOISE_GROWTH)
        self.noise = np.asarray(noise, dtype=np.float64)
        self.reference = brightest_slice(above)
        self.tiles, self.n_tiles = tile_index(plane_shape)
        floor = np.where(self.noise > 0, NOISE_SIGMAS * self.noise, 0.0)
        with np.errstate(invalid="ignore"):
            rows, cols = np.nonzero(above > floor[:, None].astype(np.float32))
        values = above[rows, cols].astype(np.float64)
        order = np.lexsort((values, rows))
        self.values = values[order]
        self.columns = cols[order].astype(np.int64)
        self.starts = np.searchsorted(rows[order], np.arange(above.shape[0] + 1)).astype(np.int64)
        onehot = np.zeros((above.shape[1], self.n_tiles))
        onehot[np.arange(above.shape[1]), self.tiles] = 1.0
        self.finite_tiles = np.isfinite(above).astype(np.float64) @ onehot
        self.lateral_finite = int(np.isfinite(above).any(axis=0).sum())
        self.unweighted = self.weighting()

    def with_rule(self, rule: str) -> "ForegroundSample":
        """The same prepared sample with another threshold rule (and its default growth)."""
        other = copy.copy(self)
        other.rule = rule
        other.growth = PINNED_GROWTH if rule == "pinned" else MAX_NOISE_GROWTH
        return other

    def weighting(self, tiles: np.ndarray | None = None, slices: np.ndarray | None = None) -> Weighting:
        """Each tile counted *tiles[t]* times, each slice *slices[z]* times (default: once)."""
        w = np.ones(self.n_tiles) if tiles is None else np.asarray(tiles, dtype=np.float64)
        count, total, square = _suffix_sums(self.values, self.tiles[self.columns], self.starts, w)
        return Weighting(count, total, square, self.finite_tiles @ w,
                         None if slices is None else np.asarray(slices, dtype=np.float64))

    def threshold(self, gain: np.ndarray) -> tuple[float, np.ndarray]:
        """The foreground threshold on the corrected sample, and the slices that can be measured.

        A slice can be measured while its corrected background noise is at
        most *growth* times that of the reference (brightest) slice and its
        gain at most :data:`MAX_SELECTION_GAIN`. The threshold is
        :data:`NOISE_SIGMAS` times

        * "noisiest": the largest corrected noise among the slices that can
          be measured (growth :data:`MAX_NOISE_GROWTH`); low enough to take in
          most of the structure, but it rises with the estimated attenuation
          (the noisiest slice's gain grows with it) and feeds back into the
          estimate: with a photomultiplier's heavy-tailed noise that loop ran
          away to about 1.6 times the true attenuation on the demo;
        * "pinned": *growth* (:data:`PINNED_GROWTH`) times the reference
          slice's corrected noise, fixed to the reference slice whatever the
          deeper slices' gains; every measured slice still sees a threshold of
          at least :data:`NOISE_SIGMAS` of its own noise.

        Noise-free data (zero spread) use Otsu's threshold of the corrected sample.
        """
        scaled = self.noise * gain
        reference = float(scaled[self.reference])
        usable = gain <= MAX_SELECTION_GAIN
        with np.errstate(invalid="ignore"):
            usable &= ~(scaled > self.growth * reference)
        if self.rule == "pinned":
            threshold = NOISE_SIGMAS * self.growth * reference
        else:
            corrected = np.where(usable, scaled, np.nan)
            threshold = (NOISE_SIGMAS * float(np.nanmax(corrected)) if np.isfinite(corrected).any()
                         else math.nan)
        if not threshold > 0:
            part = self.above[usable]
            gain32 = gain.astype(np.float32)[usable, None]
            threshold = otsu_threshold(part[:, :: max(1, part.size // 2**17)] * gain32)
        return threshold, usable

    def measure(self, gain: np.ndarray, weighted: Weighting | None = None) -> Foreground:
        """Mean above-background intensity of the foreground voxels of every slice.

        The foreground is chosen on the *corrected* sample ``above * gain``
        with one threshold for the whole stack (:meth:`threshold`), so that
        a correct gain selects the same part of the structure at every
        depth; the threshold is low enough to take in most of the structure
        (a threshold far out in the bright tail makes the select-and-fit
        loop drift), high enough that amplified noise of deep slices does
        not pass as dim foreground. Which slices cannot be measured depends
        on gains and noise only, not on the signal, so leaving them out does
        not bias the rest. The signal itself is measured on *above*, with
        the tiles weighted as in *weighted* (default: each once); a slice
        counted ``m`` times has its standard error divided by ``sqrt(m)`` (its
        weight in a fit times ``m``), and a slice not drawn is not measured.
        """
        weighted = self.unweighted if weighted is None else weighted
        threshold, usable = self.threshold(gain)
        with np.errstate(divide="ignore", invalid="ignore"):
            cutoffs = np.where(gain > 0, threshold / gain, np.inf)
        count, total, square = _sums_above(self.values, self.starts, weighted.count, weighted.total,
                                           weighted.square, cutoffs)
        safe = np.maximum(count, 1.0)
        mean = total / safe
        var = np.maximum(square / safe - mean**2, 0.0) * safe / np.maximum(safe - 1, 1)
        ok = (count >= MIN_FOREGROUND) & usable
        if weighted.slices is not None:
            ok &= weighted.slices > 0
            safe = safe * np.maximum(weighted.slices, 1e-12)
        signal = np.where(ok, mean, np.nan)
        sem = np.where(ok, np.sqrt(var / safe), np.nan)
        fraction = count / np.maximum(weighted.finite, 1.0)
        return Foreground(signal=signal, sem=sem, fraction=fraction, threshold=threshold)

    def field_fraction(self, fg: Foreground, gain: np.ndarray) -> float:
        """Share of the sampled lateral positions holding foreground in at least one measured slice."""
        if not self.lateral_finite:
            return 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            cutoffs = np.where(gain > 0, fg.threshold / gain, np.inf)
        used = np.zeros(self.above.shape[1], dtype=bool)
        for z in np.flatnonzero(np.isfinite(fg.signal)):
            lo, hi = self.starts[z], self.starts[z + 1]
            first = lo + int(np.searchsorted(self.values[lo:hi], cutoffs[z], side="right"))
            used[self.columns[first:hi]] = True
        return float(used.sum()) / self.lateral_finite


@numba.njit(cache=True, nogil=True)
def _suffix_sums(values, tiles, starts, weights):  # pragma: no cover - compiled
    """Per slice segment (values ascending): weighted count, sum and sum of squares from i to its end."""
    n = values.size
    count = np.zeros(n)
    total = np.zeros(n)
    square = np.zeros(n)
    for s in range(starts.size - 1):
        a0 = 0.0
        a1 = 0.0
        a2 = 0.0
        for i in range(starts[s + 1] - 1, starts[s] - 1, -1):
            w = weights[tiles[i]]
            v = values[i]
            a0 += w
            a1 += w * v
            a2 += w * v * v
            count[i] = a0
            total[i] = a1
            square[i] = a2
    return count, total, square


@numba.njit(cache=True, nogil=True)
def _sums_above(values, starts, count, total, square, cutoffs):  # pragma: no cover - compiled
    """Per slice: weighted count, sum and sum of squares of the values above its cutoff."""
    m = starts.size - 1
    c = np.zeros(m)
    t = np.zeros(m)
    q = np.zeros(m)
    for s in range(m):
        lo = starts[s]
        hi = starts[s + 1]
        if hi == lo or not cutoffs[s] < np.inf:
            continue
        first = lo + np.searchsorted(values[lo:hi], cutoffs[s], side="right")
        if first < hi:
            c[s] = count[first]
            t[s] = total[first]
            q[s] = square[first]
    return c, t, q


def exponential_gain(depth: np.ndarray, fg: Foreground) -> tuple[np.ndarray, np.ndarray]:
    """Beer-Lambert model of a measurement: gains ``exp(rate * (z - z0))`` and the fitted curve.

    The fit is the weighted log-linear fit of :func:`.fitting.fit_log_profile`;
    a signal that does not decay gets gains of 1.
    """
    fit = fit_log_profile(depth, fg.signal, fg.sem)
    if not math.isfinite(fit.slope):
        return np.ones_like(depth), np.full(depth.shape, np.nan)
    curve = np.exp(fit.intercept + fit.slope * depth)
    rate = -fit.slope
    gain = np.exp(rate * (depth - depth[0])) if rate > 0 else np.ones_like(depth)
    return gain, curve


def iterate_foreground(sample: ForegroundSample, depth: np.ndarray, gain_model: GainModel, *,
                       weighted: Weighting | None = None, start: np.ndarray | None = None,
                       progress: Progress = None, done: int = 0, total: int = 1) -> ForegroundLoop:
    """Select foreground on the corrected sample, re-fit *gain_model*, until the gains settle.

    The loop starts from gains of 1 (or *start*) and stops when the largest
    change of ``ln gain`` is below 1e-4, or below 1 % after 16 passes (a
    loop that hops between two nearly equal selections is damped after 8
    passes); at most :data:`MAX_ITERATIONS` passes, one progress step each
    (``done + pass`` of *total*). *weighted* counts tiles and slices as a
    bootstrap resample drew them (:meth:`ForegroundSample.weighting`).
    """
    weighted = sample.unweighted if weighted is None else weighted
    gain = np.ones_like(depth) if start is None else np.asarray(start, dtype=np.float64)
    curve = np.full(depth.shape, np.nan)
    fg = sample.measure(gain, weighted)
    converged = False
    iteration = 0
    for iteration in range(1, MAX_ITERATIONS + 1):
        if int(np.isfinite(fg.signal).sum()) < 3:
            break
        new_gain, curve = gain_model(depth, fg)
        if iteration > DAMP_AFTER:  # damp a loop that hops between two selections
            new_gain = np.sqrt(new_gain * gain)
        change = float(np.max(np.abs(np.log(new_gain) - np.log(gain))))
        gain = new_gain
        report_progress(progress, done + iteration, total)
        if change < TOLERANCE or (iteration > 2 * DAMP_AFTER and change < LOOSE_TOLERANCE):
            converged = True
            break
        fg = sample.measure(gain, weighted)
    return ForegroundLoop(fg, gain, curve, iteration, converged)


def _check_sample(sample: np.ndarray, has_mask: bool, name: str) -> float:
    """Reject an all-NaN (or fully masked) sample; the share of NaN voxels without a mask."""
    finite = np.isfinite(sample)
    if not finite.any():
        if has_mask:
            fail("mask", "a mask that keeps some finite voxels", "<a mask that excludes all of them>")
        fail(name, "finite values", "<only NaN or infinite voxels>")
    return 0.0 if has_mask else float(1.0 - finite.mean())


def _check_structure(fg: Foreground, sigma: np.ndarray, name: str) -> None:
    """Reject a stack whose 'foreground' is no brighter than background noise."""
    measured = np.isfinite(fg.signal)
    if measured.sum() < 3:
        fail(name, "structure brighter than the background in at least 3 slices",
             f"<{int(measured.sum())} slice(s) with measurable foreground>",
             hint="is the stack empty or constant, or the mask too small?")
    with np.errstate(divide="ignore", invalid="ignore"):
        contrast = np.where(measured, fg.signal / np.where(sigma > 0, sigma, np.nan), np.nan)
        contrast = np.where(measured & (sigma == 0) & (fg.signal > 0), np.inf, contrast)
    best = float(np.nanmax(contrast)) if (~np.isnan(contrast)).any() else 0.0
    if best < 3.0:
        fail(name, "structure at least 3 background standard deviations above the background",
             f"<at most {best:.2g} standard deviations: background only>")


def measure_depth_profile(
    moved: Any,
    *,
    z_step: float,
    mask: Any = None,
    step: int | None = None,
    progress: Progress = None,
    total: int | None = None,
    name: str = "stack",
    rule: str = "noisiest",
) -> DepthProfile:
    """Foreground profile of a depth-first 3-D stack with the exponential select-and-fit loop.

    Parameters
    ----------
    moved : ndarray or dask array, 3-D, depth first
        The stack (already validated); not modified.
    z_step : float
        Slice spacing (the unit of the depths).
    mask : array_like of bool, optional
        Depth-first and broadcast to *moved* (see :func:`moved_mask`).
    step : int, optional
        Lateral sampling step; default :func:`auto_step`.
    progress, total
        ``progress(done, total)``; *total* defaults to :func:`profile_steps`.
    name : str
        The parameter named in error messages.
    rule : {"noisiest", "pinned"}
        How the foreground threshold follows the gains
        (:meth:`ForegroundSample.threshold`); "pinned" when the stack's
        structure hardly rises above the background spread falls back to
        a threshold of :data:`NOISE_SIGMAS` times the reference slice's noise.

    Returns
    -------
    DepthProfile

    Raises
    ------
    ParameterError
        For an all-NaN (or fully masked) stack, or one without structure at
        least 3 background standard deviations above the background in 3 slices.
    """
    step = auto_step(moved.shape[1:]) if step is None else step
    total = profile_steps(moved) if total is None else total
    sample = lateral_sample(moved, mask, step, progress, total)
    nan_fraction = _check_sample(sample, mask is not None, name)
    depth = np.arange(moved.shape[0], dtype=np.float64) * z_step
    background = rows_background(sample)
    above = sample - background.level[:, None].astype(np.float32)
    plane = (-(-int(moved.shape[1]) // step), -(-int(moved.shape[2]) // step))
    selection = ForegroundSample(above, background.sigma, plane, rule=rule)
    done = _chunk_count(moved)
    loop = iterate_foreground(selection, depth, exponential_gain, progress=progress, done=done,
                              total=total)
    if rule == "pinned" and int(np.isfinite(loop.foreground.signal).sum()) < 3:
        # dense texture: hardly anything rises that far above the background spread
        selection = ForegroundSample(above, background.sigma, plane, rule=rule, growth=1.0)
        loop = iterate_foreground(selection, depth, exponential_gain, done=done, total=total)
    _check_structure(loop.foreground, background.sigma, name)
    return DepthProfile(sample=sample, above=above, background=background, depth=depth, step=step,
                        loop=loop, nan_fraction=nan_fraction, done=done + MAX_ITERATIONS,
                        selection=selection)
