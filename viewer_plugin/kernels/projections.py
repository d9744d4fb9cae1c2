"""Projections along the depth axis (placeholder; filled by the projections issue)."""

from __future__ import annotations

from typing import Any

__all__ = ["brightest_point", "depth_coded_projection", "blended_projection", "depth_legend"]


def brightest_point(stack: Any, *, axis: int = 0) -> Any:
    raise NotImplementedError("brightest_point is not implemented yet")


def depth_coded_projection(stack: Any, **options: Any) -> Any:
    raise NotImplementedError("depth_coded_projection is not implemented yet")


def blended_projection(stack: Any, **options: Any) -> Any:
    raise NotImplementedError("blended_projection is not implemented yet")


def depth_legend(*args: Any, **options: Any) -> Any:
    raise NotImplementedError("depth_legend is not implemented yet")
