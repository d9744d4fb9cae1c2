"""Bleaching check widget (placeholder until the bleaching issue lands)."""

from __future__ import annotations

from ._common import PlaceholderWidget


class BleachingWidget(PlaceholderWidget):
    purpose = "Checks a stack or time series for photobleaching, gives a verdict and corrects it."
