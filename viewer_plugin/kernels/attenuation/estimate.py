"""Depth attenuation: measure how the signal fades with depth, and correct it.

Scattering and absorption attenuate both the excitation light and the
emitted fluorescence on their way through tissue, so deep slices look dimmer
(Beer-Lambert: ``I(z) = I0 * exp(-z / l)``, *l* the 1/e attenuation length).
:func:`estimate_attenuation` measures the foreground signal of every slice
and fits a depth model; :func:`correct_attenuation` applies the per-slice
gain to a new float32 stack.

Corrected intensities are relative, not calibrated, and deep slices carry
amplified noise. A single stack also cannot tell attenuation from
bleaching: in one-photon imaging the measured length combines both.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import partial
from typing import Any, Callable

import numpy as np

from ..._shared.progress import report_progress
from ..._shared.validation import (
    check_choice,
    check_int,
    check_mask,
    check_number,
    check_stack,
    depth_first,
    fail,
)
from ..primitives.fitting import POOR_FIT, LineFit, decay_length, fit_log_profile
from ..primitives.foreground import (
    MAX_ITERATIONS,
    Foreground,
    iterate_foreground,
    measure_depth_profile,
    moved_mask,
    profile_steps,
)
from . import models
from .correct import apply_correction
from .uncertainty import PROGRESS_STEPS, LengthInterval, length_uncertainty

__all__ = [
    "AttenuationFit",
    "AttenuationWarning",
    "CAUTION",
    "DEFAULT_RESAMPLES",
    "MODELS",
    "correct_attenuation",
    "estimate_attenuation",
]

#: The depth models of :func:`estimate_attenuation`.
MODELS = ("exponential", "smooth", "quantile")

#: Tile resamples of the default interval on the length (BCa needs 1000 or more).
DEFAULT_RESAMPLES = 1000

#: Shown wherever corrected data or an estimated length is shown.
CAUTION = (
    "Corrected intensities are relative, not calibrated; the correction amplifies noise in "
    "deep slices. One stack cannot separate attenuation from bleaching: in one-photon imaging "
    "the length measured here combines both."
)

class AttenuationWarning(UserWarning):
    """A result of the attenuation kernels that deserves a second look."""


@dataclass(frozen=True, eq=False)
class AttenuationFit:
    """Result of :func:`estimate_attenuation` (arrays are read-only, one value per slice).

    Attributes
    ----------
    model : str
        "exponential", "smooth" or "quantile".
    length_um : float
        1/e attenuation length in um from the exponential fit (all models);
        ``inf`` when the signal does not decrease with depth.
    length_interval_um : tuple of float
        95 % interval on *length_um*. The upper end is ``inf`` when the data
        cannot exclude "no attenuation" (the interval on the decay rate
        reaches 0): say "at least <low> um", not a length.
    interval_method : str
        How the interval was made: "BCa bootstrap over lateral tiles" (the
        default; "percentile ..." when BCa cannot be formed) or
        "t (slice scatter about the fit)" (``n_resamples=0`` or too few tiles).
    n_resamples, n_tiles, seed : int
        Tile resamples drawn (0 for the t interval), lateral tiles, and the
        seed of the resampling (same seed, same interval).
    field_fraction : float
        Share of the sampled lateral field holding foreground in at least one
        measured slice: how much of the field carried the fit.
    r_squared : float
        Weighted coefficient of determination of the exponential fit of
        ``ln profile``: how much of the depth variation Beer-Lambert explains.
    offset : float
        Detector offset subtracted before scaling (``I' = (I - offset) * gain + offset``).
    profile, profile_sem : ndarray of float64
        Mean foreground signal above the slice background, and its standard
        error; NaN where a slice had too little foreground to measure.
    model_profile : ndarray of float64
        The fitted model at every slice (the exponential fit for "quantile").
    gain : ndarray of float64
        Multiplicative gain bringing each slice to the first slice's level
        (for "quantile": the ratio of mean levels, for display; the
        correction uses *quantile_maps*).
    depth_um : ndarray of float64
        Depth of each slice from the first, ``index * z_step``.
    background : ndarray of float64
        Sigma-clipped background level of each slice.
    foreground_fraction : ndarray of float64
        Fraction of sampled voxels counted as foreground in each slice.
    threshold : float
        Otsu threshold on the corrected above-background sample.
    z_step, axis, lateral_step : float, int, int
        Slice spacing (um), depth axis and lateral sampling step used.
    n_iterations : int
        Passes of the select-foreground / fit loop; *converged* tells whether it settled.
    quantile_maps : tuple of ndarray or None
        "quantile" only: per-slice quantiles ``(n_slices, n_levels)`` and the
        reference (first) slice's quantiles ``(n_levels,)``.
    warnings : tuple of str
        Things a user should know before trusting the numbers.
    """

    model: str
    length_um: float
    length_interval_um: tuple[float, float]
    interval_method: str
    n_resamples: int
    n_tiles: int
    seed: int
    field_fraction: float
    r_squared: float
    offset: float
    profile: np.ndarray
    profile_sem: np.ndarray
    model_profile: np.ndarray
    gain: np.ndarray
    depth_um: np.ndarray
    background: np.ndarray
    foreground_fraction: np.ndarray
    threshold: float
    z_step: float
    axis: int
    lateral_step: int
    n_iterations: int
    converged: bool
    quantile_maps: tuple[np.ndarray, np.ndarray] | None = None
    warnings: tuple[str, ...] = field(default_factory=tuple)

    def __post_init__(self) -> None:
        for name in ("profile", "profile_sem", "model_profile", "gain", "depth_um",
                     "background", "foreground_fraction"):
            getattr(self, name).flags.writeable = False
        if self.quantile_maps is not None:
            for array in self.quantile_maps:
                array.flags.writeable = False

    def describe(self) -> str:
        """The length, its interval in words, how the interval was made, fit quality and field used.

        Examples
        --------
        >>> rng = np.random.default_rng(0)
        >>> stack = np.full((20, 64, 64), 100.0)
        >>> stack[:, ::8, :] += 1000 * np.exp(-np.arange(20)[:, None, None] * 2.0 / 50.0)
        >>> fit = estimate_attenuation(rng.poisson(stack), z_step=2.0, n_resamples=0)
        >>> fit.describe().split(";")[0]
        'attenuation length 49.9 um, 95 % interval 49.75 to 50.05 um'
        """
        if math.isinf(self.length_um):
            text = "no decrease with depth (attenuation length: inf)"
        else:
            text = f"attenuation length {self.length_um:.4g} um"
        text += f", {interval_words(self)}; {self.interval_method}"
        if self.n_resamples:
            text += f", {self.n_resamples} resamples of {self.n_tiles} tiles, seed {self.seed}"
        return (text + f"; exponential fit r^2 = {self.r_squared:.3f} ({self.model} model); "
                f"foreground in {self.field_fraction:.0%} of the lateral field")


def interval_words(fit: AttenuationFit, *, unit: str = "um", digits: int = 4) -> str:
    """'95 % interval 30 to 60 um', with an open end said in words.

    An infinite upper end reads "95 % interval from <low> um to infinity:
    the data cannot exclude no attenuation"; an interval with no finite end
    says that the signal does not decrease with depth.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> interval_words(SimpleNamespace(length_interval_um=(30.0, math.inf)), unit="µm", digits=3)
    '95 % interval from 30 µm to infinity: the data cannot exclude no attenuation'
    """
    low, high = fit.length_interval_um
    if math.isinf(low):
        return "95 % interval open: the signal does not decrease with depth"
    if math.isinf(high):
        return (f"95 % interval from {low:.{digits}g} {unit} to infinity: "
                "the data cannot exclude no attenuation")
    return f"95 % interval {low:.{digits}g} to {high:.{digits}g} {unit}"


def _check_inputs(stack: Any, z_step: Any, model: Any, axis: Any, mask: Any) -> tuple:
    stack, axis = check_stack(stack, axis=axis)
    if stack.ndim != 3:
        fail("stack", "a 3-D stack (split channels or time points first)",
             f"<an array of shape {tuple(stack.shape)}>")
    z_step = check_number(z_step, name="z_step", low=0, low_open=True)
    model = check_choice(model, name="model", choices=MODELS)
    mask = check_mask(mask, stack.shape)
    if stack.shape[axis] < 3:
        fail("stack", f"at least 3 slices along axis {axis}", f"<{stack.shape[axis]} slices>")
    return stack, z_step, model, axis, mask


def _findings(fit: LineFit, fg: Foreground, length: float,
              uncertainty: LengthInterval, converged: bool, model: str) -> list[str]:
    notes = []
    if not converged:
        notes.append("the foreground selection did not settle; the estimate may be unstable")
    missing = int((~np.isfinite(fg.signal)).sum())
    if missing:
        notes.append(f"{missing} slice(s) had too little foreground, or too much amplified noise, "
                     "to measure and were left out of the fit")
    if math.isinf(length):
        notes.append("the signal does not decrease with depth: the exponential model applies "
                     "no correction")
    if math.isfinite(fit.r_squared) and fit.r_squared < POOR_FIT:
        advice = ("the smooth model's gains follow the measured profile instead" if model == "smooth"
                  else "try the smooth model")
        notes.append(f"the exponential model explains only {fit.r_squared:.0%} of the depth variation: "
                     f"the stack may not decay exponentially ({advice})")
    interval = uncertainty.interval
    if math.isfinite(length) and math.isinf(interval[1]):
        notes.append("the 95 % interval on the length is open-ended: the data cannot exclude "
                     "no attenuation")
    elif math.isfinite(length) and interval[1] > 2 * interval[0]:
        notes.append("the 95 % interval on the length is wide: the length is poorly determined")
    if uncertainty.n_failed:
        notes.append(f"{uncertainty.n_failed} of {uncertainty.n_resamples} tile resamples could not "
                     "be fitted and were left out of the interval")
    if not uncertainty.n_resamples:
        notes.append("the interval covers only the scatter of slices about the fit, not which "
                     "structures lie at which depth: it is usually too narrow")
    return notes


def _saturation_note(dtype: np.dtype, sample: np.ndarray, fg: Foreground) -> list[str]:
    """A note when more than 1 % of a slice's foreground sits at the integer type's maximum."""
    dtype = np.dtype(dtype)
    if dtype.kind not in "ui":
        return []
    top = float(np.iinfo(dtype).max)
    saturated = (sample >= top).sum(axis=1)
    foreground = fg.fraction * np.isfinite(sample).sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(foreground > 0, saturated / foreground, 0.0)
    bad = int((share > 0.01).sum())
    if not bad:
        return []
    return [f"{bad} slice(s) have more than 1 % of their foreground at the maximum value "
            f"{int(top)} (saturated): their signal, and so the attenuation, is underestimated"]


def estimate_attenuation(
    stack: Any,
    *,
    z_step: float,
    model: str = "exponential",
    axis: int = 0,
    mask: Any = None,
    offset: float | None = None,
    smoothing_um: float | None = None,
    lateral_step: int | None = None,
    n_resamples: int = DEFAULT_RESAMPLES,
    seed: int = 0,
    progress: Callable[[int, int], None] | None = None,
) -> AttenuationFit:
    """Measure the attenuation of the foreground signal with depth.

    Each slice's signal is the mean intensity of its foreground voxels above
    that slice's background, so it does not depend on how much structure a
    slice holds. The background is a sigma-clipped mean of the dim voxels
    (unbiased by shot noise, see :mod:`viewer_plugin.kernels.primitives.background`). The
    foreground is chosen with one threshold on the *corrected* stack, pinned
    to the brightest slice (15 of its corrected background standard
    deviations; slices whose corrected noise exceeds 3 times that slice's
    are not measured); because the selection depends on the correction,
    selection and fit alternate
    until the gains change by less than 0.01 % (or by less than 1 % after
    16 passes, when the loop hops between two nearly equal selections). The
    measurement uses a lateral sample (every *lateral_step*-th row and column).

    Parameters
    ----------
    stack : ndarray or dask array, 3-D
        Integer or float z-stack; not modified. NaN voxels are ignored (with a warning).
    z_step : float
        Slice spacing along *axis* in um (> 0).
    model : {"exponential", "smooth", "quantile"}
        "exponential": Beer-Lambert fit, weighted least squares of ``ln profile``.
        "smooth": local linear smoothing of ``ln profile`` (Gaussian kernel),
        for stacks that do not decay exponentially. "quantile": map each
        slice's quantiles onto the first slice's (assumes every slice holds
        similar content). *length_um*, its interval and *r_squared* always
        come from the exponential model's own select-and-fit loop, so they do
        not depend on the model chosen.
    axis : int
        The depth axis (e.g. 2 for a light sheet entering from the side).
    mask : array_like of bool, optional
        Broadcastable to the stack; only voxels where it is true are measured.
    offset : float, optional
        Known detector offset; by default estimated from the slice backgrounds.
    smoothing_um : float, optional
        Kernel standard deviation of the smooth model; default a tenth of the depth range.
    lateral_step : int, optional
        Lateral sampling step; default gives about 16 000 voxels per slice.
    n_resamples : int
        Tile resamples for the interval on the length (see Notes); 0 gives
        the fit's own Student-t interval instead, which covers the scatter
        of slices about the line only and is far too narrow for most stacks.
    seed : int
        Seed of the resampling: the same seed gives the same interval.
    progress : callable, optional
        ``progress(done, total)``, also during the resampling; may raise
        :class:`~viewer_plugin.kernels.Cancelled` to stop.

    Returns
    -------
    AttenuationFit
        Frozen result; profiles and gains are float64 arrays of one value per slice.

    Raises
    ------
    ParameterError
        For a stack that is not 3-D or has fewer than 3 slices, z_step <= 0,
        an unknown model, a mask of the wrong shape, n_resamples or seed
        below 0, an all-NaN stack, or a stack without foreground brighter
        than its background.

    Warns
    -----
    AttenuationWarning
        When NaN voxels were ignored or the foreground selection did not settle.

    Notes
    -----
    The 95 % interval on the length accounts for the randomness of the
    structure: the sampled lateral field is cut into up to 8 x 8 tiles, the
    tiles are resampled with replacement *n_resamples* times (a block
    bootstrap [5]_), and every resample runs the whole select-and-fit loop
    again. The interval is the bias-corrected and accelerated (BCa)
    interval of the resampled decay rates [6]_ (the percentile interval
    when BCa cannot be formed), inverted into lengths; it is open to
    infinity when the data cannot exclude "no attenuation". It does not
    include the uncertainty of the slice backgrounds (measured once), and no
    resampling of one field can include a change of the structure's own
    brightness with depth that the whole field shares.
    Corrected intensities are relative, not calibrated, and deep slices
    carry amplified noise; in one-photon imaging the length also includes
    bleaching during acquisition.

    References
    ----------
    .. [1] Beer-Lambert law of attenuation, ``I(z) = I0 exp(-z / l)``.
    .. [2] Wu, Merchant & Castleman (eds.), Microscope Image Processing,
           Academic Press, 2008 (per-slice exponential fit of ln intensity).
    .. [3] Kervrann, Legland & Pardini, "Robust incremental compensation of the
           light attenuation with depth in 3D fluorescence microscopy",
           J Microsc 214(3):297-314, 2004.
    .. [4] N. Otsu, IEEE Trans SMC 9(1):62-66, 1979 (used only for noise-free data).
    .. [5] H. R. Künsch, Ann Stat 17:1217-1241, 1989 (resampling blocks of dependent data).
    .. [6] B. Efron, J Am Stat Assoc 82:171-185, 1987; Efron & Tibshirani,
           An Introduction to the Bootstrap, 1993.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> z = np.arange(20)[:, None, None] * 2.0            # 2 um slices
    >>> stack = np.full((20, 64, 64), 100.0)
    >>> stack[:, ::8, :] += 1000 * np.exp(-z / 50.0)      # bright lines
    >>> stack = rng.poisson(stack).astype(np.uint16)
    >>> fit = estimate_attenuation(stack, z_step=2.0)
    >>> round(fit.length_um / 5) * 5
    50
    >>> fit.gain.dtype, fit.gain.shape
    (dtype('float64'), (20,))
    """
    stack, z_step, model, axis, mask = _check_inputs(stack, z_step, model, axis, mask)
    if offset is not None:
        offset = check_number(offset, name="offset")
    if smoothing_um is not None:
        smoothing_um = check_number(smoothing_um, name="smoothing_um", low=0, low_open=True)
    n_resamples = check_int(n_resamples, name="n_resamples", low=0)
    seed = check_int(seed, name="seed", low=0)
    moved = depth_first(stack, axis)
    step = None if lateral_step is None else check_int(lateral_step, name="lateral_step", low=1)
    total = (profile_steps(moved) + (MAX_ITERATIONS if model == "smooth" else 0)
             + (PROGRESS_STEPS if n_resamples else 0) + 1)
    measured = measure_depth_profile(moved, z_step=z_step, mask=moved_mask(mask, stack.shape, axis),
                                     step=step, progress=progress, total=total, rule="pinned")
    if measured.nan_fraction > 0:
        warnings.warn(f"estimate_attenuation: {measured.nan_fraction:.2%} of the sampled voxels are "
                      "NaN or infinite and were ignored", AttenuationWarning, stacklevel=2)
    depth, loop = measured.depth, measured.loop
    fg, gain, n_iter, converged = loop.foreground, loop.gain, loop.n_iterations, loop.converged
    exp_fit = fit_log_profile(depth, fg.signal, fg.sem)
    length = decay_length(exp_fit.slope)
    field = measured.selection.field_fraction(fg, gain)
    curve = np.exp(exp_fit.intercept + exp_fit.slope * depth)
    done = measured.done
    if model == "smooth":
        bandwidth = smoothing_um if smoothing_um is not None else max(depth[-1] / 10.0, z_step)
        # a smooth gain curve moves the brightest slice's own gain from pass to pass, so a
        # threshold pinned to that slice can hop: the smooth loop follows the noisiest slice
        smooth = iterate_foreground(measured.selection.with_rule("noisiest"), depth,
                                    partial(models.smooth_gain, bandwidth=bandwidth),
                                    progress=progress, done=done, total=total)
        fg, gain, curve = smooth.foreground, smooth.gain, smooth.curve
        n_iter += smooth.n_iterations
        converged = converged and smooth.converged
        done += MAX_ITERATIONS
    interval = length_uncertainty(measured.selection, depth, loop, exp_fit, n_resamples=n_resamples,
                                  seed=seed, progress=progress, done=done, total=total)
    sample, background = measured.sample, measured.background
    if offset is None:
        offset = models.estimate_offset(background.level, curve, float(np.nanmin(sample)))
    maps = None
    if model == "quantile":
        maps = models.quantile_maps(sample, 0)
        gain = models.equivalent_gain(maps[0], maps[1], offset)
    notes = _findings(exp_fit, fg, length, interval, converged, model)
    notes += _saturation_note(stack.dtype, sample, fg)
    if not converged:
        warnings.warn(f"estimate_attenuation: {notes[0]}", AttenuationWarning, stacklevel=2)
    report_progress(progress, total, total)
    return AttenuationFit(
        model=model, length_um=length, length_interval_um=interval.interval,
        interval_method=interval.method, n_resamples=interval.n_resamples,
        n_tiles=interval.n_tiles, seed=seed, field_fraction=field, r_squared=exp_fit.r_squared,
        offset=float(offset), profile=fg.signal, profile_sem=fg.sem, model_profile=curve,
        gain=np.asarray(gain, dtype=np.float64), depth_um=depth, background=background.level,
        foreground_fraction=fg.fraction, threshold=fg.threshold, z_step=z_step, axis=axis,
        lateral_step=measured.step, n_iterations=n_iter, converged=converged, quantile_maps=maps,
        warnings=tuple(notes),
    )


def correct_attenuation(
    stack: Any,
    fit: AttenuationFit,
    *,
    max_gain: float = 10.0,
    axis: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> Any:
    """Apply an attenuation fit: ``(I - offset) * gain + offset`` per slice, as float32.

    Parameters
    ----------
    stack : ndarray or dask array
        The stack the fit was measured on (or another of the same depth);
        not modified.
    fit : AttenuationFit
        From :func:`estimate_attenuation`. For the "quantile" model each
        slice is mapped through its quantile map onto the first slice.
    max_gain : float
        Gains above this are capped (with a warning saying how many slices);
        deep slices with large gains mostly amplify noise. ``inf`` disables it.
    axis : int, optional
        Depth axis; default the one of *fit*.
    progress : callable, optional
        ``progress(done, total)`` between z-chunks (numpy input only).

    Returns
    -------
    ndarray or dask array of float32
        Same shape as *stack*; lazy (one task per z-chunk) for dask input.
        The values are relative, not calibrated.

    Raises
    ------
    ParameterError
        For a bad stack, a fit that is not an AttenuationFit, a depth that
        does not match the fit, or max_gain < 1.

    Warns
    -----
    AttenuationWarning
        When some slices needed a gain above *max_gain*.

    References
    ----------
    .. [1] Wu, Merchant & Castleman (eds.), Microscope Image Processing,
           Academic Press, 2008.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> stack = np.full((10, 32, 32), 10.0)
    >>> stack[:, ::4, :] += 500 * np.exp(-np.arange(10) / 8.0)[:, None, None]
    >>> fit = estimate_attenuation(rng.poisson(stack), z_step=1.0)
    >>> flat = correct_attenuation(stack, fit)
    >>> flat.dtype
    dtype('float32')
    >>> bool(np.ptp(flat[:, 0, 0]) < 0.05 * flat[0, 0, 0])
    True
    """
    if not isinstance(fit, AttenuationFit):
        fail("fit", "an AttenuationFit from estimate_attenuation", fit)
    stack, axis = check_stack(stack, axis=fit.axis if axis is None else axis)
    max_gain = check_number(max_gain, name="max_gain", low=1.0, allow_inf=True)
    n_depth = stack.shape[axis]
    if n_depth != fit.gain.size:
        fail("stack", f"{fit.gain.size} slices along axis {axis} (as the fit)", f"<{n_depth} slices>")
    gains = np.where(np.isfinite(fit.gain), fit.gain, 1.0)
    capped = gains > max_gain
    if capped.any():
        warnings.warn(f"correct_attenuation: {int(capped.sum())} of {n_depth} slices needed a gain "
                      f"above max_gain={max_gain:g} and were capped at it", AttenuationWarning,
                      stacklevel=2)
    gains = np.minimum(gains, max_gain)
    maps = fit.quantile_maps if fit.model == "quantile" else None
    use_map = None if maps is None else ~capped & np.isfinite(fit.gain)
    return apply_correction(stack, axis, gains, fit.offset, maps, use_map, progress)
