"""Plain-language sentences of the bleaching reports (no numbers are computed here)."""

from __future__ import annotations

import math

from ..primitives.fitting import POOR_FIT

__all__ = ["DEPTH_CAVEAT", "TWO_PASS_CAVEAT", "format_duration", "format_percent",
           "bleaching_summary", "two_pass_summary"]

DEPTH_CAVEAT = (
    "One z-stack cannot tell photobleaching from depth attenuation: both make later, deeper "
    "slices dimmer, and this decay is the two combined. To separate them, acquire the same "
    "stack twice, the second pass deepest-first, and use the two-pass method "
    "(separate_bleaching; 'stackdepth bleaching FORWARD --reverse REVERSE')."
)

TWO_PASS_CAVEAT = (
    "Assumes one-photon excitation, where every slice exposure bleaches the whole depth, and "
    "the same settings in both passes. With two-photon excitation bleaching stays in the focal "
    "plane and the ratio shows no trend. Intensities are relative, not calibrated."
)


def format_percent(fraction: float) -> str:
    """``0.2634 -> '26 %'``; one decimal below 10 %."""
    value = abs(fraction) * 100
    if value < 10:
        return f"{value:.1f} %"
    return f"{value:.0f} %"


def format_duration(seconds: float) -> str:
    """A time in s, min or h with two or three significant digits."""
    if not math.isfinite(seconds):
        return "infinite"
    if seconds < 120:
        return f"{seconds:.3g} s"
    if seconds < 7200:
        return f"{seconds / 60:.3g} min"
    return f"{seconds / 3600:.3g} h"


def _half_text(half_life: float, axis_kind: str) -> str:
    if not math.isfinite(half_life):
        return ""
    if axis_kind == "time":
        return f" (half-life {format_duration(half_life)})"
    return f" (halving every {half_life:.3g} µm of depth)"


def bleaching_summary(
    *,
    fraction_lost: float,
    half_life: float,
    n_frames: int,
    tolerance: float,
    axis_kind: str,
    significant: bool,
    r_squared: float = math.nan,
) -> str:
    """One sentence: how much the signal changed, how fast, and the verdict."""
    noun = "time points" if axis_kind == "time" else "slices"
    limit = f"the {format_percent(tolerance)} tolerance"
    if not math.isfinite(fraction_lost):
        return f"The signal over {n_frames} {noun} could not be modelled; no verdict."
    direction = "fell" if fraction_lost > 0 else "rose"
    if not significant and abs(fraction_lost) <= tolerance:
        sentence = (f"No significant fading: the signal {direction} by "
                    f"{format_percent(fraction_lost)} over {n_frames} {noun}; "
                    f"this is within {limit}")
    elif not significant:
        sentence = (f"No clear trend: the model {direction} by {format_percent(fraction_lost)} "
                    f"over {n_frames} {noun}, but that is not significant (its 95 % interval "
                    f"includes no change); no verdict against {limit}")
    elif fraction_lost <= 0:
        sentence = (f"Signal rose by {format_percent(fraction_lost)} over {n_frames} {noun}: "
                    f"no fading; this is within {limit}")
    else:
        verdict = "this exceeds" if fraction_lost > tolerance else "this is within"
        sentence = (f"Signal fell by {format_percent(fraction_lost)} over {n_frames} {noun}"
                    f"{_half_text(half_life, axis_kind)}; {verdict} {limit}")
    if math.isfinite(r_squared) and r_squared < POOR_FIT:
        sentence += (f" (the decay model fits poorly, R\u00b2 = {r_squared:.2f}, so the numbers "
                     "are rough)")
    if axis_kind == "depth":
        sentence += ", but one z-stack cannot tell bleaching from depth attenuation"
    return sentence + "."


def two_pass_summary(
    *,
    rate: float,
    rate_interval: tuple[float, float],
    fraction_lost: float,
    length_um: float,
    length_interval: tuple[float, float],
) -> str:
    """One sentence with both two-pass estimates."""
    low, high = rate_interval
    ci = ""
    if math.isfinite(low) and math.isfinite(high):
        ci = f" (95 % CI {low * 100:.2g} to {high * 100:.2g} %)"
    if math.isfinite(length_um):
        lo, hi = length_interval
        hi_text = f"{hi:.3g}" if math.isfinite(hi) else "inf"
        length = f"attenuation length {length_um:.3g} µm (95 % CI {lo:.3g} to {hi_text} µm)"
    else:
        lo = length_interval[0]
        bound = f" (95 % CI from {lo:.3g} µm up)" if math.isfinite(lo) else ""
        length = ("attenuation length not determined: with bleaching removed, the forward "
                  f"profile does not fall with depth{bound}")
    return (f"Two-pass estimate: bleaching {rate * 100:.2g} % per slice exposure{ci}, "
            f"which cost the forward pass {format_percent(fraction_lost)} of its signal by the "
            f"last slice; {length}.")
