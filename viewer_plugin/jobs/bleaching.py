"""The bleaching jobs: check a series, correct or equalise a copy, separate two passes."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

from .._shared.progress import Progress
from .._shared.validation import check_choice, check_number, fail
from .choices import (
    BLEACHING_CAVEAT,
    DEFAULT_TOLERANCE,
    EQUALISE_NOTE,
    TOLERANCE_NOTE,
    VERDICT_RULE,
)
from .provenance import provenance
from .stack import Corrected, Selection, axis_step, geometry_of, select

__all__ = [
    "BleachingOptions",
    "Checked",
    "TwoPass",
    "bleaching_record",
    "check_bleaching",
    "correct_checked",
    "equalise_checked",
    "separate_passes",
]


@dataclass(frozen=True)
class BleachingOptions:
    """Options of the bleaching check.

    Attributes
    ----------
    axis_kind : {"time", "depth"} or None
        The acquisition axis: time points, or the slices of one z-stack;
        None: time when the stack has several time points, else depth.
    interval : float or None
        Seconds between time points (µm between slices for depth); None
        takes the stack's scale.
    tolerance : float
        Accepted fraction of signal lost (0.10 is common practice).
    """

    axis_kind: str | None = None
    interval: float | None = None
    tolerance: float = DEFAULT_TOLERANCE


@dataclass(frozen=True)
class Checked:
    """One series' bleaching check and what it was measured on."""

    selection: Selection
    report: Any
    axis: int
    options: BleachingOptions
    interval_from: str
    notes: tuple[str, ...]
    provenance: dict[str, Any]

    @property
    def exceeds(self) -> bool:
        """Whether the whole 95 % interval of the loss is above the tolerance."""
        return bool(self.report.exceeds_tolerance)


def _series_axis(selection: Selection, kind: str | None) -> tuple[Selection, int, str, tuple[str, ...]]:
    """The series to check, its acquisition axis and kind; a depth check takes one time point."""
    stack = selection.stack
    n_time = int(stack.data.shape[stack.axes.index("T")]) if "T" in stack.axes else 0
    kind = kind or ("time" if n_time > 1 else "depth")
    kind = check_choice(kind, name="axis_kind", choices=("time", "depth"))
    if kind == "time":
        if n_time < 2:
            fail("--axis t", "a series with at least 2 time points",
                 f"<axes {stack.axes}{' with 1 time point' if n_time else ''}>", hint="use --axis z")
        return selection, stack.axes.index("T"), kind, ()
    notes: tuple[str, ...] = ()
    if n_time:
        picked = select(stack, several_times="first")
        selection = dataclasses.replace(selection, stack=picked.stack, time=picked.time)
        notes = picked.notes
    stack = selection.stack
    if "Z" not in stack.axes:
        fail("--axis z", "a stack with a Z axis", f"<axes {stack.axes}>")
    return selection, stack.axes.index("Z"), kind, notes


def check_bleaching(selection: Selection, options: BleachingOptions, *,
                    progress: Progress = None) -> Checked:
    """Check a time series (or the slices of one stack) for bleaching: the one check job.

    Parameters
    ----------
    selection : Selection
        One channel of a time series (T kept) or one z-stack.
    options : BleachingOptions
    progress : callable, optional

    Returns
    -------
    Checked

    Raises
    ------
    ParameterError
        For a bad option, a series too short or without a foreground.
    """
    from ..kernels import estimate_bleaching

    tolerance = check_number(options.tolerance, name="tolerance", low=0, high=1, low_open=True,
                             high_open=True)
    selection, axis, kind, notes = _series_axis(selection, options.axis_kind)
    stack = selection.stack
    if kind == "depth":
        interval, source, step_notes = axis_step(stack, axis, options.interval, name="interval")
        notes += step_notes
    else:
        interval = check_number(options.interval if options.interval is not None
                                else stack.scale[axis], name="interval", low=0, low_open=True)
        source = "given" if options.interval is not None else "file"
        if source == "file" and interval == 1.0:
            notes += ("the file gives 1 s between time points (also the default when it has "
                      "none); give the interval if that is not right",)
    report = estimate_bleaching(stack.data, axis=axis, interval=interval, tolerance=tolerance,
                                axis_kind=kind, progress=progress)
    record = provenance("bleaching", selection, axis=kind, axes=stack.axes, interval=interval,
                        interval_unit="s" if kind == "time" else "\u00b5m", interval_from=source,
                        tolerance=tolerance, tolerance_note=TOLERANCE_NOTE,
                        verdict_rule=VERDICT_RULE)
    options = dataclasses.replace(options, axis_kind=kind, interval=interval, tolerance=tolerance)
    return Checked(selection, report, axis, options, source, notes, record)


