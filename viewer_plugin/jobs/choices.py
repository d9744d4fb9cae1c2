"""Choice lists, defaults and caution texts, written once for the command line and the docks.

argparse (``commands/``) and magicgui (``widgets/``) read their choices,
defaults, help texts and cautions from here; the kernels own the method names
themselves and this module only adds the words a user reads.
"""

from __future__ import annotations

from ..figures import METHOD_WORDS
from ..kernels.attenuation import CAUTION as ATTENUATION_CAVEAT
from ..kernels.attenuation import MODELS as ATTENUATION_MODELS
from ..kernels.bleaching import RESCALE
from ..kernels.bleaching.text import DEPTH_CAVEAT, TWO_PASS_CAVEAT, VERDICT_WORDS, VERDICTS
from ..kernels.projection import DEFAULT_CMAP, MAX_SIDE, TURN_AXES, TURN_METHODS, VIEWS
from ..kernels.projection import METHODS as DEPTH_CODED
from ..kernels.projection import RECOLOURABLE

__all__ = [
    "ATTENUATION_CAVEAT",
    "ATTENUATION_MODELS",
    "ATTENUATION_MODEL_LABELS",
    "BLEACHING_CAVEAT",
    "CMAP_HELP",
    "CMAP_KIND",
    "CMAP_KINDS",
    "CMAP_NOTE",
    "COLOUR_MAPS",
    "CONSTANT_LIGHTNESS_MAPS",
    "DEFAULT_CMAP",
    "DEFAULT_FPS",
    "DEFAULT_FRAMES",
    "DEPTH_MAP_CMAPS",
    "DEFAULT_MAX_GAIN",
    "DEFAULT_METHOD",
    "DEFAULT_MOVIE_METHOD",
    "DEFAULT_SLAB_UM",
    "DEFAULT_TOLERANCE",
    "DEPTH_CAVEAT",
    "DEPTH_CODED",
    "EQUALISE_NOTE",
    "LIVE_NOTE",
    "METHOD_LABELS",
    "METHOD_WORDS",
    "MAX_SIDE",
    "MOVIE_METHODS",
    "MOVIE_METHOD_LABELS",
    "MOVIE_NOTE",
    "MOVIE_OVER",
    "MOVIE_SUFFIXES",
    "OCCLUSION_NOTE",
    "PATH_CAVEAT",
    "PATH_NOTE",
    "PROJECTION_CAVEAT",
    "PROJECTION_CMAP_HELP",
    "PROJECTION_METHODS",
    "RECOLOURABLE",
    "RESCALE",
    "RESCALE_LABELS",
    "SATURATION_LIMIT",
    "SLAB_NOTE",
    "TOLERANCE_NOTE",
    "TURN_AXES",
    "TURN_LABELS",
    "TWO_PASS_CAVEAT",
    "TWO_PASS_HELP",
    "VERDICTS",
    "VERDICT_COLOURS",
    "VERDICT_RULE",
    "VERDICT_WORDS",
    "VIEWS",
    "WEIGHTED_NOTE",
    "cmap_caution",
    "labelled",
    "saturation_warning",
]

# --- projections -------------------------------------------------------------------------

#: Every projection the command line and the docks offer: the depth-coded methods of
#: :func:`~viewer_plugin.kernels.depth_coded_projection`, the occlusion rendering and the
#: plain maximum-intensity projection (with the depth of each maximum).
PROJECTION_METHODS = DEPTH_CODED + ("occlusion", "max")
DEFAULT_METHOD = "peak"

#: What each method shows, as a dock label.
METHOD_LABELS = {
    "peak": "peak: depth of the strongest voxel",
    "weighted": "weighted: intensity-weighted mean depth",
    "tinted": "tinted: slices tinted by depth, then maximum",
    "occlusion": "occlusion: nearer structures partly hide deeper ones",
    "max": "max: maximum-intensity projection and its depth",
}

