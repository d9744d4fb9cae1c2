"""Reading and writing OME-TIFF and TIFF stacks (no GUI)."""

from .ometiff import Stack, StackData, StackReadError, read_stack, write_ome_tiff

__all__ = ["Stack", "StackData", "StackReadError", "read_stack", "write_ome_tiff"]
