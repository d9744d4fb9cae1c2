"""What the plot builders share."""

from __future__ import annotations

from matplotlib.figure import Figure

__all__ = ["new_figure"]


def new_figure(figure: Figure | None, size: tuple[float, float]) -> Figure:
    """*figure* cleared for drawing again (a dock's canvas), or a new one of *size* inches."""
    if figure is None:
        return Figure(figsize=size, dpi=100, layout="constrained")
    figure.clear()
    return figure
