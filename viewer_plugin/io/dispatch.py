"""One entry point for every stack file stackdepth reads: TIFF files and OME-Zarr folders."""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

from .._shared.stack import Stack
from . import ometiff
from .omezarr import is_ome_zarr, read_ome_zarr

__all__ = ["read_stack", "is_zarr_path"]


def is_zarr_path(path: str | os.PathLike[str]) -> bool:
    """True for a folder, or a name ending in ``.zarr`` (OME-Zarr images are folders)."""
    text = os.fspath(path).rstrip("/\\")
    return text.lower().endswith(".zarr") or Path(text).is_dir() or is_ome_zarr(text)


def read_stack(path: str | os.PathLike[str], *, lazy: bool | None = None) -> Stack:
    """Read an OME-TIFF / TIFF file or an OME-Zarr folder with its voxel size.

    Parameters
    ----------
    path : str or path-like
        A TIFF file, or an OME-Zarr image folder (``.ome.zarr``, ``.zarr``).
    lazy : bool or None
        TIFF: as :func:`viewer_plugin.io.ometiff.read_stack` (``None`` loads
        files up to 2 GiB). OME-Zarr: always a dask array of the full
        resolution level unless ``lazy=False``, which loads it.

    Returns
    -------
    Stack
        Pixels in the file's dtype, axes, scale in µm (and s), channel names, metadata.

    Raises
    ------
    StackReadError
        When the file or folder is missing, of another kind, truncated or unreadable.
    """
    if is_zarr_path(path):
        stack = read_ome_zarr(Path(os.fspath(path).rstrip("/\\")))
        if lazy is False:
            stack = dataclasses.replace(stack, data=stack.data.compute())
        return stack
    return ometiff.read_stack(path, lazy=lazy)
