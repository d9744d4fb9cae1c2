"""An image with its axes, voxel size and metadata: what every job of stackdepth takes.

The reader builds a :class:`Stack` from a file, the docks from a napari layer,
scripts from an array; the job layer (:mod:`viewer_plugin.jobs`) takes one and
returns results together with the geometry of each output.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

__all__ = ["AXES", "UNITS", "Stack"]

#: Axis letters, in OME order (S: RGB samples).
AXES = "TCZYXS"
#: Unit of each axis letter's step.
UNITS = {"T": "s", "Z": "µm", "Y": "µm", "X": "µm"}


@dataclass
class Stack:
    """Pixels with their axes, step per axis, channel names and metadata.

    Attributes
    ----------
    data : ndarray or dask array
        Pixels, one axis per letter of *axes* (never modified by stackdepth).
    axes : str
        One letter per axis from "TCZYXS", e.g. "ZYX", "TZYX", "CZYX".
    scale : tuple of float
        Step per axis: µm for Z/Y/X, seconds for T, 1 for C and S.
    channel_names : list of str
        One name per channel (empty without a C axis).
    metadata : dict
        Key/value metadata (``metadata["truth"]`` for demo data).
    path : Path or None
        The file it came from, if any.
    name : str
        A short name for outputs (file stem or layer name).
    translate : tuple of float or None
        Position of the first voxel per axis, in the units of *scale*
        (``None``: all zero).
    """

    data: Any
    axes: str
    scale: tuple[float, ...]
    channel_names: list[str] = field(default_factory=list)
    metadata: dict[str, Any] = field(default_factory=dict)
    path: Path | None = None
    name: str = ""
    translate: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        if not self.name:
            self.name = self.path.name.split(".")[0] if self.path is not None else "image"
        if self.translate is None:
            self.translate = (0.0,) * len(self.axes)

    @property
    def units(self) -> tuple[str, ...]:
        """Unit per axis ("µm", "s" or "")."""
        return tuple(UNITS.get(a, "") for a in self.axes)

    def axis(self, letter: str) -> int | None:
        """Index of the axis *letter* (e.g. "Z"), or None when absent."""
        index = self.axes.find(letter.upper())
        return None if index < 0 else index

    def step(self, letter: str, default: float | None = None) -> float | None:
        """Step along axis *letter* (µm or s), or *default* when the axis is absent."""
        index = self.axis(letter)
        return default if index is None else float(self.scale[index])

    @property
    def truth(self) -> dict[str, Any] | None:
        """The demo's true parameters, when the stack is a synthetic demo (else None)."""
        truth = self.metadata.get("truth") if isinstance(self.metadata, dict) else None
        return truth if isinstance(truth, dict) else None

    @property
    def source(self) -> str:
        """Where the stack came from, for provenance: the file path or the name."""
        return str(self.path) if self.path is not None else self.name
