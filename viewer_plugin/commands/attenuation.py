"""``stackdepth attenuation INPUT``: measure (and optionally correct) the fall-off with depth.

Prints the 1/e attenuation length with its 95 % interval and the fit quality;
``-o`` writes the corrected stack (float32 OME-TIFF with the voxel size;
axes ZYX, or CZYX for several channels), ``--report`` a JSON report (length, interval, model, r², offset, the
per-slice profile and gains, input, parameters, version, caution) and
``--plot`` a PNG of profile, model and gain. Files with channels are
processed channel by channel (or only ``--channel N``). JSON has no
infinity: an infinite length or interval end is stored as ``null``.
"""

from __future__ import annotations

import argparse
import math
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from .. import __version__
from .._shared.atomic import atomic_write
from ._common import (
    CommandError,
    TerminalProgress,
    check_output_path,
    check_outputs,
    write_json,
)

SPATIAL = "ZYX"


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "attenuation", help="measure and correct the signal fall-off with depth",
        description="Measure how the foreground signal fades with depth (Beer-Lambert 1/e "
        "attenuation length in um, with a 95 %% interval) and optionally write a corrected "
        "float32 stack. Corrected intensities are relative, not calibrated; deep slices carry "
        "amplified noise; one stack cannot separate attenuation from bleaching.")
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF z-stack")
    parser.add_argument("-o", "--output", default=None, metavar="OUTPUT",
                        help="write the corrected stack here (.ome.tif, float32)")
    parser.add_argument("--report", default=None, metavar="REPORT", help="write a JSON report")
    parser.add_argument("--plot", default=None, metavar="PLOT",
                        help="write a PNG of profile, model and gain (one per channel: _c<N>)")
    parser.add_argument("--model", default="exponential", choices=("exponential", "smooth", "quantile"),
                        help="depth model (default: exponential, Beer-Lambert)")
    parser.add_argument("--max-gain", type=float, default=10.0, metavar="G",
                        help="cap on the per-slice gain (default 10)")
    parser.add_argument("--axis", default="z", metavar="A",
                        help="depth axis: z, y, x or an index 0-2 of the z-stack (default z)")
    parser.add_argument("--z-step", type=float, default=None, metavar="UM",
                        help="slice spacing along the axis in um (default: the file's voxel size)")
    parser.add_argument("--channel", type=int, default=None, metavar="N",
                        help="process only this channel (default: every channel)")
    parser.add_argument("--overwrite", action="store_true", help="replace existing output files")
    parser.set_defaults(func=run)


def _axis_index(text: str) -> int:
    value = str(text).strip().lower()
    if value in ("z", "y", "x"):
        return "zyx".index(value)
    if value.lstrip("-").isdigit() and int(value) in (0, 1, 2, -1, -2, -3):
        return int(value) % 3
    raise CommandError(f"--axis: expected z, y, x or an index 0-2, got {text!r}")


def _channel_views(stack: Any, channel: int | None) -> tuple[list[int], Any, str]:
    """Channel indices to process, the data with C first (if any), and the spatial axes."""
    axes = stack.axes
    data = stack.data
    if "T" in axes:
        t = axes.index("T")
        if data.shape[t] != 1:
            raise CommandError(f"INPUT: expected one z-stack, got {data.shape[t]} time points "
                               "(use stackdepth bleaching for time series)")
        data = data[(slice(None),) * t + (0,)]
        axes = axes.replace("T", "")
    if "C" in axes:
        c = axes.index("C")
        data = np.moveaxis(data, c, 0) if not hasattr(data, "dask") else data.transpose(
            (c,) + tuple(i for i in range(data.ndim) if i != c))
        n = data.shape[0]
        if channel is not None and not 0 <= channel < n:
            raise CommandError(f"--channel: expected an index from 0 to {n - 1}, got {channel}")
        return ([channel] if channel is not None else list(range(n))), data, axes.replace("C", "")
    if channel not in (None, 0):
        raise CommandError(f"--channel: the file has no channels, got {channel}")
    return [None], data, axes


