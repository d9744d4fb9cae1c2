"""Application of an attenuation fit to a stack (private).

The exponential and smooth models scale each slice about the detector
offset with the shared per-slice gains (:mod:`..primitives.gain`); the
quantile model maps each slice through its quantile lookup
(:mod:`..primitives.matching`), slice by slice through
:func:`..primitives.chunks.map_depth_blocks`. Either way the result is a new
float32 stack, filled z-chunk by z-chunk for numpy input and lazy for dask.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..._shared.progress import Progress
from ..primitives.chunks import map_depth_blocks
from ..primitives.gain import apply_gains, scale_block
from ..primitives.matching import apply_lookup
from . import models


def apply_correction(
    stack: Any,
    axis: int,
    gain: np.ndarray,
    offset: float,
    maps: tuple[np.ndarray, np.ndarray] | None,
    use_map: np.ndarray | None,
    progress: Progress,
) -> Any:
    """Corrected float32 copy of *stack* (numpy) or a lazy dask array.

    With *maps* (the quantile model), slices where *use_map* is true go
    through their quantile lookup and the others get their (capped) gain.
    """
    if maps is None:
        return apply_gains(stack, gain, offset, axis=axis, progress=progress)
    source, reference = maps

    def block_fn(src: np.ndarray, dst: np.ndarray, start: int) -> None:
        for local in range(src.shape[0]):
            index = start + local
            if use_map[index]:
                apply_lookup(src[local], models.slice_lookup(source[index], reference), dst[local])
            else:
                scale_block(src[local:local + 1], dst[local:local + 1], gain[index:index + 1], offset)

    return map_depth_blocks(stack, block_fn, axis=axis, progress=progress)
