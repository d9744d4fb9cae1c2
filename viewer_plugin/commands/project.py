"""``stackdepth project INPUT -o OUTPUT``: a projection along depth, written as OME-TIFF.

Methods: ``peak`` / ``weighted`` / ``tinted`` (depth colour-coded RGB),
``occlusion`` (emission-absorption, front to back) and ``max`` (maximum-intensity
projection in the input dtype). The z-step comes from the file's voxel size
unless ``--z-step`` is given; the output keeps the xy pixel size. Time points
are projected one by one; a file with several channels needs ``--channel``.
"""

from __future__ import annotations

import argparse
import logging
from pathlib import Path
from typing import Any

import numpy as np

from ._common import CommandError, TerminalProgress, check_output_path

logger = logging.getLogger(__name__)

DEPTH_CODED = ("peak", "weighted", "tinted")
METHODS = DEPTH_CODED + ("occlusion", "max")


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "project", help="project a z-stack along depth (depth colour, occlusion, max)",
        description="Project a z-stack along depth and write the result as OME-TIFF with the xy "
        "pixel size. peak/weighted/tinted colour-code depth in um (RGB, 8 bits per colour); "
        "occlusion composites front to back (emission-absorption); max is the maximum-intensity "
        "projection in the input dtype. Brightness is display contrast, not a calibrated "
        "intensity.")
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF z-stack")
    parser.add_argument("-o", "--output", required=True, metavar="OUTPUT",
                        help="output OME-TIFF (.ome.tif)")
    parser.add_argument("--method", default="peak", choices=METHODS,
                        help="projection (default: peak)")
    parser.add_argument("--cmap", default=None, metavar="NAME",
                        help="matplotlib colour map for depth (default viridis; with occlusion: "
                             "colour each slice by its depth)")
    parser.add_argument("--depth-range", nargs=2, type=float, metavar=("D0", "D1"),
                        help="depths in um at the two ends of the colour map (default: whole stack)")
    parser.add_argument("--clim", nargs=2, type=float, metavar=("LO", "HI"),
                        help="display limits in input units (default: 0.1 and 99.9 percentiles)")
    parser.add_argument("--gamma", type=float, default=1.0, help="brightness gamma (default 1)")
    parser.add_argument("--density", type=float, default=None, metavar="D",
                        help="occlusion: extinction per um of a fully bright voxel "
                             "(default 10 / stack depth)")
    parser.add_argument("--view", default="top", choices=("top", "bottom"),
                        help="occlusion: composite from the first (top) or last (bottom) slice")
    parser.add_argument("--z-step", type=float, default=None, metavar="UM",
                        help="slice spacing in um (default: from the file's voxel size)")
    parser.add_argument("--channel", type=int, default=None, metavar="N",
                        help="channel index for files with several channels")
    parser.add_argument("--figure", default=None, metavar="FIG",
                        help="also save a figure (.png/.tif/.pdf) with colour bar and scale bar in "
                             "um, plus FIG.json (parameters) and FIG.methods.txt")
    parser.add_argument("--overwrite", action="store_true", help="replace existing output files")
    parser.set_defaults(func=run)


def _check_options(args: argparse.Namespace) -> None:
    """Options that do not fit the method: say so instead of ignoring them."""
    if args.method != "occlusion":
        if args.density is not None:
            raise CommandError("--density: only used with --method occlusion")
        if args.view != "top":
            raise CommandError("--view: only used with --method occlusion")
    if args.method in ("occlusion", "max") and args.depth_range is not None:
        raise CommandError(f"--depth-range: not used with --method {args.method}")
    if args.method == "max":
        for name in ("cmap", "clim"):
            if getattr(args, name) is not None:
                raise CommandError(f"--{name}: not used with --method max")
        if args.gamma != 1.0:
            raise CommandError("--gamma: not used with --method max")
    if args.figure is not None and args.method not in DEPTH_CODED:
        raise CommandError(f"--figure: needs a depth-coded method ({', '.join(DEPTH_CODED)}), "
                           f"got --method {args.method}")


def _check_figure_paths(figure: str, *, overwrite: bool) -> Path:
    path = Path(figure)
    for target in (path, path.with_name(path.name + ".json"), path.with_name(path.name + ".methods.txt")):
        check_output_path(target, overwrite=overwrite, name="--figure")
    return path


def _select(stack: Any, channel: int | None) -> tuple[Any, str, tuple[float, ...], str | None]:
    """Pixels, axes and scale after picking the channel; checks there is a Z axis."""
    data, axes, scale = stack.data, stack.axes, tuple(stack.scale)
    if "S" in axes:
        raise CommandError(f"INPUT: expected a z-stack of intensities, got an RGB image (axes {axes})")
    if "Z" not in axes or data.shape[axes.index("Z")] < 2:
        raise CommandError(f"INPUT: expected a z-stack (a Z axis with 2 or more slices), "
                           f"got axes {axes} and shape {tuple(data.shape)}")
    name = None
    if "C" in axes:
        c = axes.index("C")
        n = data.shape[c]
        if channel is None and n > 1:
            names = ", ".join(f"{i}={nm}" for i, nm in enumerate(stack.channel_names))
            raise CommandError(f"--channel: expected a channel index for a file with {n} channels "
                               f"({names}), got none")
        channel = 0 if channel is None else channel
        if not 0 <= channel < n:
            raise CommandError(f"--channel: expected 0 to {n - 1}, got {channel}")
        name = stack.channel_names[channel] if stack.channel_names else f"channel {channel}"
        data = data[(slice(None),) * c + (channel,)]
        axes = axes[:c] + axes[c + 1:]
        scale = scale[:c] + scale[c + 1:]
    elif channel not in (None, 0):
        raise CommandError(f"--channel: expected no channel (the file has none), got {channel}")
    return data, axes, scale, name


