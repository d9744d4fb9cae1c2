"""OME-TIFF reading and writing (being written by the foundation issue)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any


class StackReadError(ValueError):
    """A file could not be read as an image stack (message names file and problem)."""


@dataclass
class StackData:
    """An image read from a file.

    Attributes
    ----------
    data : ndarray or dask array
        Pixels, axes as in *axes* (channels included when present).
    axes : str
        One letter per axis of *data*, from "TCZYX" (e.g. "ZYX", "TZYX", "CZYX").
    scale : tuple of float
        Step per axis: um for Z/Y/X, seconds for T, 1 for C.
    channel_names : list of str
    metadata : dict
        Extra key/value metadata, e.g. ``metadata["truth"]`` for the demo data.
    path : Path or None
    """

    data: Any
    axes: str
    scale: tuple[float, ...]
    channel_names: list[str] = field(default_factory=list)
    metadata: dict[str, Any] = field(default_factory=dict)
    path: Path | None = None


def read_stack(path: str | Path) -> StackData:
    raise NotImplementedError


def write_ome_tiff(path: str | Path, data: Any, *, axes: str, scale: tuple[float, ...],
                   channel_names: list[str] | None = None, metadata: dict[str, Any] | None = None,
                   overwrite: bool = False) -> Path:
    raise NotImplementedError
