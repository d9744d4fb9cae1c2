"""Two passes over one stack (the second deepest-first): bleaching per exposure and attenuation.

With one-photon excitation every slice exposure bleaches the whole depth, so
the ratio of the two passes cancels structure and depth attenuation and
leaves the bleaching, a trend across the slices; a uniform difference
between the passes (bleaching confined to the imaged plane, as with
two-photon excitation, or a change between the passes) is a separate
intercept. The geometric mean of the two passes has had the same number of
exposures in every slice and gives the attenuation length without the rate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..._shared.progress import Progress
from ..._shared.validation import check_number, check_stack, depth_first, fail
from ..primitives.background import frames_background
from ..primitives.fitting import decay_length, decay_length_interval, fit_line
from ._common import frozen, plain_fields
from .measure import PairProfiles, pair_profiles
from .text import TWO_PASS_CAVEAT, judge_loss, two_pass_summary

__all__ = ["TwoPassResult", "separate_bleaching"]


@dataclass(frozen=True)
class TwoPassResult:
    """Result of :func:`separate_bleaching`.

    Attributes
    ----------
    rate_per_exposure, rate_interval : float, tuple of float
        k per slice exposure (from the slope of the log ratio) and its 95 %
        confidence interval.
    pass_ratio, pass_ratio_interval : float, tuple of float
        ``exp(intercept)`` of the log-ratio fit: the uniform factor between the
        reverse and the forward pass, and its 95 % interval. 1 for one-photon
        bleaching alone; below 1 when each slice lost signal while it was
        imaged (two-photon) or the sample or settings changed between passes.
    length_um, length_interval : float, tuple of float
        Attenuation length ℓ in µm (I ∝ exp(-z/ℓ)) and its 95 % interval, from
        ``geometric_profile``; ``inf`` when no decay with depth is left.
    r_squared_rate, r_squared_length : float
        Of the log-ratio fit and of the depth fit (both with intercept, centred).
    depth_intercept, depth_slope : float
        The depth fit ``ln(geometric_profile) = depth_intercept + depth_slope * z``
        (z in µm, slope per µm; ``length_um = -1 / depth_slope`` when the slope is negative).
    fraction_lost, fraction_lost_interval : float, tuple of float
        Signal the forward pass lost to bleaching by its last slice,
        ``1 - (1 - k)**(N - 1)``, and its 95 % interval (from ``rate_interval``).
    tolerance : float
        The accepted fraction lost.
    verdict : str
        ``"within"``, ``"inconclusive"`` or ``"exceeds"``: ``fraction_lost_interval``
        against *tolerance* (whole interval at or below it; spanning it; above it).
    exceeds_tolerance : bool
        ``verdict == "exceeds"``.
    offset : float
        Background level of the forward pass (up to 16 sampled slices).
    n_slices : int
    z_step : float
    forward_profile, reverse_profile : ndarray of float64
        Mean foreground signal per slice on the shared foreground (slice
        order, each pass minus its own background).
    log_ratio : ndarray of float64
        ``ln(reverse / forward)`` per slice (NaN where a slice was left out).
    exposures : ndarray of float64
        ``2N - 1 - 2i``: extra exposures the reverse pass had at slice *i*.
    geometric_profile : ndarray of float64
        ``sqrt(forward * reverse)``: every slice after the same number of
        exposures (``2N - 1`` with one-photon excitation), so only attenuation
        (and structure) varies along it.
    caveat, summary : str
    """

    rate_per_exposure: float
    rate_interval: tuple[float, float]
    pass_ratio: float
    pass_ratio_interval: tuple[float, float]
    length_um: float
    length_interval: tuple[float, float]
    r_squared_rate: float
    r_squared_length: float
    depth_intercept: float
    depth_slope: float
    fraction_lost: float
    fraction_lost_interval: tuple[float, float]
    tolerance: float
    verdict: str
    exceeds_tolerance: bool
    offset: float
    n_slices: int
    z_step: float
    forward_profile: np.ndarray = field(repr=False)
    reverse_profile: np.ndarray = field(repr=False)
    log_ratio: np.ndarray = field(repr=False)
    exposures: np.ndarray = field(repr=False)
    geometric_profile: np.ndarray = field(repr=False)
    caveat: str
    summary: str

    def to_dict(self) -> dict[str, Any]:
        """All fields as plain Python values, for JSON reports."""
        return plain_fields(self)

    @property
    def depths(self) -> np.ndarray:
        """Depth of each slice in µm (slice index x z_step)."""
        return np.arange(self.n_slices, dtype=np.float64) * self.z_step


def _expm1_pair(low: float, high: float, scale: float) -> tuple[float, float]:
    """``(-expm1(high * scale), -expm1(low * scale))``: a slope interval as a loss interval."""
    return (float(-math.expm1(high * scale)), float(-math.expm1(low * scale)))


def _weights(var: np.ndarray) -> np.ndarray:
    """Inverse variances, floored at 1e-3 of the median variance (equal weights without noise)."""
    positive = var[var > 0]
    floor = 1e-3 * float(np.median(positive)) if positive.size else 1.0
    return 1.0 / np.maximum(var, floor)


def _ratio_fit(profiles: PairProfiles, valid: np.ndarray) -> dict[str, Any]:
    """ln(reverse / forward) = a + b (2N - 1 - 2i), weighted by the inverse variance per slice."""
    n = profiles.forward.size
    exposures = 2.0 * n - 1.0 - 2.0 * np.arange(n, dtype=np.float64)
    log_ratio = np.full(n, math.nan)
    log_ratio[valid] = np.log(profiles.reverse[valid] / profiles.forward[valid])
    fit = fit_line(exposures[valid], log_ratio[valid], _weights(profiles.log_ratio_var[valid]))
    low_b, high_b = fit.slope_interval()
    low_a, high_a = fit.intercept_interval()
    return {"rate": float(-math.expm1(fit.slope)), "rate_ci": _expm1_pair(low_b, high_b, 1.0),
            "pass_ratio": math.exp(fit.intercept),
            "pass_ratio_ci": (math.exp(low_a), math.exp(high_a)),
            "lost": float(-math.expm1(fit.slope * (n - 1))),
            "lost_ci": _expm1_pair(low_b, high_b, n - 1.0), "r2": fit.r_squared,
            "log_ratio": log_ratio, "exposures": exposures}


def _two_pass_fits(profiles: PairProfiles, z_step: float) -> dict[str, Any]:
    valid = profiles.valid & (profiles.forward > 0) & (profiles.reverse > 0)
    if np.count_nonzero(valid) < 3:
        fail("forward", "at least 3 slices with a foreground above the background in both passes",
             f"<{int(np.count_nonzero(valid))} such slices>")
    out = _ratio_fit(profiles, valid)
    with np.errstate(invalid="ignore"):
        geometric = np.sqrt(profiles.forward * profiles.reverse)
    z = np.arange(profiles.forward.size, dtype=np.float64) * z_step
    depth_fit = fit_line(z[valid], np.log(geometric[valid]))
    out.update(length=decay_length(depth_fit.slope),
               length_ci=decay_length_interval(depth_fit.slope_interval()),
               r2_length=depth_fit.r_squared, depth_fit=depth_fit, geometric=geometric)
    return out


def separate_bleaching(
    forward: Any,
    reverse: Any,
    *,
    z_step: float,
    tolerance: float = 0.10,
    axis: int = 0,
    progress: Progress | None = None,
) -> TwoPassResult:
    """Bleaching rate, pass-to-pass ratio and attenuation length from two passes over one stack.

    Acquire the stack twice with the same settings: first from the surface
    down (*forward*), then deepest-first (*reverse*). With one-photon
    excitation every slice exposure bleaches the whole depth, so slice *i* is
    seen after *i* exposures in the forward pass and after ``2N - 1 - i`` in the
    reverse pass, and ``ln(S_rev(i) / S_fwd(i)) = a + b (2N - 1 - 2i)`` with
    ``b = ln(1 - k)``: structure and depth attenuation cancel. The intercept
    ``a`` takes up a uniform difference between the passes, ``pass_ratio =
    exp(a)``: 1 for one-photon bleaching alone, below 1 when each slice lost
    signal while it was imaged (two-photon excitation) or the settings or the
    sample changed between the passes; without it such a difference would be
    read as a rate. The fit is weighted by each slice's variance of the log
    ratio. The geometric mean ``sqrt(S_fwd S_rev)`` has had ``2N - 1``
    exposures in every slice, so its decay with depth gives the attenuation
    length ℓ (``exp(-z / ℓ)``) without the fitted rate.

    Both passes are measured on one foreground for the whole stack, chosen on
    their smoothed average with one threshold on the depth-corrected stack
    (see :func:`.measure.pair_profiles`), each pass minus its own background
    per slice. Slices with a foreground less than 3 background standard
    deviations above the background in either pass are left out of the fits.

    The verdict compares the 95 % interval of the fraction the forward pass
    lost with *tolerance*: ``"within"`` (whole interval at or below),
    ``"inconclusive"`` (spanning it) or ``"exceeds"`` (whole interval above).

    Parameters
    ----------
    forward, reverse : array_like or dask array, at least 3-D
        The two passes, both stored in slice order (surface first). Same
        shape. Never modified.
    z_step : float
        Slice spacing in µm.
    tolerance : float
        Accepted fraction of signal lost by the forward pass, in (0, 1); the
        default 0.10 is common practice, not a published value.
    axis : int
        The depth axis of both arrays.
    progress : callable, optional
        ``progress(done, total)`` between chunks; may raise ``Cancelled``.

    Returns
    -------
    TwoPassResult
        Frozen dataclass; profiles are float64 arrays.

    Raises
    ------
    ParameterError
        For bad arrays, different shapes, a bad *z_step* or *tolerance*, or
        fewer than 3 slices with a foreground in both passes.

    Notes
    -----
    A local loss that changes with depth (two-photon bleaching falling with
    the excitation) is a trend across the slices too, and cannot be told from
    one-photon bleaching by two passes; the summary says when a uniform
    difference is present.

    References
    ----------
    .. [1] W. Denk, J. H. Strickler, W. W. Webb, "Two-photon laser scanning
       fluorescence microscopy", Science 248:73-76, 1990, doi:10.1126/science.2321027.
    .. [2] G. H. Patterson, D. W. Piston, "Photobleaching in two-photon
       excitation microscopy", Biophys. J. 78(4):2159-2162, 2000,
       doi:10.1016/S0006-3495(00)76762-2.

    Examples
    --------
    >>> n, k, ell, dz = 20, 0.01, 40.0, 2.0
    >>> i = np.arange(n)[:, None, None]
    >>> structure = np.zeros((n, 16, 16)); structure[:, 4:12, 4:12] = 1000.0
    >>> depth = np.exp(-i * dz / ell)
    >>> fwd = 100 + structure * depth * (1 - k) ** i
    >>> rev = 100 + structure * depth * (1 - k) ** (2 * n - 1 - i)
    >>> result = separate_bleaching(fwd, rev, z_step=dz)
    >>> round(result.rate_per_exposure, 4), round(result.pass_ratio, 4), round(result.length_um, 1)
    (0.01, 1.0, 40.0)
    >>> result.verdict
    'exceeds'
    """
    forward, axis_f = check_stack(forward, name="forward", axis=axis)
    reverse, axis_r = check_stack(reverse, name="reverse", axis=axis)
    if tuple(forward.shape) != tuple(reverse.shape):
        fail("reverse", f"an array of the forward pass's shape {tuple(forward.shape)}",
             f"<shape {tuple(reverse.shape)}>")
    z_step = check_number(z_step, name="z_step", low=0, low_open=True)
    tolerance = check_number(tolerance, name="tolerance", low=0, high=1, low_open=True,
                             high_open=True)
    fwd_moved, rev_moved = depth_first(forward, axis_f), depth_first(reverse, axis_r)
    n = int(fwd_moved.shape[0])
    if n < 3:
        fail("forward", "at least 3 slices along the depth axis", f"<{n} slices>")
    background = frames_background(fwd_moved)
    profiles = pair_profiles(fwd_moved, rev_moved, z_step=z_step, progress=progress)
    fits = _two_pass_fits(profiles, z_step)
    verdict = judge_loss(fits["lost_ci"], tolerance)
    return TwoPassResult(
        rate_per_exposure=fits["rate"], rate_interval=fits["rate_ci"],
        pass_ratio=fits["pass_ratio"], pass_ratio_interval=fits["pass_ratio_ci"],
        length_um=fits["length"], length_interval=fits["length_ci"], r_squared_rate=fits["r2"],
        r_squared_length=fits["r2_length"], depth_intercept=fits["depth_fit"].intercept,
        depth_slope=fits["depth_fit"].slope, fraction_lost=fits["lost"],
        fraction_lost_interval=fits["lost_ci"], tolerance=tolerance, verdict=verdict,
        exceeds_tolerance=verdict == "exceeds", offset=background.level, n_slices=n,
        z_step=z_step, forward_profile=frozen(profiles.forward),
        reverse_profile=frozen(profiles.reverse), log_ratio=frozen(fits["log_ratio"]),
        exposures=frozen(fits["exposures"]), geometric_profile=frozen(fits["geometric"]),
        caveat=TWO_PASS_CAVEAT,
        summary=two_pass_summary(
            rate=fits["rate"], rate_interval=fits["rate_ci"], fraction_lost=fits["lost"],
            fraction_lost_interval=fits["lost_ci"], pass_ratio=fits["pass_ratio"],
            pass_ratio_interval=fits["pass_ratio_ci"], length_um=fits["length"],
            length_interval=fits["length_ci"], tolerance=tolerance, verdict=verdict),
    )
