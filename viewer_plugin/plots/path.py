"""Depth and peak along a drawn path (:func:`viewer_plugin.kernels.depth_along_path`)."""

from __future__ import annotations

from typing import Any

from matplotlib.figure import Figure

from ._common import new_figure

__all__ = ["length_text", "path_figure"]


def length_text(profile: Any) -> str:
    """The path's lengths in one line: in the plane, in 3-D with its range, and their ratio."""
    low, high = profile.length_3d_range_um
    return (f"Length in the plane {profile.length_2d_um:.4g} \u00b5m; in 3-D "
            f"{profile.length_3d_um:.4g} \u00b5m (range {low:.4g}\u2013{high:.4g} \u00b5m); "
            f"3-D / 2-D = {profile.ratio:.3g}")


def path_figure(profile: Any, *, figure: Figure | None = None, title: str = "") -> Figure:
    """Depth (µm, deeper downwards) and peak value against distance along the path.

    Parameters
    ----------
    profile : PathProfile
        From :func:`viewer_plugin.kernels.depth_along_path`.
    figure : matplotlib.figure.Figure, optional
        Drawn into (cleared first), e.g. a dock's canvas; else a new figure.
    title : str
        Above the top panel.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = new_figure(figure, (5.0, 3.6))
    top, bottom = fig.subplots(2, 1, sharex=True)
    top.plot(profile.distance_um, profile.depth_um, color="#1f77b4", lw=1.5)
    top.invert_yaxis()  # deeper is lower, as in a side view of the stack
    top.set_ylabel("Depth (\u00b5m)")
    top.grid(alpha=0.3)
    if title:
        top.set_title(title, fontsize=9)
    bottom.plot(profile.distance_um, profile.peak, color="#555555", lw=1.0)
    bottom.set_ylabel("Peak")
    bottom.set_xlabel("Distance along the path in the plane (\u00b5m)")
    bottom.grid(alpha=0.3)
    return fig
