"""The attenuation plot: measured profile, depth model and gain (matplotlib, no Qt, no pyplot).

Used by the "Depth attenuation" dock widget (drawn into its canvas's figure)
and by ``stackdepth attenuation --plot`` (saved as PNG).
"""

from __future__ import annotations

import math
import textwrap
from typing import Any, Mapping

import numpy as np
from matplotlib.figure import Figure

from ..kernels.attenuation import AttenuationFit
from ..kernels.attenuation.estimate import interval_words
from ._common import new_figure

__all__ = ["attenuation_figure", "interval_text", "length_text", "truth_text"]


def length_text(fit: AttenuationFit) -> str:
    """'ℓ = 41 µm (95 % interval 38 to 45 µm)', three digits; an open end said in words."""
    if math.isinf(fit.length_um):
        main = "ℓ = ∞ (no decrease with depth)"
    else:
        main = f"ℓ = {fit.length_um:.3g} µm"
    return f"{main} ({interval_words(fit, unit='µm', digits=3)})"


def interval_text(fit: AttenuationFit) -> str:
    """How the interval was made and how much of the field carried the fit, in one line."""
    how = fit.interval_method
    if fit.n_resamples:
        how += f" ({fit.n_resamples} resamples, seed {fit.seed})"
    return f"interval: {how}; fit carried by {fit.field_fraction:.0%} of the lateral field"


def truth_text(truth: Mapping[str, Any] | None) -> str:
    """'true (demo): 50 µm, with bleaching 40 µm' from a demo's truth, or ''."""
    if not truth or "attenuation_length_um" not in truth:
        return ""
    text = f"true (demo): {float(truth['attenuation_length_um']):.3g} µm"
    effective = truth.get("effective_attenuation_length_um")
    if effective is not None:
        text += f"; with bleaching, as one stack shows it: {float(effective):.3g} µm"
    return text



def attenuation_figure(
    fit: AttenuationFit,
    *,
    log_scale: bool = True,
    max_gain: float | None = None,
    truth: Mapping[str, Any] | None = None,
    title: str | None = None,
    figure: Figure | None = None,
    annotate: bool = True,
) -> Figure:
    """Draw the profile (points with standard errors), the model and the gain against depth.

    Parameters
    ----------
    fit : AttenuationFit
        From :func:`~viewer_plugin.kernels.estimate_attenuation`.
    log_scale : bool
        Logarithmic signal axis (an exponential decay is then a straight line).
    max_gain : float, optional
        Draw the gain cap as a dashed line (gains above it are capped on correction).
    truth : mapping, optional
        A demo's ``truth``; its length is written beside the estimate.
    title : str, optional
        Figure title (e.g. the layer or file name).
    figure : matplotlib Figure, optional
        Draw into this figure (cleared first) instead of a new one.
    annotate : bool
        Write the length, r² and the demo truth inside the plot (the dock
        widget shows them as text beside it instead).

    Returns
    -------
    matplotlib.figure.Figure
        Two axes: signal above background (top) and gain (bottom), depth in µm.
    """
    fig = new_figure(figure, (6.0, 4.6))
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    depth = fit.depth_um
    ok = np.isfinite(fit.profile) & (fit.profile > 0)
    top.errorbar(depth[ok], fit.profile[ok], yerr=fit.profile_sem[ok], fmt="o", ms=3,
                 color="tab:blue", ecolor="tab:blue", alpha=0.8, label="measured foreground")
    label = "exponential fit" if fit.model != "smooth" else "smooth model"
    curve = np.isfinite(fit.model_profile) & (fit.model_profile > 0)
    top.plot(depth[curve], fit.model_profile[curve], color="tab:orange", lw=2, label=label)
    if log_scale and (ok.any() or curve.any()):
        top.set_yscale("log")
    top.set_ylabel("signal above background")
    top.legend(loc="upper right", fontsize="small", frameon=False)
    if annotate:
        lines = [f"{length_text(fit)}; exponential fit r² = {fit.r_squared:.3f}",
                 *textwrap.wrap(interval_text(fit), 90)]
        demo = truth_text(truth)
        if demo:
            lines.append(demo)
        top.set_title("\n".join(lines), fontsize="small", loc="left")
    gain = np.where(np.isfinite(fit.gain), fit.gain, np.nan)
    shown = gain if max_gain is None else np.minimum(gain, max_gain)
    bottom.plot(depth, shown, color="tab:green", lw=2, label="gain")
    if fit.model == "histogram":
        bottom.set_ylabel("gain (mean ratio)")
    else:
        bottom.set_ylabel("gain")
    if max_gain is not None and math.isfinite(max_gain) and np.nanmax(gain) > max_gain:
        bottom.axhline(max_gain, color="tab:red", ls="--", lw=1, label=f"cap {max_gain:g}")
        bottom.legend(loc="upper left", fontsize="small", frameon=False)
    if annotate:
        bottom.text(0.02, 0.92, "gains above 1 amplify noise too; corrected values are relative",
                    transform=bottom.transAxes, fontsize="x-small", va="top", color="0.35")
    bottom.set_xlabel("depth (µm)")
    bottom.axhline(1.0, color="0.6", lw=0.8)
    if title:
        fig.suptitle(title, fontsize="medium")
    return fig
