"""Depth attenuation widget (placeholder until the attenuation issue lands)."""

from __future__ import annotations

from ._common import PlaceholderWidget


class AttenuationWidget(PlaceholderWidget):
    purpose = "Measures how signal fades with depth (attenuation length in µm) and corrects it."
