"""Two passes over one stack (the second deepest-first): bleaching per exposure and attenuation.

With one-photon excitation every slice exposure bleaches the whole depth, so
the ratio of the two passes cancels structure and depth attenuation and
leaves the bleaching; the forward profile with bleaching divided out gives
the attenuation length.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..._shared.progress import Progress
from ..._shared.validation import check_number, check_stack, depth_first, fail
from ..primitives.background import frames_background
from ..primitives.fitting import (
    decay_length,
    decay_length_interval,
    fit_line,
    fit_through_origin,
    t_interval,
)
from ._common import frozen, plain_fields
from .measure import per_slice_masks
from .text import TWO_PASS_CAVEAT, two_pass_summary

__all__ = ["TwoPassResult", "separate_bleaching"]


@dataclass(frozen=True)
class TwoPassResult:
    """Result of :func:`separate_bleaching`.

    Attributes
    ----------
    rate_per_exposure, rate_interval : float, tuple of float
        k per slice exposure and its 95 % confidence interval.
    length_um, length_interval : float, tuple of float
        Attenuation length ℓ in µm (I ∝ exp(-z/ℓ)) and its 95 % interval;
        ``inf`` when no decay with depth is left.
    r_squared_rate, r_squared_length : float
        Of the log-ratio fit (through the origin, so uncentred: ``1 - rss / sum y**2``)
        and of the bleaching-free depth fit (centred).
    depth_intercept, depth_slope : float
        The bleaching-free depth fit ``ln(unbleached) = depth_intercept + depth_slope * z``
        (z in µm, slope per µm; ``length_um = -1 / depth_slope`` when the slope is negative).
    fraction_lost : float
        Signal the forward pass lost to bleaching by its last slice.
    offset : float
        Background level of the forward pass (up to 16 sampled slices).
    n_slices : int
    z_step : float
    forward_profile, reverse_profile : ndarray of float64
        Mean foreground signal per slice (slice order, background subtracted).
    log_ratio : ndarray of float64
        ``ln(reverse / forward)`` per slice (NaN where not positive).
    exposures : ndarray of float64
        ``2N - 1 - 2i``: extra exposures the reverse pass had at slice *i*.
    unbleached_profile : ndarray of float64
        Forward profile divided by ``(1 - k)**i``.
    caveat, summary : str
    """

    rate_per_exposure: float
    rate_interval: tuple[float, float]
    length_um: float
    length_interval: tuple[float, float]
    r_squared_rate: float
    r_squared_length: float
    depth_intercept: float
    depth_slope: float
    fraction_lost: float
    offset: float
    n_slices: int
    z_step: float
    forward_profile: np.ndarray = field(repr=False)
    reverse_profile: np.ndarray = field(repr=False)
    log_ratio: np.ndarray = field(repr=False)
    exposures: np.ndarray = field(repr=False)
    unbleached_profile: np.ndarray = field(repr=False)
    caveat: str
    summary: str

    def to_dict(self) -> dict[str, Any]:
        """All fields as plain Python values, for JSON reports."""
        return plain_fields(self)

    @property
    def depths(self) -> np.ndarray:
        """Depth of each slice in µm (slice index x z_step)."""
        return np.arange(self.n_slices, dtype=np.float64) * self.z_step


def _two_pass_fits(fwd: np.ndarray, rev: np.ndarray, valid: np.ndarray,
                   z_step: float) -> dict[str, Any]:
    n = fwd.size
    i = np.arange(n, dtype=np.float64)
    exposures = 2.0 * n - 1.0 - 2.0 * i
    valid = valid & (fwd > 0) & (rev > 0)
    if np.count_nonzero(valid) < 3:
        fail("forward", "at least 3 slices with a foreground above the background in both passes",
             f"<{int(np.count_nonzero(valid))} such slices>")
    log_ratio = np.full(n, math.nan)
    log_ratio[valid] = np.log(rev[valid] / fwd[valid])
    ratio_fit = fit_through_origin(exposures[valid], log_ratio[valid])
    b, se_b = ratio_fit.slope, ratio_fit.slope_se
    low_b, high_b = ratio_fit.slope_interval()
    rate = float(-math.expm1(b))
    rate_ci = (float(-math.expm1(high_b)), float(-math.expm1(low_b)))
    unbleached = fwd / np.exp(b * i)
    depth_fit = fit_line(i[valid] * z_step, np.log(unbleached[valid]))
    # u = ln S_fwd - i b: the slope on z inherits the uncertainty of b / z_step
    se_total = math.sqrt(depth_fit.slope_se**2 + (se_b / z_step) ** 2)
    slope_ci = t_interval(depth_fit.slope, se_total, depth_fit.dof)
    return {"rate": rate, "rate_ci": rate_ci, "r2_rate": ratio_fit.r_squared,
            "length": decay_length(depth_fit.slope), "length_ci": decay_length_interval(slope_ci),
            "r2_length": depth_fit.r_squared, "depth_fit": depth_fit, "log_ratio": log_ratio,
            "exposures": exposures, "unbleached": unbleached,
            "lost": float(-math.expm1(b * (n - 1)))}


def separate_bleaching(
    forward: Any,
    reverse: Any,
    *,
    z_step: float,
    axis: int = 0,
    progress: Progress | None = None,
) -> TwoPassResult:
    """Bleaching rate and attenuation length from two passes over the same stack.

    Acquire the stack twice with the same settings: first from the surface
    down (*forward*), then deepest-first (*reverse*). With one-photon
    excitation every slice exposure bleaches the whole depth, so slice *i* is
    seen after *i* exposures in the forward pass and after ``2N - 1 - i`` in the
    reverse pass. Their ratio cancels structure and depth attenuation:
    ``S_rev(i) / S_fwd(i) = (1 - k)**(2N - 1 - 2i)``, fitted through the origin
    on the log scale. The forward profile divided by ``(1 - k)**i`` then
    gives the attenuation length ℓ from ``exp(-z / ℓ)``. Both passes are
    measured on the same foreground: per slice, the Otsu foreground of the
    average of the two passes, minus each slice's own background. Slices
    whose foreground is not 3 background standard deviations above the
    background in both passes are left out of the fits.

    The rate is robust (structure cancels in the ratio); the length is only
    as good as the forward profile, whose changes of structure with depth
    remain (the interval says how well it is determined).

    Parameters
    ----------
    forward, reverse : array_like or dask array, at least 3-D
        The two passes, both stored in slice order (surface first). Same
        shape. Never modified.
    z_step : float
        Slice spacing in µm.
    axis : int
        The depth axis of both arrays.
    progress : callable, optional
        ``progress(done, total)`` between slices; may raise ``Cancelled``.

    Returns
    -------
    TwoPassResult
        Frozen dataclass; profiles are float64 arrays.

    Raises
    ------
    ParameterError
        For bad arrays, different shapes, a bad *z_step*, or fewer than 3
        slices with a foreground in both passes.

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
    >>> round(result.rate_per_exposure, 4), round(result.length_um, 1)
    (0.01, 40.0)
    """
    forward, axis_f = check_stack(forward, name="forward", axis=axis)
    reverse, axis_r = check_stack(reverse, name="reverse", axis=axis)
    if tuple(forward.shape) != tuple(reverse.shape):
        fail("reverse", f"an array of the forward pass's shape {tuple(forward.shape)}",
             f"<shape {tuple(reverse.shape)}>")
    z_step = check_number(z_step, name="z_step", low=0, low_open=True)
    fwd_moved, rev_moved = depth_first(forward, axis_f), depth_first(reverse, axis_r)
    n = int(fwd_moved.shape[0])
    if n < 3:
        fail("forward", "at least 3 slices along the depth axis", f"<{n} slices>")
    background = frames_background(fwd_moved)
    fwd, rev, valid = per_slice_masks(fwd_moved, rev_moved, progress=progress)
    fits = _two_pass_fits(fwd, rev, valid, z_step)
    return TwoPassResult(
        rate_per_exposure=fits["rate"], rate_interval=fits["rate_ci"], length_um=fits["length"],
        length_interval=fits["length_ci"], r_squared_rate=fits["r2_rate"],
        r_squared_length=fits["r2_length"], depth_intercept=fits["depth_fit"].intercept,
        depth_slope=fits["depth_fit"].slope, fraction_lost=fits["lost"],
        forward_profile=frozen(fwd), reverse_profile=frozen(rev),
        log_ratio=frozen(fits["log_ratio"]), exposures=frozen(fits["exposures"]),
        unbleached_profile=frozen(fits["unbleached"]), offset=background.level, n_slices=n,
        z_step=z_step, caveat=TWO_PASS_CAVEAT,
        summary=two_pass_summary(rate=fits["rate"], rate_interval=fits["rate_ci"],
                                 fraction_lost=fits["lost"], length_um=fits["length"],
                                 length_interval=fits["length_ci"]),
    )
