"""Figures of the bleaching check (matplotlib Figure objects; no Qt, no pyplot state).

Used by the dock widget (inside a FigureCanvasQTAgg) and by ``stackdepth bleaching
--plot`` (saved to a file), so the screen and the file show the same plot.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from ..kernels.bleaching import BleachingReport, TwoPassResult
from ..kernels.bleaching.text import VERDICT_WORDS, format_interval
from ._common import new_figure

__all__ = ["bleaching_figure", "two_pass_figure", "time_axis"]

MEASURED = "#1f77b4"
MODEL = "#d62728"
TRUTH = "#2ca02c"
LIMIT = "#7f7f7f"


def time_axis(report: BleachingReport) -> tuple[np.ndarray, str]:
    """Frame positions in a readable unit and the axis label."""
    x = report.times
    if report.axis_kind == "depth":
        return x, "depth (µm; slice index × interval)"
    span = float(x[-1]) if x.size else 0.0
    if span >= 7200:
        return x / 3600, "time (h)"
    if span >= 120:
        return x / 60, "time (min)"
    return x, "time (s)"



def bleaching_figure(
    report: BleachingReport,
    *,
    truth_rate: float | None = None,
    figure: Figure | None = None,
) -> Figure:
    """Measured and modelled relative signal, with the tolerance line.

    Parameters
    ----------
    report : BleachingReport
    truth_rate : float, optional
        A known per-frame rate (demo data) drawn as ``(1 - k)**t``.
    figure : Figure, optional
        Drawn into (cleared first), e.g. the widget's canvas figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(figure, (6.0, 4.0))
    ax = fig.add_subplot(1, 1, 1)
    x, label = time_axis(report)
    first = float(report.model_profile[0]) if report.model_profile.size else 0.0
    scale = first if first > 0 else 1.0
    used = report.used
    ax.plot(x[used], report.profile[used] / scale, "o", ms=4, color=MEASURED,
            label="measured foreground")
    if not used.all():
        ax.plot(x[~used], report.profile[~used] / scale, "o", ms=4, mfc="none", color=LIMIT,
                label="left out (no clear foreground)")
    ax.plot(x, report.model_profile / scale, "-", lw=2, color=MODEL,
            label=f"model ({report.model})")
    if truth_rate is not None and math.isfinite(truth_rate):
        ax.plot(x, (1 - truth_rate) ** np.arange(report.n_frames), ":", lw=2, color=TRUTH,
                label=f"true rate {truth_rate * 100:.3g} %/frame (demo)")
    ax.axhline(1 - report.tolerance, ls="--", color=LIMIT,
               label=f"tolerance: {report.tolerance * 100:.3g} % loss")
    ax.set_xlabel(label)
    ax.set_ylabel("signal relative to the model's first frame")
    low = min(0.0, float(np.nanmin(report.profile / scale)) if report.n_frames else 0.0)
    ax.set_ylim(low, max(1.1, float(np.nanmax(report.profile / scale)) * 1.05))
    ax.grid(alpha=0.3)
    ax.legend(loc="lower left", fontsize=8)
    lo, hi = report.rate_interval
    ci = f" (95 % CI {lo * 100:.3g} to {hi * 100:.3g})" if math.isfinite(lo) else ""
    unit = "frame" if report.axis_kind == "time" else "slice"
    ax.set_title(f"k = {report.rate_per_frame * 100:.3g} % per {unit}{ci}; "
                 f"lost {report.fraction_lost * 100:.3g} %\n{_loss_text(report)}", fontsize=10)
    if report.axis_kind == "depth":
        ax.text(0.98, 0.97, "bleaching and attenuation combined\n(one stack cannot separate them)",
                transform=ax.transAxes, ha="right", va="top", fontsize=8, color="#a05000")
    return fig


def _loss_text(result: BleachingReport | TwoPassResult) -> str:
    """``'verdict: inconclusive (95 % interval of the loss a–b %)'``: the verdict and its interval."""
    interval = result.fraction_lost_interval
    words = f"verdict: {VERDICT_WORDS[result.verdict].lower()}"
    if not all(math.isfinite(v) for v in interval):
        return words
    return f"{words} (95 % interval of the loss {format_interval(interval)})"


