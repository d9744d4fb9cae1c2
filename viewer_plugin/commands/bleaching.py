"""``stackdepth bleaching INPUT``: did the signal fade during acquisition, and is it within tolerance?

Prints one sentence with the verdict. Exit status 0 when the loss is within
the tolerance, 3 when it exceeds it (so a pipeline can stop), 2 for bad input.
``-o`` writes a bleach-corrected float32 OME-TIFF, ``--report`` a JSON report
(every field of the estimate plus input, parameters, version and caveat),
``--plot`` a PNG of the measured and modelled signal with the tolerance line.
With ``--reverse SECOND_PASS`` the two files are two passes over the same stack
(the second acquired deepest-first) and bleaching per exposure and the
attenuation length are separated. JSON has no infinity: an infinite half-life
or interval end is stored as ``null``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from .. import __version__
from .._shared.atomic import atomic_write
from ._common import (
    EXIT_OK,
    EXIT_OVER_TOLERANCE,
    CommandError,
    TerminalProgress,
    check_outputs,
    write_json,
)

CAUTION = ("Corrected intensities are relative, not calibrated; correction amplifies the noise "
           "of late (faded) frames.")
EQUALISE_NOTE = ("contrast equalised to frame 0 by histogram specification: for display and "
                 "segmentation, not for measuring intensities")
TOLERANCE_NOTE = "no published limit: the default 0.10 is common practice; set your own"


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "bleaching", help="check a time series or z-stack for photobleaching",
        description="Measure how much the foreground signal faded along the acquisition "
        "(time points, or the slices of one z-stack), fit first-order bleaching, and compare the "
        "loss with a tolerance. Exit status 0 within tolerance, 3 above it, 2 for bad input. "
        "One z-stack alone cannot tell bleaching from depth attenuation: acquire a second pass "
        "deepest-first and give it with --reverse.")
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF (time series or z-stack)")
    parser.add_argument("--axis", choices=("t", "z"), default=None,
                        help="acquisition axis (default: t when INPUT has time points, else z)")
    parser.add_argument("--interval", type=float, default=None, metavar="S",
                        help="seconds between time points (for --axis z: the z-step in um); "
                        "default: from the file")
    parser.add_argument("--tolerance", default="0.10", metavar="F",
                        help=f"accepted fraction of signal lost, e.g. 0.1 or 10%% ({TOLERANCE_NOTE})")
    parser.add_argument("--report", default=None, metavar="R.json", help="write a JSON report")
    parser.add_argument("--plot", default=None, metavar="P.png", help="write a PNG of the check")
    parser.add_argument("-o", "--output", default=None, metavar="CORRECTED",
                        help="write the bleaching-corrected series here (.ome.tif, float32)")
    parser.add_argument("--rescale", choices=("model", "measured"), default="model",
                        help="how -o rescales each frame: divide by the fitted decay (model, "
                        "default) or by the frame's measured foreground signal (measured)")
    parser.add_argument("--equalise", default=None, metavar="OUT",
                        help="also write a copy whose frames' contrast is equalised to frame 0 "
                        "(histogram specification: for display and segmentation, not for "
                        "intensities)")
    parser.add_argument("--reverse", default=None, metavar="SECOND_PASS",
                        help="second pass over the same stack, acquired deepest-first (stored "
                        "surface first): separate bleaching from attenuation")
    parser.add_argument("--channel", type=int, default=None, metavar="N",
                        help="channel to check (default 0 when INPUT has several)")
    parser.add_argument("--overwrite", action="store_true", help="replace existing output files")
    parser.set_defaults(func=run)


def parse_tolerance(text: str) -> float:
    """``"0.1"`` or ``"10%"`` -> 0.1; a fraction strictly between 0 and 1."""
    raw = str(text).strip()
    try:
        value = float(raw[:-1]) / 100 if raw.endswith("%") else float(raw)
    except ValueError:
        raise CommandError(f"--tolerance: expected a fraction such as 0.1 or a percentage such "
                           f"as 10%, got {text!r}") from None
    if not 0 < value < 1:
        raise CommandError(f"--tolerance: expected a fraction between 0 and 1 (e.g. 0.1 for "
                           f"10 %), got {text!r}")
    return value


def _outputs(args: argparse.Namespace) -> dict[str, Path | None]:
    out = check_outputs(args, ("output", "report", "plot", "equalise"))
    for option in ("output", "equalise"):
        if out[option] is not None and args.reverse is not None:
            raise CommandError(f"--{option}: not available with --reverse; the two-pass mode only "
                               "measures (correct attenuation with 'stackdepth attenuation')")
    return out


def _print_notes(notes: list[str]) -> None:
    """Notes go to stderr only once the command succeeded (an error stays one line)."""
    for text in notes:
        print(f"stackdepth: note: {text}", file=sys.stderr)


def select_channel(stack: Any, channel: int | None, notes: list[str], *,
                   name: str = "INPUT") -> tuple[Any, str, tuple]:
    """The data without its C axis (one channel), its axes and scale."""
    axes, data, scale = stack.axes, stack.data, tuple(stack.scale)
    if "S" in axes:
        raise CommandError(f"{name}: expected a fluorescence stack, got RGB samples (axes {axes})")
    if "C" not in axes:
        if channel not in (None, 0):
            raise CommandError(f"--channel: {name} has no channels, got {channel}")
        return data, axes, scale
    c = axes.index("C")
    n = data.shape[c]
    if channel is None:
        channel = 0
        if n > 1:
            notes.append(f"{name} has {n} channels; checking channel 0 (choose with --channel N)")
    if not 0 <= channel < n:
        raise CommandError(f"--channel: expected an index from 0 to {n - 1}, got {channel}")
    index = [slice(None)] * data.ndim
    index[c] = channel
    keep = [i for i in range(len(axes)) if i != c]
    return data[tuple(index)], "".join(axes[i] for i in keep), tuple(scale[i] for i in keep)


def _series_axis(data: Any, axes: str, scale: tuple, wanted: str | None,
                 notes: list[str]) -> tuple[Any, str, tuple, str]:
    """Pick the acquisition axis; a depth check of a time series uses its first time point."""
    n_time = data.shape[axes.index("T")] if "T" in axes else 0
    kind = wanted or ("t" if n_time > 1 else "z")
    if kind == "t" and n_time < 2:
        raise CommandError(f"--axis t: expected INPUT with at least 2 time points, got axes {axes}"
                           f"{'' if not n_time else ' with 1 time point'}; use --axis z")
    if kind == "z":
        if "Z" not in axes:
            raise CommandError(f"--axis z: expected INPUT with a Z axis, got axes {axes}")
        if n_time:
            t = axes.index("T")
            if n_time > 1:
                notes.append(f"INPUT has {n_time} time points; checking time point 0 along z")
            index = [slice(None)] * data.ndim
            index[t] = 0
            data = data[tuple(index)]
            scale = tuple(s for i, s in enumerate(scale) if i != t)
            axes = axes.replace("T", "")
    return data, axes, scale, kind


def run(args: argparse.Namespace) -> int:
    from ..io import read_stack
    from .._shared.validation import check_number

    outputs = _outputs(args)
    tolerance = parse_tolerance(args.tolerance)
    if args.interval is not None:
        check_number(args.interval, name="--interval", low=0, low_open=True)
    if args.reverse is not None and not Path(args.reverse).is_file():
        raise CommandError(f"--reverse: {args.reverse}: no such file")
    stack = read_stack(args.input)
    if args.reverse is not None:
        return _run_two_pass(args, stack, tolerance, outputs)
    notes: list[str] = []
    data, axes, scale = select_channel(stack, args.channel, notes)
    data, axes, scale, kind = _series_axis(data, axes, scale, args.axis, notes)
    letter = "T" if kind == "t" else "Z"
    axis = axes.index(letter)
    interval = args.interval if args.interval is not None else float(scale[axis])
    interval_from = "--interval" if args.interval is not None else "file"
    if args.interval is None and interval == 1.0:
        unit = "s between time points" if kind == "t" else "um between slices"
        notes.append(f"the file gives a step of 1 {unit} (also the default when it has none); "
                     "pass --interval if that is not right")
    report = _estimate(data, axis, kind, interval, tolerance)
    if outputs["output"] is not None:
        _write_corrected(outputs["output"], data, axes, scale, report, axis, args)
    if outputs["equalise"] is not None:
        _write_equalised(outputs["equalise"], data, axes, scale, axis, args)
    truth = _truth(stack)
    if outputs["plot"] is not None:
        _write_plot(outputs["plot"], report, truth)
    if outputs["report"] is not None:
        payload = _payload(args, tolerance, {"axis": kind, "interval": interval,
                                             "interval_unit": "s" if kind == "t" else "um",
                                             "interval_from": interval_from,
                                             "rescale": args.rescale if outputs["output"] else None})
        payload.update(report.to_dict())
        payload["caveat"] = report.caveat or None
        if truth:
            payload["demo_truth"] = truth
        write_json(outputs["report"], payload)
    _print_notes(notes)
    print(report.summary)
    if report.caveat:
        print(f"caveat: {report.caveat}")
    _print_written(outputs)
    return EXIT_OVER_TOLERANCE if report.exceeds_tolerance else EXIT_OK


def _estimate(data: Any, axis: int, kind: str, interval: float, tolerance: float) -> Any:
    from ..kernels import estimate_bleaching

    with TerminalProgress("bleaching") as progress:
        return estimate_bleaching(data, axis=axis, interval=interval, tolerance=tolerance,
                                  axis_kind="time" if kind == "t" else "depth", progress=progress)


def _truth(stack: Any) -> dict[str, Any] | None:
    truth = stack.metadata.get("truth") if isinstance(stack.metadata, dict) else None
    return truth if isinstance(truth, dict) else None


def _payload(args: argparse.Namespace, tolerance: float, parameters: dict[str, Any]) -> dict[str, Any]:
    return {
        "stackdepth_version": __version__,
        "command": "bleaching",
        "input": str(Path(args.input).resolve()),
        "reverse": str(Path(args.reverse).resolve()) if args.reverse else None,
        "parameters": {**parameters, "tolerance": tolerance, "tolerance_note": TOLERANCE_NOTE,
                       "channel": args.channel},
        "caution": CAUTION,
        "null_means": "infinite (JSON has no infinity), or not measured",
    }


def _write_corrected(path: Path, data: Any, axes: str, scale: tuple, report: Any, axis: int,
                     args: argparse.Namespace) -> None:
    from ..io import write_ome_tiff
    from ..kernels import correct_bleaching

    with TerminalProgress("correcting") as progress:
        corrected = correct_bleaching(data, report, rescale=args.rescale, axis=axis, progress=progress)
    metadata = {"bleaching_correction": {
        "source": str(Path(args.input).resolve()), "rescale": args.rescale,
        "channel": args.channel, "rate_per_frame": report.rate_per_frame,
        "model": report.model, "offset": report.offset, "summary": report.summary,
        "caution": CAUTION, "stackdepth_version": __version__}}
    write_ome_tiff(path, corrected, axes=axes, scale=scale, metadata=metadata,
                   overwrite=args.overwrite)


def _write_equalised(path: Path, data: Any, axes: str, scale: tuple, axis: int,
                     args: argparse.Namespace) -> None:
    from ..io import write_ome_tiff
    from ..kernels import equalise_to_reference

    with TerminalProgress("equalising") as progress:
        equalised = equalise_to_reference(data, reference=0, axis=axis, progress=progress)
    metadata = {"contrast_equalisation": {
        "source": str(Path(args.input).resolve()), "reference_frame": 0, "channel": args.channel,
        "note": EQUALISE_NOTE, "stackdepth_version": __version__}}
    write_ome_tiff(path, equalised, axes=axes, scale=scale, metadata=metadata,
                   overwrite=args.overwrite)


def _write_plot(path: Path, report: Any, truth: dict[str, Any] | None) -> None:
    from ..plots.bleaching import bleaching_figure

    rate = truth.get("bleach_rate_per_frame") if truth and report.axis_kind == "time" else None
    fig = bleaching_figure(report, truth_rate=rate)
    atomic_write(path, lambda tmp: fig.savefig(tmp, format="png", dpi=120))


def _print_written(outputs: dict[str, Path | None]) -> None:
    for path in outputs.values():
        if path is not None:
            print(f"wrote {path}")
    if outputs.get("output") is not None:
        print(f"caution: {CAUTION}")


def _one_stack(stack: Any, channel: int | None, name: str,
               notes: list[str]) -> tuple[Any, str, tuple]:
    data, axes, scale = select_channel(stack, channel, notes, name=name)
    if "T" in axes:
        t = axes.index("T")
        if data.shape[t] != 1:
            raise CommandError(f"{name}: expected one z-stack per pass, got {data.shape[t]} time points")
        data = data[(slice(None),) * t + (0,)]
        scale = tuple(s for i, s in enumerate(scale) if i != t)
        axes = axes.replace("T", "")
    if "Z" not in axes:
        raise CommandError(f"{name}: expected a z-stack with a Z axis, got axes {axes}")
    return data, axes, scale


def _run_two_pass(args: argparse.Namespace, stack: Any, tolerance: float,
                  outputs: dict[str, Path | None]) -> int:
    from ..io import read_stack
    from ..kernels import separate_bleaching
    from ..plots.bleaching import two_pass_figure

    if args.axis == "t":
        raise CommandError("--axis t: expected z with --reverse (two passes over one z-stack)")
    notes: list[str] = []
    forward, axes, scale = _one_stack(stack, args.channel, "INPUT", notes)
    second = read_stack(args.reverse)
    reverse, axes_r, _ = _one_stack(second, args.channel, "--reverse", notes)
    if axes_r != axes or tuple(reverse.shape) != tuple(forward.shape):
        raise CommandError(f"--reverse: expected the shape {tuple(forward.shape)} and axes {axes} "
                           f"of INPUT, got {tuple(reverse.shape)} and {axes_r}")
    z = axes.index("Z")
    z_step = args.interval if args.interval is not None else float(scale[z])
    with TerminalProgress("two-pass") as progress:
        result = separate_bleaching(forward, reverse, z_step=z_step, axis=z, progress=progress)
    exceeds = bool(result.fraction_lost > tolerance)
    verdict = (f"That loss {'exceeds' if exceeds else 'is within'} the {tolerance * 100:.3g} % "
               "tolerance.")
    truth = _truth(stack)
    if outputs["plot"] is not None:
        fig = two_pass_figure(result, truth=truth)
        atomic_write(outputs["plot"], lambda tmp: fig.savefig(tmp, format="png", dpi=120))
    if outputs["report"] is not None:
        payload = _payload(args, tolerance, {"axis": "z", "z_step_um": z_step,
                                             "z_step_from": "--interval" if args.interval else "file"})
        payload.update(result.to_dict())
        payload.update({"exceeds_tolerance": exceeds, "tolerance": tolerance, "verdict": verdict})
        if truth:
            payload["demo_truth"] = truth
        write_json(outputs["report"], payload)
    _print_notes(notes)
    print(f"{result.summary} {verdict}")
    print(f"caveat: {result.caveat}")
    _print_written(outputs)
    return EXIT_OVER_TOLERANCE if exceeds else EXIT_OK
