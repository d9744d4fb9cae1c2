"""Reading and writing image stacks: OME-TIFF / TIFF files and OME-Zarr folders (no GUI)."""

from .dispatch import read_stack
from .ometiff import Stack, StackData, StackReadError, write_ome_tiff
from .omezarr import is_ome_zarr, read_ome_zarr, read_ome_zarr_levels
from .omezarr_write import convert_to_ome_zarr, default_chunks, write_ome_zarr

__all__ = ["Stack", "StackData", "StackReadError", "read_stack", "write_ome_tiff",
           "is_ome_zarr", "read_ome_zarr", "read_ome_zarr_levels", "write_ome_zarr",
           "convert_to_ome_zarr", "default_chunks"]
