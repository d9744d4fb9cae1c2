"""Helpers shared by the bleaching kernels (private)."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["frozen", "frozen_bool", "r_squared"]


def frozen(values: np.ndarray) -> np.ndarray:
    """A read-only float64 copy of *values* (results never share memory with the caller)."""
    out = np.array(values, dtype=np.float64)
    out.setflags(write=False)
    return out


def frozen_bool(values: np.ndarray) -> np.ndarray:
    """A read-only boolean copy of *values*."""
    out = np.array(values, dtype=bool)
    out.setflags(write=False)
    return out


def r_squared(y: np.ndarray, rss: float) -> float:
    tss = float(np.sum((y - y.mean()) ** 2))
    return 1.0 - rss / tss if tss > 0 else math.nan