def _attenuation_line(result: TwoPassResult) -> tuple[np.ndarray, np.ndarray] | None:
    """The depth fit of the equal-exposure profile, ``exp(intercept + slope * z)``."""
    if not (math.isfinite(result.depth_intercept) and math.isfinite(result.depth_slope)):
        return None
    z = result.depths
    return z, np.exp(result.depth_intercept + result.depth_slope * z)


def two_pass_figure(
    result: TwoPassResult,
    *,
    truth: dict[str, Any] | None = None,
    figure: Figure | None = None,
    stacked: bool = False,
) -> Figure:
    """Left: log ratio of the two passes against the extra exposures (slope ln(1 - k),
    intercept ln of the pass ratio). Right: the equal-exposure profile √(forward·reverse)
    against depth (slope -1/ℓ).

    *truth* (demo metadata) adds the true rate and length as dotted lines. With
    *stacked* the two panels are drawn one above the other (for a narrow dock).
    """
    fig = new_figure(figure, (5.0, 7.0) if stacked else (9.0, 4.0))
    shape = (2, 1) if stacked else (1, 2)
    left, right = fig.add_subplot(*shape, 1), fig.add_subplot(*shape, 2)
    x, y = result.exposures, result.log_ratio
    left.plot(x, y, "o", ms=4, color=MEASURED, label="slices")
    grid = np.array([0.0, float(x.max())])
    intercept = math.log(result.pass_ratio)
    left.plot(grid, intercept + math.log1p(-result.rate_per_exposure) * grid, "-", lw=2,
              color=MODEL, label=f"fit: k = {result.rate_per_exposure * 100:.3g} %, "
              f"pass ratio {result.pass_ratio:.3f}")
    truth = truth or {}
    k_true = truth.get("bleach_rate_per_exposure")
    if k_true is not None:
        left.plot(grid, math.log1p(-k_true) * grid, ":", lw=2, color=TRUTH,
                  label=f"true k = {k_true * 100:.3g} % (demo)")
    left.set_xlabel("extra exposures of the reverse pass (2N − 1 − 2i)")
    left.set_ylabel("ln(reverse / forward)")
    interval = result.fraction_lost_interval
    ci = f" ({format_interval(interval)})" if all(math.isfinite(v) for v in interval) else ""
    left.set_title(f"forward pass lost {result.fraction_lost * 100:.3g} %{ci}\n"
                   f"verdict: {VERDICT_WORDS[result.verdict].lower()}", fontsize=9)
    left.grid(alpha=0.3)
    left.legend(fontsize=8, loc="lower left")

    z, u = result.depths, result.geometric_profile
    with np.errstate(invalid="ignore"):
        used = np.isfinite(result.log_ratio) & (u > 0)
        left_out = ~np.isfinite(result.log_ratio) & (u > 0)
    right.semilogy(z[used], u[used], "o", ms=4, color=MEASURED,
                   label="√(forward · reverse)")
    if left_out.any():
        right.semilogy(z[left_out], u[left_out], "o", ms=4, mfc="none", color=LIMIT,
                       label="left out")
    line = _attenuation_line(result)
    if line is not None:
        length = f"{result.length_um:.3g} µm" if math.isfinite(result.length_um) else "none"
        right.semilogy(*line, "-", lw=2, color=MODEL, label=f"fit: ℓ = {length}")
        l_true = truth.get("attenuation_length_um")
        if l_true is not None:
            right.semilogy(line[0], line[1][0] * np.exp(-(line[0] - line[0][0]) / l_true), ":",
                           lw=2, color=TRUTH, label=f"true ℓ = {l_true:.3g} µm (demo)")
    right.set_xlabel("depth (µm)")
    right.set_ylabel("signal, equal exposures")
    right.set_title("attenuation with depth", fontsize=10)
    right.grid(alpha=0.3, which="both")
    right.legend(fontsize=8, loc="lower left")
    return fig
