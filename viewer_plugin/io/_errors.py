"""The one exception for files that cannot be read (shared by the TIFF and OME-Zarr readers)."""

from __future__ import annotations

__all__ = ["StackReadError"]


class StackReadError(ValueError):
    """A file could not be read as an image stack (message names file and problem)."""
