"""The words of a figure: what each projection shows, its caveat, its methods sentence."""

from __future__ import annotations

from typing import Any, Mapping, Sequence

from .. import __version__

__all__ = ["CAVEAT", "DEPTH_MAP_CAVEAT", "METHOD_WORDS", "RENDERING_CAVEAT", "RENDERING_NOTE",
           "methods_sentence"]

#: What each projection method shows, in the words of a methods section.
METHOD_WORDS = {
    "peak": "each pixel shows the depth of its strongest voxel along the optical axis, "
            "with brightness from that voxel's intensity",
    "weighted": "each pixel shows the intensity-weighted mean depth of the signal above the "
                "background level along the optical axis, with brightness from the maximum "
                "intensity",
    "tinted": "every slice was tinted with the colour of its depth and the tinted slices were "
              "combined by maximum-intensity projection, the display range applied after the "
              "maximum",
    "occlusion": "each voxel emits and absorbs light in proportion to its scaled intensity "
                 "(the emission\u2013absorption model of volume rendering, Max 1995), the slices "
                 "composited front to back, so that nearer structures partly hide deeper ones",
    "max": "each pixel shows the depth below the first slice of the slice holding the maximum "
           "intensity along the optical axis, the shallowest one on ties",
}

CAVEAT = ("Brightness is relative (display contrast), not a calibrated intensity; colours give "
          "depth relative to the first slice of the stack.")
#: What a figure of the peak depth map does not show.
DEPTH_MAP_CAVEAT = ("Depths are relative to the first slice of the stack; where a line of sight "
                    "holds no signal, its depth is that of the strongest noise.")
#: What a figure of the occlusion projection does not show.
RENDERING_CAVEAT = ("The occlusion image is a rendering for showing, not a measurement: its "
                    "brightness is not an intensity, and its absorption is derived from the "
                    "signal itself, not from the sample's optical attenuation.")
#: The line printed under an occlusion figure.
RENDERING_NOTE = ("A rendering for showing, not a measurement (emission\u2013absorption model, "
                  "Max 1995); brightness is not an intensity.")


def _fmt(value: float) -> str:
    return f"{value:.3g}"


#: The display range when none was recorded.
_AUTOMATIC = "between the 0.1 and 99.9 percentiles of the intensity"


def methods_sentence(parameters: Mapping[str, Any], *, legend_range: Sequence[float] | None = None) -> str:
    """A methods sentence describing the figure of a projection.

    Parameters
    ----------
    parameters : mapping
        Keys used when present: ``method`` (default "peak"), ``depth_range_um``,
        ``z_step_um``, ``voxel_size_um``; depth-coded methods: ``cmap``,
        ``gamma``, ``clim`` (None = automatic), ``clim_used``,
        ``weight_floor``; "max": ``depth_map_cmap``, ``blank_at_or_below``;
        "occlusion": ``density_per_um``, ``view``, ``cmap``, ``clim``, ``clim_used``.
    legend_range : pair of float, optional
        Depth range (µm) shown by the colour table, when *parameters* has none.

    Returns
    -------
    str
        One paragraph ending with a newline. An occlusion rendering is called
        a rendering for showing, not a measurement, with its model (Max 1995).

    Examples
    --------
    >>> text = methods_sentence({"method": "peak", "cmap": "viridis",
    ...                          "depth_range_um": [0, 59], "z_step_um": 1.0})
    >>> text.startswith("Depth was colour-coded with stackdepth")
    True
    >>> "not a measurement" in methods_sentence({"method": "occlusion", "density_per_um": 0.2})
    True
    """
    method = str(parameters.get("method", "peak"))
    if method == "occlusion":
        return _rendering_words(parameters) + "\n"
    if method == "max":
        return _depth_map_words(parameters, legend_range) + "\n"
    return _depth_coded_words(parameters, legend_range, method) + "\n"


def _range_words(d_range: Sequence[float] | None, cmap: Any) -> str:
    """" (0–59 µm, CET-I1 colour map)", or the parts of it that are known."""
    words = [] if d_range is None else [
        f"{_fmt(float(d_range[0]))}\u2013{_fmt(float(d_range[1]))} \u00b5m"]
    if cmap is not None:
        words.append(f"{cmap_name(cmap)} colour map")
    return f" ({', '.join(words)})" if words else ""


