"""Plain-language sentences of the bleaching reports, and the three-way verdict they state.

The verdict against a tolerance is decided here, once, from the 95 %
interval of the fraction lost (:func:`judge_loss`), and written here, once
(:func:`verdict_clause`); the check, the two-pass separation, the command
line and the dock all use these.
"""

from __future__ import annotations

import math

from ..primitives.fitting import POOR_FIT

__all__ = ["DEPTH_CAVEAT", "F_TEST_ASSUMPTION", "TWO_PASS_CAVEAT", "VERDICTS", "VERDICT_WORDS",
           "bleaching_summary", "format_duration", "format_interval", "format_percent",
           "judge_loss", "two_pass_summary", "verdict_clause"]

#: The three verdicts, in order of concern.
VERDICTS = ("within", "inconclusive", "exceeds")

#: Each verdict as a short label (the dock's badge; words, never colour alone).
VERDICT_WORDS = {
    "within": "Within tolerance",
    "inconclusive": "Inconclusive",
    "exceeds": "Exceeds tolerance",
}

#: What the model choice assumes (said in every model-choice text).
F_TEST_ASSUMPTION = (
    "the F-test assumes frames that scatter independently around the model; correlated frame "
    "noise (flicker, drift, focus changes) makes it choose a richer model too often"
)

DEPTH_CAVEAT = (
    "One z-stack cannot tell photobleaching from depth attenuation: both make later, deeper "
    "slices dimmer, and this decay is the two combined. To separate them, acquire the same "
    "stack twice, the second pass deepest-first, and use the two-pass method "
    "(separate_bleaching; 'stackdepth bleaching FORWARD --reverse REVERSE')."
)

