"""Per-slice foreground measurement for the attenuation estimate (private).

The stack is read once as a lateral sample (every ``step``-th row and
column of each slice), which keeps the statistics of sparse structures and
the background while reading a fraction of the data. All later iterations
work on that sample only.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from ..._shared.progress import report_progress
from ..._shared.validation import depth_first, is_dask
from ..primitives.background import clipped_rows
from ..primitives.chunks import depth_chunks, plane_nbytes

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


def auto_step(plane_shape: tuple[int, ...]) -> int:
    """Lateral sampling step giving about :data:`TARGET_SAMPLE_PER_SLICE` voxels a slice."""
    voxels = int(np.prod(plane_shape, dtype=np.int64))
    return max(1, int(math.sqrt(voxels / TARGET_SAMPLE_PER_SLICE)))


def lateral_sample(
    moved: Any,
    mask: Any,
    step: int,
    progress: Callable[[int, int], None] | None,
    total: int,
) -> tuple[np.ndarray, int]:
    """Read a strided lateral sample of a depth-first 3-D stack as float32 rows.

    Returns the ``(n_slices, n_values)`` sample (NaN where the mask excludes a
    voxel or the voxel is not finite) and the number of progress steps used.
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
    if sample.dtype.kind == "f":
        sample[~np.isfinite(sample)] = np.nan
    return sample, len(chunks)


def moved_mask(mask: np.ndarray | None, shape: tuple[int, ...], axis: int) -> Any:
    """The mask broadcast to the stack's shape, with *axis* moved to the front (a view)."""
    if mask is None:
        return None
    if is_dask(mask):
        import dask.array as da

        return depth_first(da.broadcast_to(mask, shape), axis)
    return depth_first(np.broadcast_to(mask, shape), axis)


@dataclass(frozen=True)
class SliceBackground:
    """Per-slice background level and spread of the sample (float64 arrays)."""

    level: np.ndarray
    sigma: np.ndarray


def measure_background(sample: np.ndarray, *, n_sigma: float = 3.0) -> SliceBackground:
    """Sigma-clipped background of every row (about 4096 values a row are plenty)."""
    sub = sample[:, :: max(1, sample.shape[1] // 4096)]
    level, sigma, _ = clipped_rows(sub, n_sigma=n_sigma)
    return SliceBackground(level=level, sigma=sigma)


def otsu_threshold(values: np.ndarray) -> float:
    """Otsu's threshold of finite *values*, histogram limited to the 0.1-99.9 % range.

    Otsu (1979) via :func:`skimage.filters.threshold_otsu` on a histogram;
    the percentile range keeps a few hot pixels from squeezing all
    structure into one bin.
    """
    from skimage.filters import threshold_otsu

    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return float("nan")
    low, high = np.percentile(finite, [0.1, 99.9])
    if not high > low:
        return float(high)
    counts, edges = np.histogram(finite, bins=256, range=(low, high))
    centers = 0.5 * (edges[:-1] + edges[1:])
    return float(threshold_otsu(hist=(counts, centers)))


@dataclass(frozen=True)
class Foreground:
    """One foreground measurement: signal above background per slice."""

    signal: np.ndarray
    sem: np.ndarray
    fraction: np.ndarray
    threshold: float


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
        threshold = otsu_threshold(_thin(above[usable]) * gain32[usable, None])
    count, total, square, n_finite = _foreground_sums(above, gain32, np.float32(threshold))
    safe = np.maximum(count, 1)
    mean = total / safe
    var = np.maximum(square / safe - mean**2, 0.0) * safe / np.maximum(safe - 1, 1)
    ok = (count >= MIN_FOREGROUND) & usable
    signal = np.where(ok, mean, np.nan)
    sem = np.where(ok, np.sqrt(var / safe), np.nan)
    fraction = count / np.maximum(n_finite, 1)
    return Foreground(signal=signal, sem=sem, fraction=fraction.astype(np.float64), threshold=threshold)


def _thin(above: np.ndarray) -> np.ndarray:
    """At most about 2**17 values of *above* (every k-th column) for the threshold."""
    k = max(1, above.size // 2**17)
    return above[:, ::k]


def _foreground_sums_numpy(above: np.ndarray, gain: np.ndarray, threshold: np.float32) -> tuple:
    with np.errstate(invalid="ignore"):
        chosen = above * gain[:, None] > threshold
    values = np.where(chosen, above, 0.0)
    return (chosen.sum(axis=1), values.sum(axis=1, dtype=np.float64),
            np.square(values, dtype=np.float64).sum(axis=1), np.isfinite(above).sum(axis=1))


def _make_foreground_numba() -> Any:
    try:
        import numba
    except Exception:  # noqa: BLE001 - fall back to numpy
        return None

    @numba.njit(cache=True, nogil=True)
    def sums(above, gain, threshold):  # pragma: no cover - compiled
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

    return sums


_foreground_numba = _make_foreground_numba()


def _foreground_sums(above: np.ndarray, gain: np.ndarray, threshold: np.float32) -> tuple:
    """Per row: foreground count, sum, sum of squares, finite count."""
    if _foreground_numba is not None and above.dtype == np.float32:
        return _foreground_numba(above, gain, threshold)
    return _foreground_sums_numpy(above, gain, threshold)