def run(args: argparse.Namespace) -> int:
    from ..io import read_stack
    from .._shared.validation import check_number

    outputs = check_outputs(args)
    axis = _axis_index(args.axis)
    check_number(args.max_gain, name="--max-gain", low=1.0, allow_inf=True)
    stack = read_stack(args.input)
    channels, data, spatial = _channel_views(stack, args.channel)
    if spatial != SPATIAL:
        raise CommandError(f"INPUT: expected a z-stack with axes ZYX, got axes {stack.axes}")
    scale = dict(zip(stack.axes, stack.scale))
    z_step = args.z_step if args.z_step is not None else float(scale[SPATIAL[axis]])
    z_step = check_number(z_step, name="--z-step", low=0, low_open=True)
    if outputs["plot"] is not None and len(channels) > 1:
        plot = outputs["plot"]
        for c in channels:
            check_output_path(plot.with_name(f"{plot.stem}_c{c}{plot.suffix}"),
                              overwrite=args.overwrite, name="--plot")
    results = [_process(data if c is None else data[c], c, stack, axis, z_step, args) for c in channels]
    _write_outputs(outputs, stack, data, channels, results, axis, z_step, args)
    _print_summary(results, stack, outputs)
    return 0


def _process(volume: Any, channel: int | None, stack: Any, axis: int, z_step: float,
             args: argparse.Namespace) -> dict[str, Any]:
    from ..kernels import estimate_attenuation

    label = "attenuation" if channel is None else f"attenuation c{channel}"
    with warnings.catch_warnings(record=True) as caught, TerminalProgress(label) as progress:
        warnings.simplefilter("always")
        fit = estimate_attenuation(volume, z_step=z_step, model=args.model, axis=axis,
                                   progress=progress)
    notes = list(fit.warnings) + [str(w.message) for w in caught if str(w.message) not in fit.warnings]
    capped = int(np.sum(np.where(np.isfinite(fit.gain), fit.gain, 1.0) > args.max_gain))
    name = None
    if channel is not None and channel < len(stack.channel_names):
        name = stack.channel_names[channel]
    return {"channel": channel, "channel_name": name, "fit": fit, "notes": notes, "capped": capped}


def _fit_record(result: dict[str, Any], max_gain: float) -> dict[str, Any]:
    fit = result["fit"]
    return {
        "channel": result["channel"],
        "channel_name": result["channel_name"],
        "length_um": fit.length_um,
        "length_interval_um": list(fit.length_interval_um),
        "model": fit.model,
        "r_squared": fit.r_squared,
        "offset": fit.offset,
        "converged": fit.converged,
        "n_iterations": fit.n_iterations,
        "slices_capped_at_max_gain": result["capped"],
        "depth_um": fit.depth_um,
        "profile": fit.profile,
        "profile_sem": fit.profile_sem,
        "model_profile": fit.model_profile,
        "gain": fit.gain,
        "gain_applied": np.minimum(np.where(np.isfinite(fit.gain), fit.gain, 1.0), max_gain),
        "background": fit.background,
        "foreground_fraction": fit.foreground_fraction,
        "warnings": result["notes"],
    }


def _write_outputs(outputs: dict[str, Path | None], stack: Any, data: Any, channels: list,
                   results: list[dict[str, Any]], axis: int, z_step: float,
                   args: argparse.Namespace) -> None:
    from ..kernels.attenuation import CAUTION

    if outputs["output"] is not None:
        _write_corrected(outputs["output"], stack, data, channels, results, args)
    if outputs["plot"] is not None:
        _write_plots(outputs["plot"], stack, results, args.max_gain)
    if outputs["report"] is not None:
        records = [_fit_record(r, args.max_gain) for r in results]
        payload: dict[str, Any] = {
            "stackdepth_version": __version__,
            "command": "attenuation",
            "input": str(Path(args.input).resolve()),
            "parameters": {"model": args.model, "max_gain": args.max_gain, "axis": "zyx"[axis],
                           "z_step_um": z_step, "channel": args.channel,
                           "z_step_from": "--z-step" if args.z_step is not None else "file"},
            "caution": CAUTION,
            "null_means": "infinite (JSON has no infinity), or not measured",
        }
        if len(records) == 1:
            payload.update(records[0])
        else:
            payload["channels"] = records
        truth = stack.metadata.get("truth") if isinstance(stack.metadata, dict) else None
        if truth:
            payload["demo_truth"] = truth
        write_json(outputs["report"], payload)