def correct_checked(checked: Checked, *, rescale: str = "model", progress: Progress = None) -> Corrected:
    """A bleaching-corrected float32 copy of the checked series (lazy for dask input)."""
    from ..kernels import correct_bleaching

    stack = checked.selection.stack
    data = correct_bleaching(stack.data, checked.report, rescale=rescale, axis=checked.axis,
                             progress=progress)
    record = dict(checked.provenance, job="bleaching correction", rescale=rescale,
                  rate_per_frame=checked.report.rate_per_frame, model=checked.report.model,
                  offset=checked.report.offset, summary=checked.report.summary,
                  caution=BLEACHING_CAVEAT)
    return Corrected(data, geometry_of(stack), record)


def equalise_checked(checked: Checked, *, progress: Progress = None) -> Corrected:
    """A copy with every frame's contrast equalised to frame 0 (display and segmentation only)."""
    from ..kernels import equalise_to_reference

    stack = checked.selection.stack
    data = equalise_to_reference(stack.data, reference=0, axis=checked.axis, progress=progress)
    record = dict(checked.provenance, job="contrast equalisation", reference_frame=0,
                  note=EQUALISE_NOTE)
    return Corrected(data, geometry_of(stack), record)


def bleaching_record(checked: Checked) -> dict[str, Any]:
    """The report entries of one check (every field of the estimate, arrays as lists)."""
    out = checked.report.to_dict()
    out["caveat"] = checked.report.caveat or None
    return out


@dataclass(frozen=True)
class TwoPass:
    """A two-pass separation; its verdict against the tolerance is in the result."""

    result: Any
    tolerance: float
    notes: tuple[str, ...]
    provenance: dict[str, Any]

    @property
    def exceeds(self) -> bool:
        """Whether the whole 95 % interval of the forward pass's loss is above the tolerance."""
        return bool(self.result.exceeds_tolerance)


def separate_passes(forward: Selection, reverse: Selection, *, z_step: float | None = None,
                    tolerance: float = DEFAULT_TOLERANCE, progress: Progress = None) -> TwoPass:
    """Separate bleaching from attenuation with two passes over one stack.

    Parameters
    ----------
    forward, reverse : Selection
        The two passes (one z-stack each, both stored surface first; the
        reverse pass acquired deepest-first).
    z_step : float, optional
        Slice spacing in µm; default the forward pass's scale.
    tolerance : float
        Accepted fraction of signal lost by the forward pass.
    progress : callable, optional

    Returns
    -------
    TwoPass

    Raises
    ------
    ParameterError
        For passes of different shapes or axes, or without a Z axis.
    """
    from ..kernels import separate_bleaching

    tolerance = check_number(tolerance, name="tolerance", low=0, high=1, low_open=True,
                             high_open=True)
    fwd, rev = forward.stack, reverse.stack
    for name, stack in (("INPUT", fwd), ("--reverse", rev)):
        if "Z" not in stack.axes or "T" in stack.axes:
            fail(name, "one z-stack per pass (a Z axis, no time axis)", f"<axes {stack.axes}>")
    if fwd.axes != rev.axes or tuple(fwd.data.shape) != tuple(rev.data.shape):
        fail("--reverse", f"the shape {tuple(fwd.data.shape)} and axes {fwd.axes} of INPUT",
             f"<{tuple(rev.data.shape)} and {rev.axes}>")
    axis = fwd.axes.index("Z")
    step, source, notes = axis_step(fwd, axis, z_step)
    result = separate_bleaching(fwd.data, rev.data, z_step=step, tolerance=tolerance, axis=axis,
                                progress=progress)
    record = provenance("two-pass bleaching", forward, reverse_file=
                        str(rev.path) if rev.path is not None else rev.name, axis="z",
                        z_step_um=step, z_step_from=source, tolerance=tolerance,
                        tolerance_note=TOLERANCE_NOTE, verdict=result.verdict,
                        verdict_rule=VERDICT_RULE)
    return TwoPass(result, tolerance, notes, record)
