"""napari reader hook: OME-TIFF and plain TIFF -> image layers (one per channel)."""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Any, Callable

from .ometiff import StackData, read_stack

logger = logging.getLogger(__name__)

_SUFFIXES = (".tif", ".tiff")

LayerData = tuple[Any, dict[str, Any], str]


def napari_get_reader(path: str | list[str]) -> Callable[[Any], list[LayerData]] | None:
    """Return a reader for TIFF files, or None (quickly) for anything else."""
    paths = [path] if isinstance(path, (str, Path)) else list(path)
    if not paths or not all(str(p).lower().endswith(_SUFFIXES) for p in paths):
        return None
    return read_layers


def read_layers(path: str | list[str]) -> list[LayerData]:
    """Read one or more files into napari layer-data tuples."""
    paths = [path] if isinstance(path, (str, Path)) else list(path)
    layers: list[LayerData] = []
    for one in paths:
        layers.extend(stack_to_layers(read_stack(one)))
    return layers


def stack_to_layers(stack: StackData, *, name: str | None = None) -> list[LayerData]:
    """Split a :class:`StackData` into image layers, one per channel.

    Layers carry ``scale`` in um (and s), ``axis_labels``, ``units`` and, in
    ``metadata``, the source path, the axes and our stored key/value metadata
    (e.g. ``truth`` for demo files).
    """
    base = name or (stack.path.name.split(".")[0] if stack.path else "image")
    rgb = stack.axes.endswith("S")
    spatial_axes = stack.axes[:-1] if rgb else stack.axes
    channel = spatial_axes.find("C")
    keep = [i for i, a in enumerate(spatial_axes) if a != "C"]
    axes = "".join(spatial_axes[i] for i in keep)
    units = tuple({"T": "s", "Z": "µm", "Y": "µm", "X": "µm"}.get(a, "pixel") for a in axes)
    common = {
        "scale": tuple(stack.scale[i] for i in keep),
        "axis_labels": tuple(a.lower() for a in axes),
        "units": units,
        "rgb": rgb,
    }
    meta = {**stack.metadata, "source_path": str(stack.path) if stack.path else None, "axes": axes}
    if channel < 0:
        return [(stack.data, {**common, "name": base, "metadata": meta}, "image")]
    out = []
    for c, channel_name in enumerate(stack.channel_names):
        index = tuple(c if i == channel else slice(None) for i in range(stack.data.ndim))
        out.append((stack.data[index],
                    {**common, "name": f"{base} [{channel_name}]", "metadata": {**meta, "channel": channel_name},
                     "blending": "additive", "colormap": _CHANNEL_COLOURS[c % len(_CHANNEL_COLOURS)]},
                    "image"))
    return out


_CHANNEL_COLOURS = ("green", "magenta", "cyan", "yellow", "gray")
