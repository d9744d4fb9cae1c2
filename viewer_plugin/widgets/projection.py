"""Projection widgets (placeholders until the projections issue lands)."""

from __future__ import annotations

from ._common import PlaceholderWidget


class DepthColourWidget(PlaceholderWidget):
    purpose = "Colours every pixel by the depth of its signal (in µm) in one 2-D image."


class BrightestPointWidget(PlaceholderWidget):
    purpose = "Maximum-intensity projection plus a map of the depth (µm) of each maximum."


class BlendedWidget(PlaceholderWidget):
    purpose = "Alpha-blended projection: nearer structures partly hide deeper ones."