def _project(data: Any, axes: str, z_step: float, args: argparse.Namespace, progress: Any) -> Any:
    from ..kernels import projection as kp

    z = axes.index("Z")
    if args.method == "max":
        return kp.peak_projection(data, axis=z, z_step=z_step, progress=progress)
    if args.method == "occlusion":
        return kp.occlusion_projection(data, z_step=z_step, density=args.density, clim=args.clim,
                                     view=args.view, cmap=args.cmap, axis=z, progress=progress)
    return kp.depth_coded_projection(data, z_step=z_step, method=args.method,
                                     cmap=args.cmap or "viridis", depth_range=args.depth_range,
                                     clim=args.clim, gamma=args.gamma, axis=z, progress=progress)


def _z_step(stack: Any, axes: str, scale: tuple[float, ...], args: argparse.Namespace) -> float:
    from .._shared.validation import check_number

    if args.z_step is not None:
        return check_number(args.z_step, name="--z-step", low=0.0, low_open=True)
    step = float(scale[axes.index("Z")])
    if all(float(scale[axes.index(a)]) == 1.0 for a in "ZYX"):
        logger.warning("%s: voxel size 1 x 1 x 1 um, probably not in the file; pass --z-step "
                       "(depths are in um only if the z-step is)", stack.path)
    return step


def run(args: argparse.Namespace) -> int:
    from .. import __version__
    from ..io import read_stack, write_ome_tiff

    _check_options(args)
    output = check_output_path(args.output, overwrite=args.overwrite)
    figure = _check_figure_paths(args.figure, overwrite=args.overwrite) if args.figure else None
    stack = read_stack(args.input)
    data, axes, scale, channel_name = _select(stack, args.channel)
    z_step = _z_step(stack, axes, scale, args)
    if figure is not None and "T" in axes and data.shape[axes.index("T")] > 1:
        raise CommandError("--figure: expected a single z-stack, got a time series; "
                           "write the projection without --figure")
    with TerminalProgress(f"{args.method} projection") as progress:
        result = _project(data, axes, z_step, args, progress)
    out_axes = axes.replace("Z", "")
    out_scale = tuple(s for a, s in zip(axes, scale) if a != "Z")
    pixels, out_axes, out_scale, d_range = _pixels(result, args.method, out_axes, out_scale)
    params = _parameters(args, stack, axes, scale, z_step, channel_name, result, d_range, __version__)
    write_ome_tiff(output, pixels, axes=out_axes, scale=out_scale,
                   metadata={"projection": params}, overwrite=args.overwrite)
    print(f"{output}: {args.method} projection, {out_axes} {tuple(pixels.shape)} {pixels.dtype}"
          + (f", depth {d_range[0]:g}-{d_range[1]:g} um" if d_range else ""))
    if figure is not None:
        from ..figures import export_depth_figure

        files = export_depth_figure(result, figure, pixel_size_um=out_scale[-2:],
                                    source_name=str(stack.path), parameters=params,
                                    overwrite=args.overwrite)
        print(f"{files.figure}: figure; parameters in {files.sidecar.name}, methods sentence in "
              f"{files.methods.name}")
    return 0


def _pixels(result: Any, method: str, axes: str, scale: tuple[float, ...]) -> tuple:
    """The array to write, its axes and scale, and the depth range (µm) of a depth code."""
    if method == "max":
        return np.asarray(result.peak), axes, scale, None
    if method in DEPTH_CODED:
        rgb = np.rint(np.clip(np.asarray(result.rgb), 0.0, 1.0) * 255.0).astype(np.uint8)
        return rgb, axes + "S", scale + (1.0,), tuple(float(v) for v in result.depth_range)
    image = np.asarray(result, dtype=np.float32)
    if image.ndim == len(axes) + 1:  # occlusion with a colour map: RGB
        rgb = np.rint(np.clip(image, 0.0, 1.0) * 255.0).astype(np.uint8)
        return rgb, axes + "S", scale + (1.0,), None
    return image, axes, scale, None


def _parameters(args: argparse.Namespace, stack: Any, axes: str, scale: tuple[float, ...],
                z_step: float, channel_name: str | None, result: Any, d_range: Any,
                version: str) -> dict[str, Any]:
    """Everything needed to make the projection again (stored in the OME-XML and sidecar)."""
    params: dict[str, Any] = {
        "method": args.method, "stackdepth_version": version, "source_file": str(stack.path),
        "channel": args.channel, "channel_name": channel_name,
        "z_step_um": z_step, "z_step_from": "--z-step" if args.z_step is not None else "file",
        "voxel_size_um": [z_step, float(scale[axes.index("Y")]), float(scale[axes.index("X")])],
    }
    if args.method in DEPTH_CODED:
        params.update({"cmap": args.cmap or "viridis", "depth_range_um": list(d_range),
                       "clim": args.clim, "clim_used": [float(v) for v in result.clim],
                       "gamma": args.gamma})
    elif args.method == "occlusion":
        n = stack.data.shape[stack.axes.index("Z")]
        from ..kernels.projection import DEFAULT_OPTICAL_DEPTH

        params.update({"density_per_um": args.density if args.density is not None
                       else DEFAULT_OPTICAL_DEPTH / (n * z_step), "view": args.view,
                       "clim": args.clim, "cmap": args.cmap,
                       "note": "a rendering, not a measurement"})
    if args.method != "max":
        params["caveat"] = "brightness is display contrast, not a calibrated intensity"
    return params
