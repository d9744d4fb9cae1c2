"""``stackdepth bleaching INPUT``: did the signal fade during acquisition, and is it within tolerance?

Prints one sentence with the verdict, decided from the 95 % interval of the
fraction lost. Exit status 0 when the whole interval is within the tolerance,
4 when it spans the tolerance (inconclusive: more photons, frames or a second
look are needed), 3 when the whole interval exceeds it (so a pipeline can
stop), 2 for bad input.
``-o`` writes a bleaching-corrected float32 OME-TIFF, ``--equalise`` a copy
with every frame's contrast equalised to frame 0 (for display and
segmentation only), ``--report`` a JSON report (every field of the estimate
plus input, parameters, version and caveat), ``--plot`` a PNG of the measured
and modelled signal with the tolerance line. With ``--reverse SECOND_PASS``
the two files are two passes over the same stack (the second acquired
deepest-first) and bleaching per exposure and the attenuation length are
separated. JSON has no infinity: an infinite half-life or interval end is
stored as ``null``. The work itself is in :mod:`viewer_plugin.jobs.bleaching`.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from .._shared.jsonio import write_json
from ..jobs.choices import BLEACHING_CAVEAT, EQUALISE_NOTE, RESCALE, TOLERANCE_NOTE
from ._common import (
    EXIT_OK,
    EXIT_OVER_TOLERANCE,
    CommandError,
    TerminalProgress,
    check_outputs,
    finish_parser,
    print_notes,
    read_input,
    save_figure,
    write_image,
)

#: The 95 % interval of the loss spans the tolerance: neither within nor above it.
EXIT_INCONCLUSIVE = 4
#: Exit status of each verdict.
VERDICT_EXIT = {"within": EXIT_OK, "inconclusive": EXIT_INCONCLUSIVE, "exceeds": EXIT_OVER_TOLERANCE}

OUTPUTS = ("output", "report", "plot", "equalise")
IMAGES = ("output", "equalise")


def register(sub: Any) -> None:
    parser = sub.add_parser(
        "bleaching", help="check a time series or z-stack for photobleaching",
        description="Measure how much the foreground signal faded along the acquisition "
        "(time points, or the slices of one z-stack), fit first-order bleaching, and compare the "
        "95 % interval of the loss with a tolerance. Exit status: 0 within tolerance (the whole "
        "interval at or below it), 4 inconclusive (the interval spans it), 3 above it (the whole "
        "interval above it), 2 for bad input. "
        "One z-stack alone cannot tell bleaching from depth attenuation: acquire a second pass "
        "deepest-first and give it with --reverse.")
    parser.add_argument("input", metavar="INPUT", help="OME-TIFF or TIFF (time series or z-stack)")
    parser.add_argument("--axis", choices=("t", "z"), default=None,
                        help="acquisition axis (default: t when INPUT has time points, else z)")
    parser.add_argument("--interval", type=float, default=None, metavar="S",
                        help="seconds between time points (for --axis z: the z-step in um); "
                        "default: from the file")
    parser.add_argument("--tolerance", default="0.10", metavar="F",
                        help="accepted fraction of signal lost, e.g. 0.1 or 10%% ("
                        + TOLERANCE_NOTE.replace("%", "%%") + ")")
    parser.add_argument("--report", default=None, metavar="R.json", help="write a JSON report")
    parser.add_argument("--plot", default=None, metavar="P.png", help="write a PNG of the check")
    parser.add_argument("-o", "--output", default=None, metavar="CORRECTED",
                        help="write the bleaching-corrected series here (.ome.tif, float32)")
    parser.add_argument("--rescale", choices=RESCALE, default="model",
                        help="how -o rescales each frame: divide by the fitted decay (model, "
                        "default) or by the frame's measured foreground signal (measured)")
    parser.add_argument("--equalise", default=None, metavar="OUT",
                        help="also write a copy (.ome.tif) whose frames' contrast is equalised to "
                        "frame 0 (histogram specification: for display and segmentation, not for "
                        "intensities)")
    parser.add_argument("--reverse", default=None, metavar="SECOND_PASS",
                        help="second pass over the same stack, acquired deepest-first (stored "
                        "surface first): separate bleaching from attenuation")
    finish_parser(parser, run, channel_help="channel to check (default 0 when INPUT has several)")


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
    out = check_outputs(args, OUTPUTS, IMAGES)
    for option in IMAGES:
        if out[option] is not None and args.reverse is not None:
            raise CommandError(f"--{option}: not available with --reverse; the two-pass mode only "
                               "measures (correct attenuation with 'stackdepth attenuation')")
    return out


def _payload(args: argparse.Namespace, provenance: dict[str, Any]) -> dict[str, Any]:
    return {
        "stackdepth_version": provenance["stackdepth_version"],
        "command": "bleaching",
        "input": str(Path(args.input).resolve()),
        "reverse": str(Path(args.reverse).resolve()) if args.reverse else None,
        "parameters": provenance,
        "caution": BLEACHING_CAVEAT,
        "null_means": "infinite (JSON has no infinity), or not measured",
    }


def run(args: argparse.Namespace) -> int:
    from ..jobs import BleachingOptions, bleaching_record, check_bleaching, select

    outputs = _outputs(args)
    tolerance = parse_tolerance(args.tolerance)
    if args.reverse is not None and not Path(args.reverse).exists():
        raise CommandError(f"--reverse: {args.reverse}: no such file")
    stack = read_input(args.input)
    if args.reverse is not None:
        return _run_two_pass(args, stack, tolerance, outputs)
    selection = select(stack, channel=args.channel, several_channels="first")
    kind = {"t": "time", "z": "depth", None: None}[args.axis]
    options = BleachingOptions(axis_kind=kind, interval=args.interval, tolerance=tolerance)
    with TerminalProgress("bleaching") as progress:
        checked = check_bleaching(selection, options, progress=progress)
    report = checked.report
    if outputs["output"] is not None:
        _write_copy(outputs["output"], checked, "correcting", args, rescale=args.rescale)
    if outputs["equalise"] is not None:
        _write_copy(outputs["equalise"], checked, "equalising", args)
    if outputs["plot"] is not None:
        from ..plots.bleaching import bleaching_figure

        truth = stack.truth or {}
        rate = truth.get("bleach_rate_per_frame") if report.axis_kind == "time" else None
        save_figure(outputs["plot"], bleaching_figure(report, truth_rate=rate))
    if outputs["report"] is not None:
        payload = _payload(args, dict(checked.provenance, rescale=args.rescale
                                      if outputs["output"] else None))
        payload.update(bleaching_record(checked))
        if stack.truth:
            payload["demo_truth"] = stack.truth
        write_json(outputs["report"], payload)
    print_notes(selection.notes + checked.notes)
    print(report.summary)
    if report.caveat:
        print(f"caveat: {report.caveat}")
    _print_written(outputs)
    return VERDICT_EXIT[checked.report.verdict]


def _write_copy(path: Path, checked: Any, label: str, args: argparse.Namespace, *,
                rescale: str | None = None) -> None:
    from ..jobs import correct_checked, equalise_checked

    with TerminalProgress(label) as progress:
        if rescale is None:
            copy = equalise_checked(checked, progress=progress)
            key = "contrast_equalisation"
        else:
            copy = correct_checked(checked, rescale=rescale, progress=progress)
            key = "bleaching_correction"
    write_image(path, copy.data, copy.geometry, metadata={key: copy.provenance},
                overwrite=args.overwrite)


def _print_written(outputs: dict[str, Path | None]) -> None:
    for path in outputs.values():
        if path is not None:
            print(f"wrote {path}")
    if outputs.get("output") is not None:
        print(f"caution: {BLEACHING_CAVEAT}")
    if outputs.get("equalise") is not None:
        print(f"note: {EQUALISE_NOTE}")


def _run_two_pass(args: argparse.Namespace, stack: Any, tolerance: float,
                  outputs: dict[str, Path | None]) -> int:
    from ..jobs import select, separate_passes
    from ..plots.bleaching import two_pass_figure

    if args.axis == "t":
        raise CommandError("--axis t: expected z with --reverse (two passes over one z-stack)")
    forward = select(stack, channel=args.channel, several_channels="first", several_times="first")
    reverse = select(read_input(args.reverse, name="--reverse"), channel=args.channel,
                     several_channels="first", several_times="first", name="--reverse")
    with TerminalProgress("two-pass") as progress:
        two = separate_passes(forward, reverse, z_step=args.interval, tolerance=tolerance,
                              progress=progress)
    if outputs["plot"] is not None:
        save_figure(outputs["plot"], two_pass_figure(two.result, truth=stack.truth))
    if outputs["report"] is not None:
        payload = _payload(args, two.provenance)
        payload.update(two.result.to_dict())
        if stack.truth:
            payload["demo_truth"] = stack.truth
        write_json(outputs["report"], payload)
    print_notes(forward.notes + reverse.notes + two.notes)
    print(two.result.summary)
    print(f"caveat: {two.result.caveat}")
    _print_written(outputs)
    return VERDICT_EXIT[two.result.verdict]
