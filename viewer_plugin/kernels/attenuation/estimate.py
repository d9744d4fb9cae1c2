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
from ..primitives.chunks import depth_chunks, plane_nbytes
from . import models
from .correct import apply_correction
from .measure import (
    Foreground,
    auto_step,
    brightest_slice,
    lateral_sample,
    measure_background,
    measure_foreground,
    moved_mask,
)

__all__ = [
    "AttenuationFit",
    "AttenuationWarning",
    "CAUTION",
    "MODELS",
    "correct_attenuation",
    "estimate_attenuation",
]

#: The depth models of :func:`estimate_attenuation`.
MODELS = ("exponential", "smooth", "quantile")

#: Shown wherever corrected data or an estimated length is shown.
CAUTION = (
    "Corrected intensities are relative, not calibrated; the correction amplifies noise in "
    "deep slices. One stack cannot separate attenuation from bleaching: in one-photon imaging "
    "the length measured here combines both."
)

#: Iteration limit and tolerance (largest change of ln gain) of the foreground loop.
MAX_ITERATIONS = 40
TOLERANCE = 1e-4
DAMP_AFTER = 8
#: A loop still hopping between two foreground selections after 2 * DAMP_AFTER
#: passes is accepted when the gains move by less than this (1 %).
LOOSE_TOLERANCE = 1e-2


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
        95 % interval on *length_um* (the upper end may be ``inf``).
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
        """One line: the length, its interval and the fit quality."""
        low, high = self.length_interval_um
        if math.isinf(self.length_um):
            text = "no decrease with depth (attenuation length: inf)"
        else:
            text = f"attenuation length {self.length_um:.4g} um"
        text += f", 95 % interval {low:.4g} to {'inf' if math.isinf(high) else f'{high:.4g}'} um"
        return text + f"; exponential fit r^2 = {self.r_squared:.3f} ({self.model} model)"


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


def _model_gain(model: str, depth: np.ndarray, fg: Foreground, bandwidth: float) -> tuple:
    """Gain and model profile of one pass (the quantile model iterates on the exponential)."""
    if model == "smooth":
        log_model = models.smooth_log_profile(depth, fg.signal, fg.sem, bandwidth=bandwidth)
        gain = np.exp(log_model[0] - log_model)
        return np.where(np.isfinite(gain), gain, 1.0), np.exp(log_model)
    fit = models.fit_exponential(depth, fg.signal, fg.sem)
    if not math.isfinite(fit.rate):
        return np.ones_like(depth), np.full(depth.shape, np.nan)
    curve = np.exp(fit.intercept - fit.rate * depth)
    gain = np.exp(fit.rate * (depth - depth[0])) if fit.rate > 0 else np.ones_like(depth)
    return gain, curve


def _iterate(above: np.ndarray, noise: np.ndarray, depth: np.ndarray, model: str,
             bandwidth: float, progress: Callable | None, done: int, total: int) -> tuple:
    """Select foreground on the corrected sample, re-fit, until the gains settle."""
    gain = np.ones_like(depth)
    curve = np.full(depth.shape, np.nan)
    reference = brightest_slice(above)
    fg = measure_foreground(above, gain, noise, reference)
    converged = False
    iteration = 0
    for iteration in range(1, MAX_ITERATIONS + 1):
        if int(np.isfinite(fg.signal).sum()) < 3:
            break
        new_gain, curve = _model_gain(model, depth, fg, bandwidth)
        if iteration > DAMP_AFTER:  # damp a loop that hops between two selections
            new_gain = np.sqrt(new_gain * gain)
        change = float(np.max(np.abs(np.log(new_gain) - np.log(gain))))
        gain = new_gain
        report_progress(progress, done + iteration, total)
        if change < TOLERANCE or (iteration > 2 * DAMP_AFTER and change < LOOSE_TOLERANCE):
            converged = True
            break
        fg = measure_foreground(above, gain, noise, reference)
    return fg, gain, curve, iteration, converged


