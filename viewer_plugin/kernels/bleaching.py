"""Photobleaching (placeholder; filled by the bleaching issue)."""

from __future__ import annotations

from typing import Any

__all__ = ["estimate_bleaching", "correct_bleaching", "separate_bleaching"]


def estimate_bleaching(series: Any, **options: Any) -> Any:
    raise NotImplementedError("estimate_bleaching is not implemented yet")


def correct_bleaching(series: Any, report: Any, **options: Any) -> Any:
    raise NotImplementedError("correct_bleaching is not implemented yet")


def separate_bleaching(forward: Any, reverse: Any, **options: Any) -> Any:
    raise NotImplementedError("separate_bleaching is not implemented yet")
