"""The interval on the attenuation length: a bootstrap over lateral tiles and depth blocks (private).

Why a bootstrap: the main uncertainty of the length measured on one stack is
not the scatter of slices about the fitted line but *which* structures happen
to lie at which depth, and which voxels the foreground selection then takes.
A fit's own interval sees neither. Every resample here changes both:

* laterally, the sampled field is cut into 4 x 4 tiles
  (:func:`..primitives.foreground.tile_index`) and the tiles are drawn with
  replacement -- a block bootstrap (Künsch 1989) whose blocks are large
  because structures such as fibres can cross much of the field;
* in depth, blocks of consecutive slices (a sixth of the stack each) are
  drawn with replacement (the moving-block bootstrap), each slice counting
  in the fit as often as it was drawn, so that depth ranges dominated by a
  few bright structures are over- and under-represented as another stack
  of the same tissue would have them.

For every resample the whole select-and-fit loop runs again -- foreground
threshold, foreground, exponential fit, gains, until they settle -- starting
from the gains of the full data. The interval on the decay rate is the
percentile interval of the replicates (Efron & Tibshirani 1993), inverted
into lengths; a rate interval that reaches 0 gives a length interval open to
infinity. Neither resampling alone covered the truth often enough on
phantoms of known length (fibres crossing the field defeat the tiles, slowly
varying structure the depth blocks); together they did (docs/attenuation.md).

What it does not include: the background level of each slice is measured
once on the whole sample and kept, and a change of the structure's own
brightness with depth that the whole stack shares (a labelling gradient)
cannot be told from attenuation by any resampling of that stack. Where many
small independent structures fill the field the two resamplings partly
count the same randomness twice, and the interval is on the wide side.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..._shared.progress import Progress, report_progress
from ..primitives.bootstrap import block_counts, percentile_interval, resample_counts
from ..primitives.fitting import LineFit, decay_length_interval, fit_log_profile
from ..primitives.foreground import ForegroundLoop, ForegroundSample, exponential_gain, iterate_foreground
from .models import length_interval

__all__ = ["DEPTH_BLOCKS", "LengthInterval", "MIN_TILES", "PROGRESS_STEPS", "length_uncertainty"]

#: Fewer lateral tiles than this are too few to resample: the fit's own interval is used.
MIN_TILES = 9

#: The depth blocks are this fraction of the stack long (at least 2 slices).
DEPTH_BLOCKS = 6

#: The interval's method, as recorded in the result.
METHOD = "percentile bootstrap over lateral tiles and depth blocks"

#: Progress steps the resampling reports (plus one for the jackknife).
PROGRESS_STEPS = 50


@dataclass(frozen=True)
class LengthInterval:
    """The interval on the 1/e length and how it was made."""

    interval: tuple[float, float]
    method: str
    n_resamples: int
    n_tiles: int
    n_failed: int


def _rate(depth: np.ndarray, loop: ForegroundLoop) -> float:
    """Decay rate (per depth unit) of a loop's final measurement; NaN when it cannot be fitted."""
    fit = fit_log_profile(depth, loop.foreground.signal, loop.foreground.sem)
    return -fit.slope if math.isfinite(fit.slope) else math.nan


def _replicate(sample: ForegroundSample, depth: np.ndarray, tiles: np.ndarray, slices: np.ndarray,
               start: np.ndarray) -> float:
    """The decay rate of one resample: the select-and-fit loop re-run on it."""
    weighted = sample.weighting(tiles, slices)
    return _rate(depth, iterate_foreground(sample, depth, exponential_gain, weighted=weighted,
                                           start=start))


def _t_interval(fit: LineFit, n_tiles: int) -> LengthInterval:
    return LengthInterval(length_interval(fit), "t (slice scatter about the fit)", 0, n_tiles, 0)


def length_uncertainty(sample: ForegroundSample, depth: np.ndarray, loop: ForegroundLoop,
                       fit: LineFit, *, n_resamples: int, seed: int, level: float = 0.95,
                       progress: Progress = None, done: int = 0,
                       total: int = 1) -> LengthInterval:
    """Interval on the 1/e length from *n_resamples* resamples (see the module docstring).

    With ``n_resamples == 0``, fewer than :data:`MIN_TILES` tiles or fewer
    than 4 slices, the interval is the Student-t interval of the exponential
    fit *fit* (slice scatter only). Progress is reported
    :data:`PROGRESS_STEPS` times during the resampling (``done + step`` of
    *total*); a callback that raises :class:`~viewer_plugin.kernels.Cancelled`
    stops it.
    """
    n_slices = depth.size
    if n_resamples == 0 or sample.n_tiles < MIN_TILES or n_slices < 4:
        return _t_interval(fit, sample.n_tiles)
    rng = np.random.default_rng(seed)
    tiles = resample_counts(rng, sample.n_tiles, n_resamples)
    slices = block_counts(rng, n_slices, max(2, round(n_slices / DEPTH_BLOCKS)), n_resamples)
    replicates = np.empty(n_resamples)
    every = max(1, n_resamples // PROGRESS_STEPS)
    for b in range(n_resamples):
        replicates[b] = _replicate(sample, depth, tiles[b], slices[b], loop.gain)
        if (b + 1) % every == 0:
            report_progress(progress, done + min(PROGRESS_STEPS, (b + 1) // every), total)
    low, high = percentile_interval(replicates, level)
    if not (math.isfinite(low) and math.isfinite(high)):
        return _t_interval(fit, sample.n_tiles)
    failed = int(np.sum(~np.isfinite(replicates)))
    return LengthInterval(decay_length_interval((-high, -low)), METHOD, n_resamples,
                          sample.n_tiles, failed)