def _findings(fit: models.ExponentialFit, fg: Foreground, length: float,
              interval: tuple[float, float], converged: bool, model: str) -> list[str]:
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
    if math.isfinite(fit.r_squared) and fit.r_squared < 0.9:
        advice = ("the smooth model's gains follow the measured profile instead" if model == "smooth"
                  else "try the smooth model")
        notes.append(f"the exponential model explains only {fit.r_squared:.0%} of the depth variation: "
                     f"the stack may not decay exponentially ({advice})")
    if math.isfinite(length) and (math.isinf(interval[1]) or interval[1] > 2 * interval[0]):
        notes.append("the 95 % interval on the length is wide: the length is poorly determined")
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
    progress: Callable[[int, int], None] | None = None,
) -> AttenuationFit:
    """Measure the attenuation of the foreground signal with depth.

    Each slice's signal is the mean intensity of its foreground voxels above
    that slice's background, so it does not depend on how much structure a
    slice holds. The background is a sigma-clipped mean of the dim voxels
    (unbiased by shot noise, see :mod:`viewer_plugin.kernels.profiles`). The
    foreground is chosen with one Otsu threshold on the *corrected* stack;
    because that depends on the correction, selection and fit alternate
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
        Lateral sampling step; default gives about 65 000 voxels per slice.
    progress : callable, optional
        ``progress(done, total)``, may raise :class:`~viewer_plugin.kernels.Cancelled`.

    Returns
    -------
    AttenuationFit
        Frozen result; profiles and gains are float64 arrays of one value per slice.

    Raises
    ------
    ParameterError
        For a stack that is not 3-D or has fewer than 3 slices, z_step <= 0,
        an unknown model, a mask of the wrong shape, an all-NaN stack, or a
        stack without foreground brighter than its background.

    Warns
    -----
    AttenuationWarning
        When NaN voxels were ignored or the foreground selection did not settle.

    Notes
    -----
    The 95 % interval comes from the covariance of the weighted log-linear
    fit scaled by its residual variance (as ``scipy.optimize.curve_fit`` with
    ``absolute_sigma=False``), so slices that do not follow the model widen it.
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
    moved = depth_first(stack, axis)
    step = auto_step(moved.shape[1:]) if lateral_step is None else check_int(
        lateral_step, name="lateral_step", low=1)
    n_chunks = len(list(depth_chunks(moved.shape[0], plane_nbytes(moved.shape, moved.dtype))))
    total = n_chunks + (2 if model == "smooth" else 1) * MAX_ITERATIONS + 1
    sample, done = lateral_sample(moved, moved_mask(mask, stack.shape, axis), step, progress, total)
    _check_sample(stack, sample, mask)
    depth = np.arange(moved.shape[0], dtype=np.float64) * z_step
    background = measure_background(sample)
    above = sample - background.level[:, None].astype(np.float32)
    loop = _iterate(above, background.sigma, depth, "exponential", 0.0, progress, done, total)
    _check_structure(loop[0], background.sigma)
    fg, gain, curve, n_iter, converged = loop
    exp_fit = models.fit_exponential(depth, fg.signal, fg.sem)
    length = models.length_from_rate(exp_fit.rate)
    interval = models.length_interval(exp_fit)
    curve = np.exp(exp_fit.intercept - exp_fit.rate * depth)
    if model == "smooth":
        bandwidth = smoothing_um if smoothing_um is not None else max(depth[-1] / 10.0, z_step)
        fg, gain, curve, n_smooth, smooth_converged = _iterate(
            above, background.sigma, depth, "smooth", bandwidth, progress, done + MAX_ITERATIONS, total)
        n_iter += n_smooth
        converged = converged and smooth_converged
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
        model=model, length_um=length, length_interval_um=interval, r_squared=exp_fit.r_squared,
        offset=float(offset), profile=fg.signal, profile_sem=fg.sem, model_profile=curve,
        gain=np.asarray(gain, dtype=np.float64), depth_um=depth, background=background.level,
        foreground_fraction=fg.fraction, threshold=fg.threshold, z_step=z_step, axis=axis,
        lateral_step=step, n_iterations=n_iter, converged=converged, quantile_maps=maps,
        warnings=tuple(notes),
    )


def _check_sample(stack: Any, sample: np.ndarray, mask: Any) -> None:
    """Reject an all-NaN (or fully masked) stack; warn about ignored NaN voxels."""
    finite = np.isfinite(sample)
    if not finite.any():
        if mask is not None:
            fail("mask", "a mask that keeps some finite voxels", "<a mask that excludes all of them>")
        fail("stack", "finite values", "<only NaN or infinite voxels>")
    if mask is None and not finite.all():
        fraction = 1.0 - finite.mean()
        warnings.warn(f"estimate_attenuation: {fraction:.2%} of the sampled voxels are NaN or "
                      "infinite and were ignored", AttenuationWarning, stacklevel=3)


def _check_structure(fg: Foreground, sigma: np.ndarray) -> None:
    """Reject a stack whose 'foreground' is no brighter than background noise."""
    measured = np.isfinite(fg.signal)
    if measured.sum() < 3:
        fail("stack", "structure brighter than the background in at least 3 slices",
             f"<{int(measured.sum())} slice(s) with measurable foreground>",
             hint="is the stack empty or constant, or the mask too small?")
    with np.errstate(divide="ignore", invalid="ignore"):
        contrast = np.where(measured, fg.signal / np.where(sigma > 0, sigma, np.nan), np.nan)
        contrast = np.where(measured & (sigma == 0) & (fg.signal > 0), np.inf, contrast)
    best = float(np.nanmax(contrast)) if (~np.isnan(contrast)).any() else 0.0
    if best < 3.0:
        fail("stack", "structure at least 3 background standard deviations above the background",
             f"<at most {best:.2g} standard deviations: background only>")


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