#: What a colour map of depth does to a depth-coded image, by kind of map (the mark shown
#: beside its name in the dock).
CMAP_KINDS = {
    "constant": "constant lightness",
    "varies": "mixes depth into brightness",
    "rainbow": "rainbow-like, mixes depth into brightness",
}
#: Colour maps of depth as (name, kind, colours): constant lightness first (Kovesi's
#: isoluminant maps, the kernels' ``CONSTANT_LIGHTNESS``), then
#: matplotlib's perceptually uniform maps, then rainbow-like maps.
_CMAP_TABLE = (
    ("CET-I1", "constant", "cyan\u2013green\u2013orange"),
    ("CET-I3", "constant", "cyan\u2013magenta"),
    ("CET-I2", "constant", "lighter cyan\u2013green\u2013orange"),
    ("viridis", "varies", ""),
    ("cividis", "varies", "for red\u2013green colour-blindness"),
    ("plasma", "varies", ""),
    ("inferno", "varies", "black at one end"),
    ("magma", "varies", "black at one end"),
    ("turbo", "rainbow", ""),
    ("gist_rainbow", "rainbow", ""),
    ("hsv", "rainbow", "cyclic"),
)
#: The kind of each offered colour map ("constant", "varies", "rainbow").
CMAP_KIND = {name: kind for name, kind, _ in _CMAP_TABLE}
#: Colour maps for depth, as (dock label, name), in the order of the table above.
COLOUR_MAPS = tuple(
    (f"{name} ({colours + ', ' if colours else ''}{CMAP_KINDS[kind]})", name)
    for name, kind, colours in _CMAP_TABLE)
#: Maps of constant lightness along depth that the docks and the command line offer.
CONSTANT_LIGHTNESS_MAPS = tuple(name for name, kind, _ in _CMAP_TABLE if kind == "constant")
CMAP_NOTE = ("Constant-lightness maps (" + ", ".join(CONSTANT_LIGHTNESS_MAPS) + ") leave "
             "brightness to the signal alone; with a map whose lightness varies, structures at "
             "the map's light end look brighter than equally bright ones at its dark end.")
#: --cmap help of the command line.
CMAP_HELP = (f"colour map of depth (default {DEFAULT_CMAP}). Constant lightness, so brightness "
             "shows only the signal: " + ", ".join(CONSTANT_LIGHTNESS_MAPS) + ". Lightness "
             "varies, mixing depth into brightness: "
             + ", ".join(n for n, k, _ in _CMAP_TABLE if k == "varies") + "; rainbow-like too: "
             + ", ".join(n for n, k, _ in _CMAP_TABLE if k == "rainbow")
             + ". Any other matplotlib name is accepted")
#: Colour maps of a depth map alone (one quantity, e.g. the peak depth layer): there a
#: perceptually uniform map whose lightness rises with depth is right.
DEPTH_MAP_CMAPS = tuple(n for n, k, _ in _CMAP_TABLE if k == "varies")


def cmap_caution(name: str | None) -> str:
    """What the user should know about colour map *name* in a depth-coded image ("" if nothing)."""
    kind = CMAP_KIND.get(name or DEFAULT_CMAP, "varies")
    if kind == "constant":
        return ""
    return (f"{name}: its lightness changes with depth, so brightness no longer shows the signal "
            f"alone; for figures prefer {DEFAULT_CMAP} (constant lightness)")


#: Warning above this fraction of saturated pixels (brighter than the upper display limit).
SATURATION_LIMIT = 0.01


def saturation_warning(fraction: float | None) -> str:
    """The warning for a result with *fraction* of saturated pixels ("" at or below 1 %)."""
    if fraction is None or fraction <= SATURATION_LIMIT:
        return ""
    return (f"{100 * fraction:.1f} % of pixels are brighter than the upper display limit: their "
            "brightness is clipped (saturated); raise the upper limit to tell them apart")


WEIGHTED_NOTE = ("weighted: depth is the mean depth of the signal above the background level "
                 "+ 3 SD, estimated from the stack; the contrast limits set only the brightness.")
PROJECTION_CAVEAT = ("Colour = depth below the first slice; brightness = display contrast, "
                     "relative and not calibrated.")
LIVE_NOTE = ("Follow every change without Compute: at full resolution when the stack takes well "
             "under a second (a new colour map, depth range, contrast or gamma only recolours), "
             "else a downsampled preview until Compute.")
PATH_NOTE = ("Depth along a path: draw a path along a fibre over the peak depth map (Draw a "
             "path\u2026, or pick a Shapes layer); its depth and peak are plotted against the "
             "distance along it.")
