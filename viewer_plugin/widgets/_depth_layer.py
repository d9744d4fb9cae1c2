"""Result layers that tell the depth under the cursor in napari's status bar.

napari shows the value of the layer under the cursor: for an RGB depth-colour
image that is three colour numbers, which say nothing of depth. A
:class:`DepthImage` is a napari image layer that keeps, beside its pixels,
the depth (µm) and peak value of every pixel of the projection it shows, and
adds them to its status text: "depth 23.5 ± 0.5 µm · peak 1520".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from napari.layers import Image

__all__ = ["DepthImage", "DepthLookup", "depth_text"]


@dataclass(frozen=True)
class DepthLookup:
    """Per-pixel depth and peak of a projection, shaped like its layer (without RGB samples).

    Attributes
    ----------
    depth_um : ndarray
        Depth in µm below the stack's first slice; NaN where there is no signal.
    peak : ndarray or None
        The maximum along each ray, in the stack's units.
    half_step_um : float or None
        Half the slice spacing: the rounding of a depth read from one slice
        (None for a depth averaged over slices, e.g. "weighted").
    """

    depth_um: np.ndarray
    peak: np.ndarray | None
    half_step_um: float | None


def depth_text(lookup: DepthLookup, index: tuple[int, ...]) -> str:
    """The status text of pixel *index*: its depth (with its rounding) and peak value."""
    depth = float(lookup.depth_um[index])
    if math.isfinite(depth):
        spread = "" if lookup.half_step_um is None else f" \u00b1 {lookup.half_step_um:.3g}"
        text = f"depth {depth:.4g}{spread} \u00b5m"
    else:
        text = "depth: no signal"
    if lookup.peak is not None:
        text += f" \u00b7 peak {float(lookup.peak[index]):.6g}"
    return text


class DepthImage(Image):
    """A napari image layer whose status text adds the depth and peak under the cursor.

    It behaves as, and is saved as, an ordinary image layer; ``depth_lookup``
    (a :class:`DepthLookup` or None) holds the numbers the status text reads.
    """

    depth_lookup: DepthLookup | None = None

    @property
    def _type_string(self) -> str:  # saved, listed and written like any image layer
        return "image"

    def get_status(self, position: Any = None, *, view_direction: Any = None,
                   dims_displayed: Any = None, world: bool = False, value: Any = None) -> dict:
        status = super().get_status(position, view_direction=view_direction,
                                    dims_displayed=dims_displayed, world=world, value=value)
        lookup = self.depth_lookup
        if lookup is None or position is None:
            return status
        point = np.asarray(position, dtype=float)[-self.ndim:]
        if world:
            point = np.asarray(self.world_to_data(point), dtype=float)
        index = tuple(int(round(v)) for v in point)
        shape = lookup.depth_um.shape
        if len(index) != len(shape) or not all(0 <= i < n for i, n in zip(index, shape)):
            return status
        text = depth_text(lookup, index)
        status["value"] = f"{status['value']}  {text}".strip() if status.get("value") else text
        status["coordinates"] = f"{status.get('coords', '')}: {status['value']}"
        return status