def _voxel_words(parameters: Mapping[str, Any]) -> str:
    z_step = parameters.get("z_step_um")
    voxel = parameters.get("voxel_size_um")
    if voxel is not None and len(voxel) == 3:
        return (f" The stack had a voxel size of {_fmt(voxel[0])} \u00d7 {_fmt(voxel[1])} \u00d7 "
                f"{_fmt(voxel[2])} \u00b5m (z \u00d7 y \u00d7 x).")
    if z_step is not None:
        return f" Slices were {_fmt(float(z_step))} \u00b5m apart."
    return ""


def _scaling_words(parameters: Mapping[str, Any], method: str) -> str:
    """How intensities were scaled to the display range ("linearly from A to B (...)")."""
    clim = parameters.get("clim")
    used = parameters.get("clim_used") or clim
    if used is None:
        return _AUTOMATIC
    text = f"linearly from {_fmt(used[0])} to {_fmt(used[1])} (raw intensity"
    if clim is not None:
        return text + ")"
    if method == "weighted":
        return text + "; automatic: background level + 3 SD and the 99.9th percentile)"
    return text + "; automatic 0.1 and 99.9 percentiles)"


def _depth_coded_words(parameters: Mapping[str, Any], legend_range: Any, method: str) -> str:
    from ..kernels.projection import CONSTANT_LIGHTNESS, DEFAULT_CMAP

    words = METHOD_WORDS.get(method, f"method '{method}'")
    cmap = parameters.get("cmap", DEFAULT_CMAP)
    d_range = parameters.get("depth_range_um") or legend_range
    text = (f"Depth was colour-coded with stackdepth {__version__}: {words}"
            f"{_range_words(d_range, cmap)}.")
    if cmap in CONSTANT_LIGHTNESS:
        text += (f" The {cmap} colour map has constant lightness (Kovesi 2015), so colour shows "
                 "depth and brightness shows signal.")
    else:
        text += f" The lightness of the {cmap} colour map varies with depth."
    text += _voxel_words(parameters) + " Brightness was scaled " + _scaling_words(parameters, method)
    gamma = float(parameters.get("gamma", 1.0))
    text += "." if gamma == 1.0 else f" with gamma {_fmt(gamma)}."
    floor = parameters.get("weight_floor")
    if method == "weighted" and floor is not None:
        text += (f" Depths were weighted by the signal above {_fmt(float(floor))} (background "
                 "level + 3 SD, sigma-clipped), independent of the display range.")
    return text + " " + CAVEAT


def _depth_map_words(parameters: Mapping[str, Any], legend_range: Any) -> str:
    d_range = parameters.get("depth_range_um") or legend_range
    text = (f"The depth of the maximum intensity was mapped with stackdepth {__version__}"
            f"{_range_words(d_range, parameters.get('depth_map_cmap'))}: {METHOD_WORDS['max']}.")
    text += _voxel_words(parameters)
    blank = parameters.get("blank_at_or_below")
    if blank is not None:
        text += (f" Pixels whose maximum was at or below {_fmt(float(blank))} (raw intensity) "
                 "were left black.")
    return text + " " + DEPTH_MAP_CAVEAT


def _rendering_words(parameters: Mapping[str, Any]) -> str:
    side = ("the last slice (view from the bottom)" if parameters.get("view") == "bottom"
            else "the first slice (view from the top)")
    text = (f"The stack was rendered with stackdepth {__version__} as a picture for showing, not "
            f"a measurement: {METHOD_WORDS['occlusion']}, starting from {side}")
    density = parameters.get("density_per_um")
    if density is not None:
        text += f", with an extinction of {_fmt(float(density))} per \u00b5m for a fully bright voxel"
    cmap = parameters.get("cmap")
    if cmap is not None:
        text += ("; each slice emitted the colour of its depth"
                 + _range_words(parameters.get("depth_range_um"), cmap))
    text += "." + _voxel_words(parameters)
    text += (" Intensities were scaled " + _scaling_words(parameters, "occlusion")
             + " to set each voxel's emission and extinction.")
    return text + " " + RENDERING_CAVEAT


def cmap_name(cmap: Any) -> str:
    """The name of a colour map for the words of a figure ("custom" for a table)."""
    return cmap if isinstance(cmap, str) else "custom"


