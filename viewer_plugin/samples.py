"""napari sample-data hooks: the synthetic fibre-slab scenario (see :mod:`viewer_plugin.demo`)."""

from __future__ import annotations

from typing import Any

import numpy as np

from .demo import DemoStack, bleach_series, fibre_slab, two_pass_pair

LayerData = tuple[Any, dict[str, Any], str]


def demo_layer(stack: DemoStack) -> LayerData:
    """A napari image-layer tuple for a demo stack, its truth in the metadata."""
    units = tuple({"T": "s"}.get(a, "µm") for a in stack.axes)
    return (
        stack.data,
        {
            "name": stack.name,
            "scale": stack.scale,
            "axis_labels": tuple(a.lower() for a in stack.axes),
            "units": units,
            "metadata": {"truth": stack.truth, "axes": stack.axes},
            "contrast_limits": _contrast(stack),
        },
        "image",
    )


def _contrast(stack: DemoStack) -> tuple[float, float]:
    """Offset to the 99.9th percentile: fibres visible, background dark."""
    sample = stack.data[..., ::2, ::2]
    return float(stack.truth["detector_offset"]), float(np.percentile(sample, 99.9))


def sample_fibre_slab() -> list[LayerData]:
    """The single z-stack "fibre slab" (60 slices, 0.3 x 0.3 x 1 um voxels)."""
    return [demo_layer(fibre_slab())]


def sample_bleach_series() -> list[LayerData]:
    """A 20-time-point series of a smaller slab, bleaching between time points."""
    return [demo_layer(bleach_series())]


def sample_two_pass() -> list[LayerData]:
    """The same slab acquired forward and then deepest-first."""
    return [demo_layer(s) for s in two_pass_pair()]
