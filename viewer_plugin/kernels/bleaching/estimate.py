"""Photobleaching check: how much the foreground signal faded along the acquisition order.

``estimate_bleaching`` fits a first-order decay (or, when the F-test finds it
significantly better, a plateau or a second component) to the per-frame
foreground signal and judges the 95 % interval of the loss against a
tolerance: within, inconclusive or exceeds.

One z-stack alone cannot tell bleaching from depth attenuation (see
:mod:`.two_pass`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import (
    check_choice,
    check_mask,
    check_number,
    check_stack,
    depth_first,
    fail,
)
from ..primitives.background import frames_background
from ..primitives.fitting import r_squared
from ..primitives.foreground import measure_depth_profile
from . import models
from ._common import frozen, frozen_bool, plain_fields
from .measure import background_ceiling, masked_profile, reference_masks
from .text import DEPTH_CAVEAT, bleaching_summary, judge_loss

__all__ = ["BleachingReport", "estimate_bleaching", "MIN_CONTRAST"]

_NAN_PAIR = (math.nan, math.nan)
#: Foreground contrast (in background standard deviations) below which a series
#: counts as all background.
MIN_CONTRAST = 1.5


@dataclass(frozen=True)
class BleachingReport:
    """Result of :func:`estimate_bleaching`.

    Attributes
    ----------
    rate_per_frame : float
        k: fraction of the signal lost per frame. For the single model the
        first-order rate; for richer models the average per-frame loss between
        the first and the last frame. Negative when the signal rose.
    rate_interval : tuple of float
        95 % confidence interval of k (delta method, Student t); NaN when the
        series is too short.
    half_life : float
        Time for the model to fall to half of its first value, in the units of
        *interval* (seconds for a time axis, µm for a depth axis); ``inf`` when
        the model never halves. Never negative.
    fraction_lost, fraction_lost_interval : float, tuple of float
        ``1 - model[-1] / model[0]`` over the series, and its 95 % interval
        (mapped from ``rate_interval``).
    verdict : str
        From ``fraction_lost_interval`` against *tolerance*: ``"within"`` (the
        whole interval at or below it), ``"exceeds"`` (the whole interval above
        it) or ``"inconclusive"`` (the interval spans it, or there is none).
    exceeds_tolerance : bool
        ``verdict == "exceeds"``.
    tolerance : float
        The fraction of loss accepted (user's choice; 0.10 is common practice).
    r_squared : float
        Of the chosen model on the profile (NaN for a constant profile).
    model : str
        ``"single"``, ``"single+plateau"``, ``"double"`` or ``"none"`` (constant input).
    model_choice : str
        Why this model was chosen (F-test result, and the F-test's assumption
        of independent frames).
    components : tuple of (share, rate) pairs
        Share of the first model value and per-frame rate of each decaying part.
    plateau : float
        Share of the first model value that does not fade (``single+plateau``).
    profile, model_profile : ndarray of float64
        Mean foreground signal per frame after subtracting the background,
        measured and modelled.
    used : ndarray of bool
        Frames that entered the fit (a depth check leaves out slices without
        a clear foreground).
    offset : float
        Background level restored by corrections, ``(I - offset) * g + offset``:
        the given *offset*, or the level of up to 16 sampled frames.
    background_sigma : float
        Standard deviation of the background voxels.
    foreground_fraction : float
        Fraction of a frame's voxels in the fixed foreground.
    n_frames : int
    interval : float
        Step between frames (s for time, µm for depth).
    axis_kind : str
        ``"time"`` or ``"depth"``.
    caveat : str
        For a depth axis: one stack cannot separate bleaching from attenuation.
    summary : str
        One plain-language sentence with the verdict and the interval it was
        decided from (and one more when a richer model was chosen).
    """

    rate_per_frame: float
    rate_interval: tuple[float, float]
    half_life: float
    fraction_lost: float
    fraction_lost_interval: tuple[float, float]
    verdict: str
    exceeds_tolerance: bool
    tolerance: float
    r_squared: float
    model: str
    model_choice: str
    components: tuple[tuple[float, float], ...]
    plateau: float
    profile: np.ndarray = field(repr=False)
    model_profile: np.ndarray = field(repr=False)
    used: np.ndarray = field(repr=False)
    offset: float
    background_sigma: float
    foreground_fraction: float
    n_frames: int
    interval: float
    axis_kind: str
    caveat: str
    summary: str

    @property
    def times(self) -> np.ndarray:
        """Position of each frame along the acquisition axis (frame index x interval)."""
        return np.arange(self.n_frames, dtype=np.float64) * self.interval

    @property
    def relative_profile(self) -> np.ndarray:
        """The measured profile divided by the model's first value (1.0 = no loss)."""
        first = float(self.model_profile[0]) if self.n_frames else math.nan
        return self.profile / first if first > 0 else np.full(self.n_frames, math.nan)

    def to_dict(self) -> dict[str, Any]:
        """All fields as plain Python values (lists for arrays), for JSON reports."""
        out = plain_fields(self)
        out["components"] = [list(c) for c in self.components]
        return out


def _components(fit: models.ModelFit) -> tuple[tuple[tuple[float, float], ...], float]:
    """(share, per-frame rate) of each decaying part, and the plateau share."""
    p = fit.params
    rate = lambda lam: float(-math.expm1(-lam))  # noqa: E731
    if fit.name == "single":
        return ((1.0, rate(p[1])),), 0.0
    total = float(p[0] + p[2])
    if total <= 0:
        return (), 0.0
    if fit.name == "single+plateau":
        return ((float(p[0]) / total, rate(p[1])),), float(p[2]) / total
    return ((float(p[0]) / total, rate(p[1])), (float(p[2]) / total, rate(p[1] + p[3]))), 0.0


def _lost_interval(rate_ci: tuple[float, float], n: int) -> tuple[float, float]:
    if not all(math.isfinite(v) for v in rate_ci):
        return _NAN_PAIR
    lost = [1.0 - (1.0 - min(v, 1.0)) ** (n - 1) for v in rate_ci]
    return (min(lost), max(lost))


def _constant_report(n: int, level: float, interval: float, tolerance: float,
                     axis_kind: str) -> BleachingReport:
    """The report of a constant series: nothing fades."""
    zeros = frozen(np.zeros(n))
    noun = "time points" if axis_kind == "time" else "slices"
    return BleachingReport(
        rate_per_frame=0.0, rate_interval=(0.0, 0.0), half_life=math.inf, fraction_lost=0.0,
        fraction_lost_interval=(0.0, 0.0), verdict="within", exceeds_tolerance=False,
        tolerance=tolerance,
        r_squared=math.nan, model="none", model_choice="constant input: no model fitted",
        components=(), plateau=0.0, profile=zeros, model_profile=zeros,
        used=frozen_bool(np.ones(n, dtype=bool)), offset=level,
        background_sigma=0.0, foreground_fraction=0.0, n_frames=n, interval=interval,
        axis_kind=axis_kind, caveat=DEPTH_CAVEAT if axis_kind == "depth" else "",
        summary=f"The series is constant over {n} {noun}: no change of signal, no bleaching; "
                f"this is within the {tolerance * 100:.3g} % tolerance.",
    )


def _fit_report(signal: np.ndarray, used: np.ndarray, *, interval: float, tolerance: float,
                axis_kind: str, offset: float, sigma: float, fraction: float) -> BleachingReport:
    n = signal.size
    t = np.arange(n, dtype=np.float64)
    n_used = int(np.count_nonzero(used))
    fits = models.fit_models(t[used], signal[used])
    if "single" not in fits:
        fail("series", "a foreground signal a decay can be fitted to", "<a profile that no fit converged on>")
    best, why = models.select_model(fits, n_used)
    if n_used < n:
        why += f"; {n - n_used} slices without a clear foreground left out of the fit"
    model = best.predict(t)
    rate = models.effective_rate(best, n)
    rate_ci = models.rate_interval(best, n, n_points=n_used)
    lost = 1.0 - model[-1] / model[0] if model[0] > 0 else math.nan
    lost_ci = _lost_interval(rate_ci, n)
    verdict = judge_loss(lost_ci, tolerance) if math.isfinite(lost) else "inconclusive"
    components, plateau = _components(best)
    half = models.half_life_frames(best) * interval
    r2 = r_squared(signal[used], best.rss)
    return BleachingReport(
        rate_per_frame=rate, rate_interval=rate_ci, half_life=max(0.0, half), fraction_lost=lost,
        fraction_lost_interval=lost_ci, verdict=verdict, exceeds_tolerance=verdict == "exceeds",
        tolerance=tolerance,
        r_squared=r2, model=best.name, model_choice=why,
        components=components, plateau=plateau, profile=frozen(signal),
        model_profile=frozen(model), used=frozen_bool(used), offset=offset,
        background_sigma=sigma,
        foreground_fraction=fraction, n_frames=n, interval=interval, axis_kind=axis_kind,
        caveat=DEPTH_CAVEAT if axis_kind == "depth" else "",
        summary=bleaching_summary(fraction_lost=lost, fraction_lost_interval=lost_ci,
                                  half_life=half, n_frames=n, tolerance=tolerance,
                                  axis_kind=axis_kind, verdict=verdict, r_squared=r2,
                                  model=best.name),
    )


def _depth_signal(moved: Any, *, z_step: float) -> tuple[np.ndarray, np.ndarray]:
    """Per-slice foreground signal of one depth-first z-stack, and the slices measured.

    The slices of one stack hold different structures, so a per-slice
    threshold would select a different fraction of each slice's signal as it
    dims. :func:`..primitives.foreground.measure_depth_profile` selects the
    foreground on the corrected stack and iterates, which keeps the selection
    the same relative to the signal in every slice; the attenuation estimate
    measures the same profile, so the two tools agree on one stack.
    """
    loop = measure_depth_profile(moved, z_step=z_step, name="series").loop
    signal = np.asarray(loop.foreground.signal, dtype=np.float64)
    used = np.isfinite(signal) & (signal > 0)
    return np.where(used, signal, np.nan), used


def estimate_bleaching(
    series: Any,
    *,
    axis: int = 0,
    interval: float = 1.0,
    tolerance: float = 0.10,
    mask: Any = None,
    offset: float | None = None,
    axis_kind: str | None = None,
    progress: Progress | None = None,
) -> BleachingReport:
    """Measure how much the foreground signal faded along the acquisition order.

    The signal of each frame is the mean over a foreground mask of its voxels,
    minus its background level. For a time axis the mask is fixed: the Otsu
    foreground of the first frame's neighbour means (each voxel chosen on the
    Gaussian mean of its neighbours, not on its own noisy value), so a
    structure appearing later is not counted; the background is the mean of a
    fixed set of dim voxels chosen the same way. The slices of a single 3-D stack show different
    structures, so for a depth axis (without *mask* or *offset*) the profile is
    the foreground profile that :func:`~viewer_plugin.kernels.estimate_attenuation`
    also measures (foreground chosen on the corrected stack, iterated), and slices it could
    not measure are left out of the fit; with a mask or offset, or for other
    shapes, each slice uses its own Otsu foreground and slices less than 1.5
    background standard deviations above the background are left out. First-order bleaching
    ``I_t = I_0 (1 - k)**t`` is fitted by least squares; a plateau or a second
    component replaces it only when the F-test finds it significantly better
    (p < 0.01; the F-test assumes independent frames). The verdict compares the
    95 % interval of the fraction lost with *tolerance*: ``"within"`` when the
    whole interval is at or below it, ``"exceeds"`` when the whole interval is
    above it, ``"inconclusive"`` otherwise.

    Parameters
    ----------
    series : array_like or dask array, at least 3-D
        A (T, Z, Y, X) time series, a (T, Y, X) movie or a single (Z, Y, X)
        stack; integer or float. Never modified.
    axis : int
        The acquisition axis: time points, or slices of a single stack.
    interval : float
        Step between frames: seconds for a time axis, µm for a depth axis.
        Sets the unit of ``half_life``.
    tolerance : float
        Accepted fraction of signal lost over the series, in (0, 1). The default
        0.10 is common practice, not a published value.
    mask : array_like of bool, optional
        Foreground to measure, broadcastable to one frame (the series without
        *axis*). Default: the Otsu foreground described above.
    offset : float, optional
        Background level to subtract from every frame (e.g. a known detector
        offset). Default: each frame's own background level, so that a haze
        fading with the signal does not bias the rate: for a time series the
        mean of one fixed set of dim voxels chosen on the first frame (the same
        voxels in every frame), for the slices of one stack the sigma-clipped
        mean of each slice's dim voxels (``background_level``); corrections
        then use the level of up to 16 frames sampled along the series.
    axis_kind : {"time", "depth"}, optional
        What *axis* is. Default: ``"time"`` for 4-D input, else ``"depth"``.
    progress : callable, optional
        ``progress(done, total)`` between chunks; may raise ``Cancelled``.

    Returns
    -------
    BleachingReport
        Frozen dataclass; ``profile`` and ``model_profile`` are float64 arrays.
        For a depth axis ``caveat`` says one stack cannot separate bleaching
        from depth attenuation (see :func:`separate_bleaching`).

    Raises
    ------
    ParameterError
        For a bad array or option, fewer than 2 frames, an empty mask, or a
        series without a foreground clearly above the background.
    Cancelled
        When *progress* raises it.

    Notes
    -----
    A constant series gives rate 0 and model ``"none"``. The rate is relative:
    it says how much of the signal faded, not how many molecules were lost.

    References
    ----------
    .. [1] N. Otsu, "A threshold selection method from gray-level histograms",
       IEEE Trans. SMC 9(1):62-66, 1979, doi:10.1109/TSMC.1979.4310076.
    .. [2] A. J. Berglund, J. Chem. Phys. 2004, doi:10.1063/1.1636726 (non-uniform
       illumination gives a sum of exponentials).

    Examples
    --------
    >>> frame = np.zeros((8, 32, 32)); frame[:, 8:24, 8:24] = 1000.0
    >>> series = 100 + frame * 0.95 ** np.arange(10)[:, None, None, None]
    >>> report = estimate_bleaching(series, interval=30.0)
    >>> round(report.rate_per_frame, 3), report.model, report.verdict, report.exceeds_tolerance
    (0.05, 'single', 'exceeds', True)
    >>> report.summary  # doctest: +NORMALIZE_WHITESPACE
    'Signal fell by 37 % over 10 time points (half-life 6.76 min); this exceeds the 10 %
    tolerance (95 % interval of the loss: 37.0–37.0 %).'
    """
    series, axis = check_stack(series, name="series", axis=axis)
    interval = check_number(interval, name="interval", low=0, low_open=True)
    tolerance = check_number(tolerance, name="tolerance", low=0, high=1, low_open=True, high_open=True)
    if axis_kind is None:
        axis_kind = "time" if series.ndim >= 4 else "depth"
    axis_kind = check_choice(axis_kind, name="axis_kind", choices=("time", "depth"))
    moved = depth_first(series, axis)
    n = int(moved.shape[0])
    if n < 2:
        fail("series", f"at least 2 frames along axis {axis}", f"<{n} frame>")
    mask = check_mask(mask, tuple(moved.shape[1:]))
    background = frames_background(moved)
    level = background.level if offset is None else check_number(offset, name="offset")
    total = n + 1
    if mask is not None and hasattr(mask, "compute"):
        mask = np.asarray(mask.compute())
    fixed_background, ceiling = None, math.inf
    if axis_kind == "time":
        mask, fixed_background = reference_masks(moved, mask)
        if not mask.any():
            mask = np.ones(moved.shape[1:], dtype=bool)
        if fixed_background is not None and offset is None:
            ceiling = background_ceiling(np.asarray(moved[0]), fixed_background)
        else:
            fixed_background = None
    report_progress(progress, 1, total)
    raw, levels, fractions, sigmas = masked_profile(
        moved, mask, background=fixed_background, ceiling=ceiling, progress=progress, done=1,
        total=total)
    signal = raw - (levels if offset is None else level)
    finite = np.isfinite(signal)
    if np.count_nonzero(finite) < 2:
        fail("series", "at least 2 frames with finite values", f"<{int(np.count_nonzero(finite))}>")
    if np.ptp(raw[finite]) == 0 and background.sigma == 0:
        return _constant_report(n, level, interval, tolerance, axis_kind)
    head = float(np.max(signal[finite]))
    if not head > MIN_CONTRAST * background.sigma:
        fail("series", f"a foreground at least {MIN_CONTRAST} background standard deviations "
             "above the background in some frame", f"<at most {head:.4g} above a background of "
             f"{level:.4g} (sd {background.sigma:.3g})>",
             hint="the series looks like background only; pass a mask or check the layer")
    used = finite
    if axis_kind == "depth" and mask is None and moved.ndim == 3 and offset is None:
        signal, used = _depth_signal(moved, z_step=interval)
    elif axis_kind == "depth" and mask is None:
        # slices without a clear foreground (above or below the tissue) hold only noise
        clear = finite & (signal > MIN_CONTRAST * np.where(np.isfinite(sigmas), sigmas, 0.0))
        used = clear if np.count_nonzero(clear) >= 2 else finite
    return _fit_report(signal, used, interval=interval, tolerance=tolerance, axis_kind=axis_kind,
                       offset=level, sigma=background.sigma, fraction=float(np.mean(fractions)))