def _write_corrected(path: Path, stack: Any, data: Any, channels: list,
                     results: list[dict[str, Any]], args: argparse.Namespace) -> None:
    from ..io import write_ome_tiff
    from ..kernels import correct_attenuation
    from .._shared.validation import is_dask
    from ..kernels.attenuation import CAUTION

    corrected = []
    for channel, result in zip(channels, results):
        volume = data if channel is None else data[channel]
        with warnings.catch_warnings(record=True) as caught, TerminalProgress("correcting") as progress:
            warnings.simplefilter("always")
            out = correct_attenuation(volume, result["fit"], max_gain=args.max_gain, progress=progress)
        result["notes"] += [str(w.message) for w in caught]
        corrected.append(out)  # a lazy dask array stays lazy: the writer streams it plane by plane
    names = [stack.channel_names[c] for c in channels if c is not None and c < len(stack.channel_names)]
    axes, scale = "ZYX", tuple(float(s) for a, s in zip(stack.axes, stack.scale) if a in "ZYX")
    pixels = corrected[0]
    if channels != [None]:
        if any(is_dask(c) for c in corrected):
            import dask.array as da

            pixels = da.stack([da.asarray(c) for c in corrected], axis=0)
        else:
            pixels = np.stack(corrected, axis=0)
        axes = "CZYX"
        scale = (1.0,) + scale
    metadata = {"attenuation_correction": {
        "source": str(Path(args.input).resolve()), "model": args.model, "max_gain": args.max_gain,
        "channels": [c for c in channels if c is not None],
        "length_um": [None if math.isinf(r["fit"].length_um) else r["fit"].length_um for r in results],
        "caution": CAUTION, "stackdepth_version": __version__}}
    write_ome_tiff(path, pixels, axes=axes, scale=scale, channel_names=names or None,
                   metadata=metadata, overwrite=args.overwrite)


def _write_plots(path: Path, stack: Any, results: list[dict[str, Any]], max_gain: float) -> None:
    from ..plots.attenuation import attenuation_figure

    truth = stack.metadata.get("truth") if isinstance(stack.metadata, dict) else None
    for result in results:
        target = path
        title = Path(str(stack.path or "stack")).name
        if len(results) > 1:
            target = path.with_name(f"{path.stem}_c{result['channel']}{path.suffix}")
            title += f", channel {result['channel']}"
        fig = attenuation_figure(result["fit"], max_gain=max_gain, truth=truth, title=title)
        atomic_write(target, lambda tmp, fig=fig: fig.savefig(tmp, format="png", dpi=120))


def _print_summary(results: list[dict[str, Any]], stack: Any, outputs: dict[str, Path | None]) -> None:
    from ..kernels.attenuation import CAUTION

    for result in results:
        prefix = "" if result["channel"] is None else f"channel {result['channel']}: "
        print(prefix + result["fit"].describe())
        if result["capped"]:
            print(f"  {result['capped']} slice(s) need a gain above --max-gain and are capped")
        for note in result["notes"]:
            print(f"  note: {note}")
    for option, path in outputs.items():
        if path is not None:
            if option == "plot" and len(results) > 1:
                path = path.with_name(f"{path.stem}_c<N>{path.suffix}")
            print(f"wrote {path}")
    print(f"caution: {CAUTION}")
