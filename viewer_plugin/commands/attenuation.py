"""``stackdepth attenuation INPUT``: measure (and optionally correct) the fall-off with depth.

Prints the 1/e attenuation length with its 95 % interval and the fit quality;
``-o`` writes the corrected stack (float32 OME-TIFF with the voxel size;
axes ZYX, or CZYX for several channels), ``--report`` a JSON report (length,
interval, model, r², offset, the per-slice profile and gains, input,
parameters, version, caution) and ``--plot`` a PNG of profile, model and
gain. Files with channels are processed channel by channel (or only
``--channel N``). JSON has no infinity: an infinite length or interval end is
stored as ``null``. The work itself is in :mod:`viewer_plugin.jobs.attenuation`.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from .._shared.jsonio import write_json
from ..jobs.choices import ATTENUATION_CAVEAT, ATTENUATION_MODELS, DEFAULT_MAX_GAIN
from ._common import (
    CommandError,
    TerminalProgress,
    check_output_path,
    check_outputs,
    finish_parser,
    print_notes,
    read_input,
    save_figure,
    write_image,
)

SPATIAL = "ZYX"


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "attenuation", help="measure and correct the signal fall-off with depth",
        description="Measure how the foreground signal fades with depth (Beer-Lambert 1/e "
        "attenuation length in um, with a 95 %% interval) and optionally write a corrected "
        "float32 stack. " + ATTENUATION_CAVEAT.replace("%", "%%"))
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF z-stack")
    parser.add_argument("-o", "--output", default=None, metavar="OUTPUT",
                        help="write the corrected stack here (.ome.tif, float32)")
    parser.add_argument("--report", default=None, metavar="REPORT", help="write a JSON report")
    parser.add_argument("--plot", default=None, metavar="PLOT",
                        help="write a PNG of profile, model and gain (one per channel: _c<N>)")
    parser.add_argument("--model", default="exponential", choices=ATTENUATION_MODELS,
                        help="depth model (default: exponential, Beer-Lambert)")
    parser.add_argument("--max-gain", type=float, default=DEFAULT_MAX_GAIN, metavar="G",
                        help=f"cap on the per-slice gain (default {DEFAULT_MAX_GAIN:g})")
    parser.add_argument("--axis", default="z", metavar="A",
                        help="depth axis: z, y, x or an index 0-2 of the z-stack (default z)")
    parser.add_argument("--z-step", type=float, default=None, metavar="UM",
                        help="slice spacing along the axis in um (default: the file's voxel size)")
    finish_parser(parser, run, channel_help="process only this channel (default: every channel)")


def _axis_index(text: str) -> int:
    value = str(text).strip().lower()
    if value in ("z", "y", "x"):
        return "zyx".index(value)
    if value.lstrip("-").isdigit() and int(value) in (0, 1, 2, -1, -2, -3):
        return int(value) % 3
    raise CommandError(f"--axis: expected z, y, x or an index 0-2, got {text!r}")


def _selections(stack: Any, channel: int | None) -> list[Any]:
    """One selection per channel to process (every channel unless --channel)."""
    from ..jobs import select

    if "C" not in stack.axes or channel is not None:
        return [select(stack, channel=channel, several_times="error")]
    n = int(stack.data.shape[stack.axes.index("C")])
    return [select(stack, channel=c, several_times="error") for c in range(n)]


def run(args: argparse.Namespace) -> int:
    from ..jobs import AttenuationOptions, measure_attenuation

    outputs = check_outputs(args)
    axis = _axis_index(args.axis)
    options = AttenuationOptions(model=args.model, max_gain=args.max_gain, z_step=args.z_step)
    stack = read_input(args.input)
    selections = _selections(stack, args.channel)
    if selections[0].stack.axes != SPATIAL:
        raise CommandError(f"INPUT: expected a z-stack with axes ZYX, got axes {stack.axes}")
    plot = outputs["plot"]
    if plot is not None and len(selections) > 1:
        for sel in selections:
            check_output_path(_per_channel(plot, sel.channel), overwrite=args.overwrite, name="--plot")
    measured = []
    for sel in selections:
        label = "attenuation" if sel.channel is None else f"attenuation c{sel.channel}"
        with TerminalProgress(label) as progress:
            measured.append(measure_attenuation(sel, options, depth_axis=axis, progress=progress))
    corrected_notes = _write_outputs(outputs, stack, measured, args)
    _print_summary(measured, outputs, corrected_notes)
    return 0


def _per_channel(path: Path, channel: int | None) -> Path:
    return path if channel is None else path.with_name(f"{path.stem}_c{channel}{path.suffix}")


def _write_outputs(outputs: dict[str, Path | None], stack: Any, measured: list[Any],
                   args: argparse.Namespace) -> list[str]:
    from ..jobs import attenuation_record

    notes: list[str] = []
    if outputs["output"] is not None:
        notes = _write_corrected(outputs["output"], stack, measured, args)
    if outputs["plot"] is not None:
        _write_plots(outputs["plot"], stack, measured)
    if outputs["report"] is not None:
        records = [attenuation_record(m) for m in measured]
        first = measured[0].provenance
        payload: dict[str, Any] = {
            "stackdepth_version": first["stackdepth_version"],
            "command": "attenuation",
            "input": str(Path(args.input).resolve()),
            "parameters": {"model": args.model, "max_gain": args.max_gain, "axis": "zyx"[measured[0].depth_axis],
                           "z_step_um": first["z_step_um"], "channel": args.channel,
                           "z_step_from": "--z-step" if args.z_step is not None else "file"},
            "caution": ATTENUATION_CAVEAT,
            "null_means": "infinite (JSON has no infinity), or not measured",
        }
        if len(records) == 1:
            payload.update(records[0])
        else:
            payload["channels"] = records
        if stack.truth:
            payload["demo_truth"] = stack.truth
        write_json(outputs["report"], payload)
    return notes


def _write_corrected(path: Path, stack: Any, measured: list[Any], args: argparse.Namespace) -> list[str]:
    from ..jobs import correct_measured

    corrected, notes = [], []
    for m in measured:
        with TerminalProgress("correcting") as progress:
            out = correct_measured(m, progress=progress)
        notes += list(out.notes)
        corrected.append(out)  # a lazy dask array stays lazy: the writer streams it plane by plane
    geometry = corrected[0].geometry
    pixels = corrected[0].data
    names = None
    if measured[0].selection.channel is not None:
        pixels = _stack_channels([c.data for c in corrected])
        geometry = type(geometry)("C" + geometry.axes, (1.0,) + geometry.scale,
                                  (0.0,) + geometry.translate)
        names = [m.selection.channel_name for m in measured]
    metadata = {"attenuation_correction": {
        **corrected[0].provenance, "channels": [m.selection.channel for m in measured],
        "length_um": [m.fit.length_um for m in measured]}}
    write_image(path, pixels, geometry, metadata=metadata, overwrite=args.overwrite,
                channel_names=names)
    return notes


def _stack_channels(arrays: list[Any]) -> Any:
    from .._shared.validation import is_dask

    if any(is_dask(a) for a in arrays):
        import dask.array as da

        return da.stack([da.asarray(a) for a in arrays], axis=0)
    import numpy as np

    return np.stack(arrays, axis=0)


def _write_plots(path: Path, stack: Any, measured: list[Any]) -> None:
    from ..plots.attenuation import attenuation_figure

    for m in measured:
        title = Path(str(stack.path or "stack")).name
        if len(measured) > 1:
            title += f", channel {m.selection.channel}"
        fig = attenuation_figure(m.fit, max_gain=m.options.max_gain, truth=stack.truth, title=title)
        save_figure(_per_channel(path, m.selection.channel if len(measured) > 1 else None), fig)


def _print_summary(measured: list[Any], outputs: dict[str, Path | None], notes: list[str]) -> None:
    print_notes(n for m in measured for n in m.selection.notes)
    for m in measured:
        prefix = "" if len(measured) == 1 else f"channel {m.selection.channel}: "
        print(prefix + m.fit.describe())
        if m.capped:
            print(f"  {m.capped} slice(s) need a gain above --max-gain and are capped")
        for note in m.notes + tuple(notes):
            print(f"  note: {note}")
    for option, path in outputs.items():
        if path is not None:
            if option == "plot" and len(measured) > 1:
                path = path.with_name(f"{path.stem}_c<N>{path.suffix}")
            print(f"wrote {path}")
    print(f"caution: {ATTENUATION_CAVEAT}")
