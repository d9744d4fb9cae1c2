"""Projections of a z-stack along its depth axis.

* :func:`peak_projection` -- maximum-intensity projection, the index of the
  slice holding each maximum and its depth in µm;
* :func:`depth_coded_projection` -- an RGB image whose colour tells the depth
  and whose brightness tells the intensity (three ways to pick the depth);
* :func:`occlusion_projection` -- emission-absorption compositing (Max 1995),
  where structures in front partly hide those behind them;
* :func:`depth_legend` -- the key of a depth-coded image (a colour bar of
  depth, or depth x brightness with ``brightness_steps``);
* :func:`depth_colours`, :func:`display_limits` -- the per-slice colours and
  default display limits the projections use;
* :func:`depth_along_path` -- depth and peak sampled along a path drawn on a
  peak projection, with the path's planar and 3-D lengths (:class:`PathProfile`);
* :func:`turn_volume`, :func:`turned_view`, :func:`turning_views`,
  :func:`series_views` -- views from angles about one axis (the stack
  resampled to cubic voxels) and top views of a series, rendered by the
  projections above with one display range for all frames;
* :func:`slab_bounds`, :func:`offset_depths` -- the slices of a slab around
  one slice, and a slab's projection with depths counted in the whole stack.

Every projection is a chunk -> combine -> aggregate reduction over depth
(:mod:`.reduction`), its per-pixel state folded by compiled loops
(:mod:`._compiled`):

* a numpy stack is folded in place, z-chunk after z-chunk, into one state of
  the whole image, with progress between chunks and no float copy of the
  stack;
* a dask stack (any chunking) becomes one dask graph (:mod:`.graph`): each
  group of neighbouring blocks is folded into a partial state by its own
  task, with global slice indices; the partials of each lateral tile are
  combined in a tree, in depth order; the tile states are assembled and
  aggregated into the result. The graph is computed once, with the active
  scheduler (a ``dask.distributed`` client runs the blocks on its workers),
  and progress counts the fold tasks as they finish.

Call :func:`warm_up` once, e.g. in a background thread, to compile (or load
from the on-disk cache) before the first use.
"""

from __future__ import annotations

import numpy as np

from .colour import CONSTANT_LIGHTNESS, DEFAULT_CMAP, depth_colours
from .depth_colour import METHODS, RECOLOURABLE, DepthCodedProjection, depth_coded_projection
from .legend import DepthLegend, depth_legend
from .limits import CLIM_PERCENTILES, display_limits
from .occlusion import DEFAULT_OPTICAL_DEPTH, VIEWS, default_density, occlusion_projection
from .path import PathProfile, depth_along_path
from .peak import PeakProjection, peak_projection
from .reduction import combine_peak
from .slab import offset_depths, slab_bounds, slab_depth_range
from .turn import (
    MAX_SIDE,
    TURN_AXES,
    TURN_METHODS,
    TurnVolume,
    Views,
    series_views,
    turn_volume,
    turned_view,
    turning_views,
)

__all__ = [
    "CLIM_PERCENTILES",
    "CONSTANT_LIGHTNESS",
    "DEFAULT_CMAP",
    "DEFAULT_OPTICAL_DEPTH",
    "MAX_SIDE",
    "METHODS",
    "TURN_AXES",
    "TURN_METHODS",
    "RECOLOURABLE",
    "VIEWS",
    "DepthCodedProjection",
    "DepthLegend",
    "PathProfile",
    "PeakProjection",
    "TurnVolume",
    "Views",
    "default_density",
    "depth_along_path",
    "depth_coded_projection",
    "depth_colours",
    "depth_legend",
    "display_limits",
    "occlusion_projection",
    "offset_depths",
    "peak_projection",
    "series_views",
    "slab_bounds",
    "slab_depth_range",
    "turn_volume",
    "turned_view",
    "turning_views",
    "warm_up",
]


def warm_up() -> None:
    """Compile (or load from numba's disk cache) the kernels for common dtypes.

    Runs every projection on tiny uint16, uint8 and float32 stacks. Takes
    tens of seconds the very first time on a machine and well under a second
    once cached; widgets call it in a background thread at start-up.

    Returns
    -------
    None

    Raises
    ------
    Exception
        Only if numba cannot compile on this machine (a broken installation);
        never for user input.

    References
    ----------
    .. [1] numba documentation, "Cache compiled functions" (``cache=True``).

    Examples
    --------
    >>> warm_up()
    """
    depth_legend((0.0, 1.0), brightness_steps=2)  # the 2-D key's colouring step
    for dtype in (np.uint16, np.uint8, np.float32):  # the commonest microscopy dtype first
        tiny = np.zeros((3, 4, 8), dtype)
        tiny[1, 1, 1] = 1
        result = peak_projection(tiny)
        partial = (result.peak, result.index)
        combine_peak(partial, partial)  # the combine of dask partials
        for method in METHODS:
            depth_coded_projection(tiny, method=method, clim=(0, 1))
        for density in (0.1, 1.0):  # optically thin slices (the default on most stacks), thick
            occlusion_projection(tiny, clim=(0, 1), density=density)
            occlusion_projection(tiny, clim=(0, 1), density=density, cmap="viridis")
