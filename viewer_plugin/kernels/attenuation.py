"""Depth attenuation (placeholder; filled by the attenuation issue)."""

from __future__ import annotations

from typing import Any

__all__ = ["estimate_attenuation", "correct_attenuation"]


def estimate_attenuation(stack: Any, **options: Any) -> Any:
    raise NotImplementedError("estimate_attenuation is not implemented yet")


def correct_attenuation(stack: Any, fit: Any, **options: Any) -> Any:
    raise NotImplementedError("correct_attenuation is not implemented yet")