PATH_CAVEAT = ("Depths are those of the strongest voxel near the path: where the path leaves the "
               "fibre, crosses a brighter one or runs over background they mean nothing and the "
               "3-D length comes out too long. The range covers only the rounding of depths to "
               "slices, not such errors: check the plot for jumps.")
#: Help of --cmap for every projection method (``stackdepth project`` and ``stackdepth figures``).
PROJECTION_CMAP_HELP = (f"{CMAP_HELP}. With occlusion: colour each slice by its depth (default grey). "
                        f"With max: the colours of the depth map (default {DEPTH_MAP_CMAPS[0]})")
SLAB_NOTE = ("Projects only the slices within half the thickness of the viewer's current slice; "
             "moving the z slider moves the slab. Colours keep the whole stack's depth range, "
             "so a colour means the same depth everywhere.")
#: Thickness of a new slab, in µm.
DEFAULT_SLAB_UM = 10.0
OCCLUSION_NOTE = ("A rendering for looking, not for measuring: its brightness is not an "
                  "intensity.")

# --- movies --------------------------------------------------------------------------------

#: How the frames of a movie are rendered (the kernels' names).
MOVIE_METHODS = TURN_METHODS
MOVIE_METHOD_LABELS = {
    "occlusion": "occlusion: nearer structures partly hide deeper ones",
    "peak": "peak: maximum-intensity projection, grey",
    "depth-colour": "depth colour: colour = depth of the strongest voxel from the viewer",
}
#: What a movie runs over: views from angles through 360°, or the time points of a series.
MOVIE_OVER = ("angle", "t")
#: The method when none is given, per MOVIE_OVER entry.
DEFAULT_MOVIE_METHOD = {"angle": "occlusion", "t": "depth-colour"}
#: Movie files: suffix -> format.
MOVIE_SUFFIXES = {".mp4": "mp4", ".gif": "gif"}
DEFAULT_FRAMES = 36
DEFAULT_FPS = 12.0
TURN_LABELS = {"y": "y (the image's vertical axis)", "x": "x (the image's horizontal axis)"}
MOVIE_NOTE = ("A rendering for showing, not for measuring: brightness is display contrast, not "
              "a calibrated intensity.")

# --- attenuation ---------------------------------------------------------------------------

ATTENUATION_MODEL_LABELS = {
    "exponential": "exponential: Beer\u2013Lambert fit",
    "smooth": "smooth: follows any smooth profile",
    "quantile": "quantile: maps every slice's quantiles onto the first slice's",
}
DEFAULT_MAX_GAIN = 10.0

# --- bleaching -----------------------------------------------------------------------------

RESCALE_LABELS = {
    "model": "fitted decay",
    "measured": "measured signal",
}
DEFAULT_TOLERANCE = 0.10
TOLERANCE_NOTE = ("10 % is a common-practice default, not a published limit: set the loss you "
                  "can accept before quantifying.")
BLEACHING_CAVEAT = ("Corrected intensities are relative, not calibrated; correction amplifies "
                    "the noise of late (faded) frames.")
EQUALISE_NOTE = ("Equalise contrast to frame 0 (for display and segmentation, not for "
                 "intensities): histogram specification changes the relation between "
                 "intensities.")
TWO_PASS_HELP = ("Two passes over the same stack, the second deepest-first (both stored "
                 "surface first). The rate needs one-photon data; with two-photon data a "
                 "uniformly dimmer second pass shows as a pass ratio below 1. See "
                 "docs/bleaching.md.")

#: How the verdict is decided (recorded with every check).
VERDICT_RULE = ("95 % interval of the fraction lost against the tolerance: within when the whole "
                "interval is at or below it, exceeds when the whole interval is above it, "
                "inconclusive when it spans it")

#: Background and text colour of each verdict in the dock, beside its words (never colour
#: alone): blue, yellow and vermillion of the Okabe-Ito palette, which differ in lightness
#: as well as hue and stay apart under the common colour-vision deficiencies.
VERDICT_COLOURS = {
    "within": ("#0072B2", "#FFFFFF"),
    "inconclusive": ("#F0E442", "#000000"),
    "exceeds": ("#D55E00", "#000000"),
}

def labelled(labels: dict[str, str], names: tuple[str, ...] | None = None) -> list[tuple[str, str]]:
    """(label, name) pairs for a dock's drop-down, in the order of *names* (default: *labels*)."""
    return [(labels[name], name) for name in (names or tuple(labels))]
