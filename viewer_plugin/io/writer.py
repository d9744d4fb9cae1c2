"""napari writer hook: an image layer -> OME-TIFF with its voxel size."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from .ometiff import write_ome_tiff


def layer_axes(ndim: int, labels: Any = None, *, rgb: bool = False) -> str:
    """OME axis letters for a layer of *ndim* dims (from its labels when they are t/c/z/y/x)."""
    if labels is not None:
        letters = "".join(str(label).upper()[:1] for label in labels)
        if len(letters) == ndim and len(set(letters)) == ndim and set(letters) <= set("TCZYX"):
            return letters + ("S" if rgb else "")
    default = {2: "YX", 3: "ZYX", 4: "TZYX", 5: "TCZYX"}.get(ndim)
    if default is None:
        raise ValueError(f"layer: expected 2 to 5 dimensions, got {ndim}")
    return default + ("S" if rgb else "")


def write_image_layer(path: str, data: Any, meta: dict[str, Any]) -> list[str]:
    """Save an image layer as OME-TIFF, keeping its scale as voxel size.

    napari's save dialog asks before replacing an existing file, so this hook
    replaces it (atomically: temp file, then rename).
    """
    rgb = bool(meta.get("rgb", False))
    ndim = data.ndim - (1 if rgb else 0)
    axes = layer_axes(ndim, meta.get("axis_labels"), rgb=rgb)
    scale = tuple(float(s) for s in meta.get("scale", (1.0,) * ndim)) + ((1.0,) if rgb else ())
    extra = {k: v for k, v in (meta.get("metadata") or {}).items() if k in ("truth", "provenance")}
    if not str(path).lower().endswith((".tif", ".tiff")):
        path = f"{path}.ome.tif"
    written = write_ome_tiff(Path(path), data, axes=axes, scale=scale, metadata=extra or None,
                             overwrite=True)
    return [str(written)]
