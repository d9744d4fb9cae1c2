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
subtracted.

Where it is used: :func:`~viewer_plugin.kernels.estimate_attenuation` (its
profile, with the exponential model and with its smooth model) and the
depth check of :func:`~viewer_plugin.kernels.estimate_bleaching` for a
single stack (:func:`measure_depth_profile`), so that the two read the same
decay from one stack.
"""

from __future__ import annotations

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
    "MAX_ITERATIONS",
    "auto_step",
    "exponential_gain",
    "iterate_foreground",
    "lateral_sample",
    "measure_depth_profile",
    "moved_mask",
    "profile_steps",
]

#: Wanted number of sampled voxels per slice (the lateral step is chosen for it).
TARGET_SAMPLE_PER_SLICE = 2**14

#: A slice needs at least this many foreground voxels in the sample to be measured.
MIN_FOREGROUND = 10

#: Slices needing a larger gain than this hold too little signal to measure.
MAX_SELECTION_GAIN = 50.0

#: Slices whose gain-corrected background noise exceeds this multiple of the
#: brightest slice's are too noisy after correction to be measured.
MAX_NOISE_GROWTH = 5.0

#: Foreground must exceed this many (corrected) background standard deviations.
#: Common practice is 3; 5 is used because photon-counting backgrounds at low
#: counts (a few photons of haze) have a much heavier bright tail than a Gaussian.
NOISE_SIGMAS = 5.0

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
    ``nan_fraction`` the share of sampled voxels that were NaN or infinite
    without a mask (0 with a mask); ``done`` the progress steps used.
    """

    sample: np.ndarray
    above: np.ndarray
    background: SliceBackground
    depth: np.ndarray
    step: int
    loop: ForegroundLoop
    nan_fraction: float
    done: int


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


def measure_foreground(above: np.ndarray, gain: np.ndarray, noise: np.ndarray,
                       reference: int = 0) -> Foreground:
    """Mean above-background intensity of the foreground voxels of every row.

    *above* is the sample minus each slice's background, *noise* each
    slice's background standard deviation. The foreground is chosen on the
    *corrected* sample ``above * gain`` with one threshold for the whole
    stack, so that a correct gain selects the same part of the structure at
    every depth. The threshold is :data:`NOISE_SIGMAS` times the largest
    corrected background noise of any slice: low enough to take in most of
    the structure (a threshold far out in the bright tail makes the
    select-and-fit loop drift), high enough that amplified noise of deep
    slices does not pass as dim foreground (which would pull their signal
    down and feed a runaway correction). Slices whose corrected noise is
    more than :data:`MAX_NOISE_GROWTH` times that of the *reference* slice
    (the brightest, see :func:`brightest_slice`), or that would need
    a gain above :data:`MAX_SELECTION_GAIN`, are not measured and do not set
    the threshold (otherwise one very deep slice would lift it above all
    structure); which slices these are depends on gains and noise only, not
    on the signal, so leaving them out does not bias the rest. Noise-free data
    (zero spread) use Otsu's threshold instead. The signal itself is
    measured on *above*.
    """
    scaled = noise * gain
    usable = gain <= MAX_SELECTION_GAIN
    if np.isfinite(scaled).any():
        with np.errstate(invalid="ignore"):
            usable &= ~(scaled > MAX_NOISE_GROWTH * scaled[reference])
    gain32 = gain.astype(np.float32)
    corrected_noise = np.where(usable, scaled, np.nan)
    threshold = float("nan")
    if np.isfinite(corrected_noise).any():
        threshold = NOISE_SIGMAS * float(np.nanmax(corrected_noise))
    if not threshold > 0:
        part = above[usable]
        threshold = otsu_threshold(part[:, :: max(1, part.size // 2**17)] * gain32[usable, None])
    count, total, square, n_finite = _foreground_sums(above, gain32, np.float32(threshold))
    safe = np.maximum(count, 1)
    mean = total / safe
    var = np.maximum(square / safe - mean**2, 0.0) * safe / np.maximum(safe - 1, 1)
    ok = (count >= MIN_FOREGROUND) & usable
    signal = np.where(ok, mean, np.nan)
    sem = np.where(ok, np.sqrt(var / safe), np.nan)
    fraction = count / np.maximum(n_finite, 1)
    return Foreground(signal=signal, sem=sem, fraction=fraction.astype(np.float64), threshold=threshold)


@numba.njit(cache=True, nogil=True)
def _foreground_sums(above, gain, threshold):  # pragma: no cover - compiled
    """Per row: foreground count, sum, sum of squares, finite count."""
    n_rows, n_cols = above.shape
    count = np.zeros(n_rows, np.int64)
    n_finite = np.zeros(n_rows, np.int64)
    total = np.zeros(n_rows)
    square = np.zeros(n_rows)
    for r in range(n_rows):
        g = gain[r]
        for c in range(n_cols):
            v = above[r, c]
            if np.isfinite(v):
                n_finite[r] += 1
                if v * g > threshold:
                    count[r] += 1
                    total[r] += v
                    square[r] += np.float64(v) * v
    return count, total, square, n_finite


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


def iterate_foreground(above: np.ndarray, noise: np.ndarray, depth: np.ndarray,
                       gain_model: GainModel, *, progress: Progress = None, done: int = 0,
                       total: int = 1) -> ForegroundLoop:
    """Select foreground on the corrected sample, re-fit *gain_model*, until the gains settle.

    The loop stops when the largest change of ``ln gain`` is below 1e-4, or
    below 1 % after 16 passes (a loop that hops between two nearly equal
    selections is damped after 8 passes); at most :data:`MAX_ITERATIONS`
    passes, one progress step each (``done + pass`` of *total*).
    """
    gain = np.ones_like(depth)
    curve = np.full(depth.shape, np.nan)
    reference = brightest_slice(above)
    fg = measure_foreground(above, gain, noise, reference)
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
        fg = measure_foreground(above, gain, noise, reference)
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
    done = _chunk_count(moved)
    loop = iterate_foreground(above, background.sigma, depth, exponential_gain, progress=progress,
                              done=done, total=total)
    _check_structure(loop.foreground, background.sigma, name)
    return DepthProfile(sample=sample, above=above, background=background, depth=depth, step=step,
                        loop=loop, nan_fraction=nan_fraction, done=done + MAX_ITERATIONS)
