"""Colour tables of the depth-coded projections: lookup as matplotlib does, colour per slice.

The depth-coded images show depth by colour and signal by brightness. A
colour table whose own lightness changes along depth (viridis: CIELAB L* 15
to 91) mixes depth into brightness; the default tables therefore keep
lightness constant along depth: Kovesi's isoluminant maps CET-I1, CET-I3 and
CET-I2 (CIELAB L* constant to about 1 unit), taken from the ``colorcet``
package. matplotlib names keep meaning matplotlib's maps.
"""

from __future__ import annotations

from typing import Any, Optional

import numpy as np

from ..._shared.validation import check_int, check_number, fail
from ._common import resolve_depth_range

__all__ = ["CONSTANT_LIGHTNESS", "DEFAULT_CMAP", "depth_colours", "lut_index", "resolve_lut",
           "slice_colours"]

#: Colour tables of constant lightness along depth (P. Kovesi, "Good colour maps: how to
#: design them", arXiv:1509.03700, 2015; the ``colorcet`` package): CET-I1 cyan-green-orange
#: (CIELAB L* 70), CET-I3 cyan-magenta (L* 70), CET-I2 the lighter cyan-green-orange (L* 79-80).
CONSTANT_LIGHTNESS = ("CET-I1", "CET-I3", "CET-I2")
#: The default colour table of depth: constant lightness, so brightness shows only the signal;
#: its two ends stay 43.9 CAM02-UCS units apart under simulated deuteranopia.
DEFAULT_CMAP = "CET-I1"

_NAME_HELP = ("a colour map name (" + ", ".join(CONSTANT_LIGHTNESS)
              + " or a matplotlib name such as 'viridis') or an (N, 3) array")


def _named_table(name: str, arg: str) -> Any:
    """The Colormap of a constant-lightness name (colorcet) or of a matplotlib name."""
    if name in CONSTANT_LIGHTNESS:
        import colorcet

        return colorcet.cm[name.replace("-", "_")]
    import matplotlib

    try:
        return matplotlib.colormaps[name]
    except KeyError:
        fail(arg, _NAME_HELP, name)


def resolve_lut(cmap: Any, *, name: str = "cmap") -> np.ndarray:
    """An (N, 3) float64 colour table from a name, a matplotlib Colormap or an array.

    Names are those of :data:`CONSTANT_LIGHTNESS` (from ``colorcet``) or
    matplotlib's. A colormap gives its own N entries, ``cmap(arange(N))[:, :3]``,
    so that :func:`lut_index` reproduces ``cmap(t)`` exactly.
    """
    if isinstance(cmap, str):
        cmap = _named_table(cmap, name)
    if hasattr(cmap, "N") and callable(cmap):
        return np.ascontiguousarray(cmap(np.arange(int(cmap.N)))[:, :3], dtype=np.float64)
    try:
        table = np.asarray(cmap, dtype=np.float64)
    except (TypeError, ValueError):
        fail(name, _NAME_HELP, cmap)
    if table.ndim != 2 or table.shape[1] != 3 or table.shape[0] < 1:
        fail(name, _NAME_HELP, table)
    if not np.all(np.isfinite(table)) or table.min() < 0 or table.max() > 1:
        fail(name, "colour values in [0, 1]", f"<values from {np.nanmin(table)} to {np.nanmax(table)}>")
    return table.copy()


def lut_index(t: Any, n: int) -> np.ndarray:
    """Colour-table index of positions *t* (clipped to [0, 1]), as matplotlib.

    ``floor(t * n)``, with t == 1 mapped to the last entry.
    """
    t = np.clip(np.asarray(t, dtype=np.float64), 0.0, 1.0)
    return np.minimum((t * n).astype(np.int64), n - 1)


def slice_colours(lut: np.ndarray, n: int, z_step: float, depth_range: tuple) -> np.ndarray:
    """Colour of every slice (its depth ``z * z_step`` mapped through *lut*)."""
    d0, d1 = depth_range
    t = (np.arange(n, dtype=np.float64) * z_step - d0) / (d1 - d0)
    return np.ascontiguousarray(lut[lut_index(t, lut.shape[0])])


def depth_colours(
    n_slices: int,
    *,
    z_step: float = 1.0,
    cmap: Any = DEFAULT_CMAP,
    depth_range: Optional[tuple[float, float]] = None,
) -> np.ndarray:
    """Colour of every slice, as the depth-coded projections use it.

    Slice ``z`` sits at depth ``z * z_step`` µm; its colour is the colour
    table's entry for ``(depth - d0) / (d1 - d0)`` clipped to [0, 1] (entry
    ``floor(t * N)``, matplotlib's rule). These are the colours of
    ``depth_coded_projection(method="tinted")`` (before gamma) and of
    ``occlusion_projection(cmap=...)``; a side view of a blended projection,
    whose rays run at one depth, is its grey image times these colours.

    Parameters
    ----------
    n_slices : int
        Number of slices (>= 1).
    z_step : float, optional
        Slice spacing in µm (> 0).
    cmap : str, matplotlib Colormap or array of shape (N, 3), optional
        Colour table (default :data:`DEFAULT_CMAP`, constant lightness).
    depth_range : (float, float), optional
        (d0, d1) in µm; default the first to the last slice.

    Returns
    -------
    ndarray of float64, shape (n_slices, 3)
        RGB in [0, 1].

    Raises
    ------
    ParameterError
        For n_slices < 1, z_step <= 0, an unknown colour table or d1 <= d0.

    References
    ----------
    .. [1] matplotlib documentation, ``Colormap.__call__`` (lookup of a
       position in [0, 1]).

    Examples
    --------
    >>> depth_colours(3, z_step=2.0, cmap=np.array([[1.0, 0, 0], [0, 0, 1.0]]))
    array([[1., 0., 0.],
           [0., 0., 1.],
           [0., 0., 1.]])
    """
    n = check_int(n_slices, name="n_slices", low=1)
    z_step = check_number(z_step, name="z_step", low=0.0, low_open=True)
    lut = resolve_lut(cmap)
    return slice_colours(lut, n, z_step, resolve_depth_range(depth_range, n, z_step))
