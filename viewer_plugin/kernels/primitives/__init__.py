"""Primitives the feature kernels share: background statistics and chunk planning.

Every primitive is written once here and imported by the projection,
attenuation and bleaching kernels; this package imports none of them.
"""

from .background import Background, background_level, clipped_rows, slice_background

__all__ = ["Background", "background_level", "clipped_rows", "slice_background"]
