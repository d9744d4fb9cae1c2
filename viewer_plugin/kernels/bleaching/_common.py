"""Helpers shared by the bleaching kernels (private)."""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["frozen", "frozen_bool", "plain_fields"]


def frozen(values: np.ndarray) -> np.ndarray:
    """A read-only float64 copy of *values* (results never share memory with the caller)."""
    out = np.array(values, dtype=np.float64)
    out.setflags(write=False)
    return out


def plain_fields(result: Any) -> dict[str, Any]:
    """Every dataclass field of *result*, arrays as lists (for JSON reports)."""
    out = {}
    for name in result.__dataclass_fields__:
        value = getattr(result, name)
        out[name] = value.tolist() if isinstance(value, np.ndarray) else value
    return out


def frozen_bool(values: np.ndarray) -> np.ndarray:
    """A read-only boolean copy of *values*."""
    out = np.array(values, dtype=bool)
    out.setflags(write=False)
    return out

