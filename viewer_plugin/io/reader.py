"""napari reader hook: OME-TIFF / TIFF files and OME-Zarr folders -> image layers (one per channel).

OME-Zarr images open lazily as multiscale layers (every pyramid level, coarsest
last); their contrast limits come from the coarsest level, so opening reads no
full-resolution chunk.
"""

from __future__ import annotations

import logging
import os
from pathlib import Path
from typing import Any, Callable

import numpy as np

from .._shared.stack import Stack
from .dispatch import read_stack
from .omezarr import is_ome_zarr, read_ome_zarr_levels

logger = logging.getLogger(__name__)

_SUFFIXES = (".tif", ".tiff")

LayerData = tuple[Any, dict[str, Any], str]


def napari_get_reader(path: str | list[str]) -> Callable[[Any], list[LayerData]] | None:
    """Return a reader for TIFF files and OME-Zarr folders, or None (quickly) for anything else."""
    paths = [path] if isinstance(path, (str, Path)) else list(path)
    if not paths or not all(_is_tiff(p) or _is_ome_zarr(p) for p in paths):
        return None
    return read_layers


def _is_tiff(path: Any) -> bool:
    return str(path).lower().endswith(_SUFFIXES)


def _is_ome_zarr(path: Any) -> bool:
    text = os.fspath(path).rstrip("/\\")
    return text.lower().endswith(".zarr") and is_ome_zarr(text)


def read_layers(path: str | list[str]) -> list[LayerData]:
    """Read one or more files or OME-Zarr folders into napari layer-data tuples."""
    paths = [path] if isinstance(path, (str, Path)) else list(path)
    layers: list[LayerData] = []
    for one in paths:
        if _is_ome_zarr(one):
            levels = read_ome_zarr_levels(os.fspath(one).rstrip("/\\"))
            layers.extend(stack_to_layers(levels[0], levels=[level.data for level in levels]))
        else:
            layers.extend(stack_to_layers(read_stack(one)))
    return layers


def stack_to_layers(stack: Stack, *, name: str | None = None,
                    levels: list[Any] | None = None) -> list[LayerData]:
    """Split a :class:`Stack` into image layers, one per channel.

    Layers carry ``scale`` in um (and s), ``translate`` (when not zero), ``axis_labels``,
    ``units`` and, in
    ``metadata``, the source path, the axes and our stored key/value metadata
    (e.g. ``truth`` for demo files).

    Parameters
    ----------
    stack : Stack
        The image (full resolution).
    name : str, optional
        Layer name stem (default: the file name without extensions).
    levels : list of arrays, optional
        Resolution levels of the same axes, full resolution first: the layers
        become multiscale, with contrast limits from the coarsest level.
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
    if stack.translate is not None and any(stack.translate):
        common["translate"] = tuple(float(stack.translate[i]) for i in keep)
    meta = {k: v for k, v in stack.metadata.items() if k != "ome_zarr"}
    meta.update({"source_path": str(stack.path) if stack.path else None, "axes": axes})
    pyramid = list(levels) if levels is not None else [stack.data]
    if channel < 0:
        return [(_layer_data(pyramid, ()), {**common, **_display(pyramid, (), levels),
                                            "name": base, "metadata": meta}, "image")]
    out = []
    for c, channel_name in enumerate(stack.channel_names):
        index = (slice(None),) * channel + (c,)
        out.append((_layer_data(pyramid, index),
                    {**common, **_display(pyramid, index, levels), "name": f"{base} [{channel_name}]",
                     "metadata": {**meta, "channel": channel_name}, "blending": "additive",
                     "colormap": _CHANNEL_COLOURS[c % len(_CHANNEL_COLOURS)]},
                    "image"))
    return out


def _layer_data(pyramid: list[Any], index: tuple[Any, ...]) -> Any:
    parts = [level[index] if index else level for level in pyramid]
    return parts if len(parts) > 1 else parts[0]


def _display(pyramid: list[Any], index: tuple[Any, ...], levels: list[Any] | None) -> dict[str, Any]:
    """Multiscale flag and contrast limits from the coarsest level (OME-Zarr layers only)."""
    if levels is None:
        return {}
    coarsest = pyramid[-1][index] if index else pyramid[-1]
    if len(pyramid) == 1:  # no pyramid: look at the middle plane only, not the whole level
        lead = coarsest.ndim - 2
        coarsest = coarsest[tuple(n // 2 for n in coarsest.shape[:lead])]
    values = np.asarray(coarsest.compute() if hasattr(coarsest, "compute") else coarsest)
    low, high = (float(values.min()), float(values.max())) if values.size else (0.0, 1.0)
    return {"multiscale": len(pyramid) > 1, "contrast_limits": (low, high if high > low else low + 1)}


_CHANNEL_COLOURS = ("green", "magenta", "cyan", "yellow", "gray")
