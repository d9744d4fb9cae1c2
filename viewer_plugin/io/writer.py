"""napari writer hooks: an image layer -> OME-TIFF or OME-Zarr with its voxel size."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from .ometiff import write_ome_tiff
from .omezarr_write import write_ome_zarr


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


def _layer_geometry(data: Any, meta: dict[str, Any]) -> tuple[Any, str, tuple[float, ...], dict[str, Any]]:
    """Full-resolution data, axes, scale and the metadata worth keeping (truth, provenance) of a layer."""
    if meta.get("multiscale"):
        data = data[0]
    rgb = bool(meta.get("rgb", False))
    ndim = data.ndim - (1 if rgb else 0)
    axes = layer_axes(ndim, meta.get("axis_labels"), rgb=rgb)
    scale = tuple(float(s) for s in meta.get("scale", (1.0,) * ndim)) + ((1.0,) if rgb else ())
    extra = {k: v for k, v in (meta.get("metadata") or {}).items() if k in ("truth", "provenance")}
    return data, axes, scale, extra


def write_image_layer(path: str, data: Any, meta: dict[str, Any]) -> list[str]:
    """Save an image layer as OME-TIFF, keeping its scale as voxel size.

    napari's save dialog asks before replacing an existing file, so this hook
    replaces it (atomically: temp file, then rename).
    """
    data, axes, scale, extra = _layer_geometry(data, meta)
    if not str(path).lower().endswith((".tif", ".tiff")):
        path = f"{path}.ome.tif"
    written = write_ome_tiff(Path(path), data, axes=axes, scale=scale, metadata=extra or None,
                             overwrite=True)
    return [str(written)]


def write_image_layer_ome_zarr(path: str, data: Any, meta: dict[str, Any]) -> list[str]:
    """Save an image layer as a multiscale OME-Zarr folder (NGFF 0.4), keeping its scale.

    A multiscale layer is saved from its full-resolution level. An existing
    folder is never replaced from napari (a folder may hold a whole dataset):
    choose a new name.
    """
    data, axes, scale, extra = _layer_geometry(data, meta)
    if axes.endswith("S"):
        raise ValueError("layer: RGB layers cannot be saved as OME-Zarr; save them as OME-TIFF")
    if not str(path).lower().endswith(".zarr"):
        path = f"{path}.ome.zarr"
    written = write_ome_zarr(Path(path), data, axes=axes, scale=scale, metadata=extra or None)
    return [str(written)]