TWO_PASS_CAVEAT = (
    "The rate assumes one-photon excitation, where every slice exposure bleaches the whole "
    "depth, and the same settings in both passes. With two-photon excitation bleaching stays "
    "in the imaged plane: the reverse pass is then uniformly dimmer (pass ratio below 1) with "
    "no trend, and a local loss that changes with depth cannot be told from one-photon "
    "bleaching. Intensities are relative, not calibrated."
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


def judge_loss(interval: tuple[float, float], tolerance: float) -> str:
    """The verdict from the 95 % interval of the fraction lost against *tolerance*.

    ``"within"`` when the whole interval is at or below the tolerance,
    ``"exceeds"`` when the whole interval is above it, ``"inconclusive"``
    when it spans the tolerance or could not be computed.

    Examples
    --------
    >>> judge_loss((0.02, 0.06), 0.10), judge_loss((0.07, 0.13), 0.10), judge_loss((0.12, 0.2), 0.10)
    ('within', 'inconclusive', 'exceeds')
    """
    low, high = interval
    if not (math.isfinite(low) and math.isfinite(high)):
        return "inconclusive"
    if high <= tolerance:
        return "within"
    if low > tolerance:
        return "exceeds"
    return "inconclusive"


def _pct(fraction: float) -> str:
    return f"{fraction * 100:.1f}".replace("-", "\u2212")


def format_interval(interval: tuple[float, float]) -> str:
    """``(0.071, 0.132) -> '7.1–13.2 %'``; ``'−1.0 to 3.2 %'`` when it starts below 0."""
    low, high = interval
    joint = " to " if low < 0 else "\u2013"
    return f"{_pct(low)}{joint}{_pct(high)} %"


def verdict_clause(verdict: str, tolerance: float, interval: tuple[float, float]) -> str:
    """The verdict as a clause that names the tolerance and the interval it was decided from.

    Examples
    --------
    >>> verdict_clause("inconclusive", 0.10, (0.071, 0.132))
    'inconclusive against the 10 % tolerance: the 95 % interval of the loss, 7.1–13.2 %, spans it'
    """
    limit = f"the {format_percent(tolerance)} tolerance"
    if not all(math.isfinite(v) for v in interval):
        return f"inconclusive against {limit}: the loss has no 95 % interval (too few frames)"
    ci = format_interval(interval)
    if verdict == "within":
        return f"this is within {limit} (95 % interval of the loss: {ci})"
    if verdict == "exceeds":
        return f"this exceeds {limit} (95 % interval of the loss: {ci})"
    return f"inconclusive against {limit}: the 95 % interval of the loss, {ci}, spans it"


def _model_sentence(model: str) -> str:
    if model == "double":
        return (" Two exponential components were fitted: the F-test preferred them to one, "
                "assuming independent frames.")
    if model == "single+plateau":
        return (" A part that does not fade was fitted: the F-test preferred it, assuming "
                "independent frames.")
    return ""


def bleaching_summary(
    *,
    fraction_lost: float,
    fraction_lost_interval: tuple[float, float],
    half_life: float,
    n_frames: int,
    tolerance: float,
    axis_kind: str,
    verdict: str,
    r_squared: float = math.nan,
    model: str = "single",
) -> str:
    """The verdict sentence: how much the signal changed, how fast, and against the tolerance."""
    noun = "time points" if axis_kind == "time" else "slices"
    if not math.isfinite(fraction_lost):
        return (f"The signal over {n_frames} {noun} could not be modelled; inconclusive: no "
                "verdict against the tolerance.")
    low, high = fraction_lost_interval
    direction = "fell" if fraction_lost > 0 else "rose"
    change = f"{direction} by {format_percent(fraction_lost)} over {n_frames} {noun}"
    flat = math.isfinite(low) and low <= 0.0 <= high
    if flat and verdict == "within":
        head = f"No significant fading: the signal {change}"
    elif flat:
        head = (f"No clear trend: the model {change}, not significantly (its 95 % interval "
                "includes no change)")
    elif fraction_lost <= 0:
        head = f"Signal {change}: no fading"
    else:
        head = f"Signal {change}{_half_text(half_life, axis_kind)}"
    sentence = f"{head}; {verdict_clause(verdict, tolerance, fraction_lost_interval)}"
    if math.isfinite(r_squared) and r_squared < POOR_FIT:
        sentence += (f" (the decay model fits poorly, R\u00b2 = {r_squared:.2f}, so the numbers "
                     "are rough)")
    if axis_kind == "depth":
        sentence += ", but one z-stack cannot tell bleaching from depth attenuation"
    return sentence + "." + _model_sentence(model)


def _pass_sentence(pass_ratio: float, pass_ratio_interval: tuple[float, float],
                   rate_interval: tuple[float, float]) -> str:
    """What a uniform difference between the passes means, when there is one."""
    low, high = pass_ratio_interval
    if not (math.isfinite(low) and math.isfinite(high)) or low <= 1.0 <= high:
        return ""
    trend = not (rate_interval[0] <= 0.0 <= rate_interval[1])
    ci = f"95 % interval {format_interval((1 - high, 1 - low))}"
    if high < 1.0 and not trend:
        return (f" The reverse pass is uniformly {format_percent(1 - pass_ratio)} dimmer ({ci}) "
                "with no trend across the slices: the signature of bleaching confined to the "
                "imaged plane (two-photon excitation) or of a change between the passes (drift, "
                "laser power), not of one-photon bleaching.")
    if high < 1.0:
        return (f" The reverse pass is also uniformly {format_percent(1 - pass_ratio)} dimmer "
                f"({ci}): a change between the passes, or a local (two-photon) loss; if that "
                "local loss changes with depth, part of the rate is that change.")
    return (f" The reverse pass is uniformly {format_percent(pass_ratio - 1)} brighter: the "
            "settings or the sample changed between the passes.")


def two_pass_summary(
    *,
    rate: float,
    rate_interval: tuple[float, float],
    fraction_lost: float,
    fraction_lost_interval: tuple[float, float],
    pass_ratio: float,
    pass_ratio_interval: tuple[float, float],
    length_um: float,
    length_interval: tuple[float, float],
    tolerance: float,
    verdict: str,
) -> str:
    """The two-pass estimates, what a uniform difference between the passes means, the verdict."""
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
        length = ("attenuation length not determined: the profile of equal exposures "
                  f"(√(forward·reverse)) does not fall with depth{bound}")
    lost = (f"The forward pass lost {format_percent(fraction_lost)} of its signal to it by the "
            f"last slice; {verdict_clause(verdict, tolerance, fraction_lost_interval)}.")
    return (f"Two-pass estimate: bleaching {rate * 100:.2g} % per slice exposure{ci}; {length}."
            f"{_pass_sentence(pass_ratio, pass_ratio_interval, rate_interval)} {lost}")
