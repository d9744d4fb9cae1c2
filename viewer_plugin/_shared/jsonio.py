"""JSON for reports, sidecars and file metadata (part of the shared foundation).

JSON has no infinity or NaN: :func:`to_jsonable` stores them as ``null``
(every report says so in its ``null_means`` entry); numpy scalars and arrays
become plain numbers and lists, paths become strings.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np

from .atomic import atomic_write

__all__ = ["to_jsonable", "dumps", "write_json"]


def to_jsonable(value: Any) -> Any:
    """*value* as plain JSON types: numpy to Python, inf/NaN to None, paths to str.

    Examples
    --------
    >>> to_jsonable({"a": np.float32(1.5), "b": [np.inf, 2]})
    {'a': 1.5, 'b': [None, 2]}
    """
    if isinstance(value, dict):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return to_jsonable(value.tolist())
    if isinstance(value, np.generic):
        return to_jsonable(value.item())
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, Path):
        return str(value)
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    return str(value)


def dumps(payload: Any, *, indent: int | None = None) -> str:
    """JSON text of *payload* through :func:`to_jsonable` (never NaN or Infinity)."""
    return json.dumps(to_jsonable(payload), indent=indent, allow_nan=False, ensure_ascii=False)


def write_json(path: str | Path, payload: Any) -> Path:
    """Write *payload* as indented JSON, atomically (inf/NaN become null)."""
    text = dumps(payload, indent=2)
    return atomic_write(Path(path), lambda tmp: tmp.write_text(text + "\n", encoding="utf-8"))
