"""Reading and writing OME-TIFF and TIFF stacks (no GUI)."""

from .ometiff import StackData, StackReadError, read_stack, write_ome_tiff

__all__ = ["StackData", "StackReadError", "read_stack", "write_ome_tiff"]
