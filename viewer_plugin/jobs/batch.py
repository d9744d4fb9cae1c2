"""The batch figure job: one comparable figure per stack, many stacks in one call.

All figures of one call share one depth range (the widest of the inputs unless
given), with ``same_contrast`` one display range, and occlusion figures one
density (that of the deepest stack unless given), so panels made from
different stacks compare. A stack that fails is recorded with its error and
the others go on.
"""

from __future__ import annotations

import csv
import dataclasses
import io
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence

from .._shared.atomic import atomic_write
from .._shared.progress import Cancelled, Progress, report_progress, sub_progress
from .._shared.validation import fail
from .figure import FIGURE_SUFFIXES
from .projection import ProjectionOptions, project_stack
from .stack import axis_step, select

__all__ = ["BatchRow", "SUMMARY_COLUMNS", "find_inputs", "make_figures", "planned_outputs",
           "write_summary"]

#: Columns of ``summary.csv``, one row per input.
SUMMARY_COLUMNS = ("file", "status", "voxel_size_um", "depth_range_um", "display_range",
                   "saturated_fraction", "outputs")
#: Files and folders a batch takes from a folder given as input.
_IMAGE_SUFFIXES = (".ome.tif", ".ome.tiff", ".tif", ".tiff", ".ome.zarr")


@dataclass
class BatchRow:
    """One input of a batch: what was made from it, or why not."""

    file: Path
    status: str = "ok"
    voxel_size_um: list[float] | None = None
    depth_range_um: list[float] | None = None
    display_range: list[float] | None = None
    saturated_fraction: float | None = None
    outputs: list[Path] = field(default_factory=list)
    selection: Any = field(default=None, repr=False)

    def as_csv(self) -> list[str]:
        def fmt(values: Any) -> str:
            if values is None:
                return ""
            if isinstance(values, (list, tuple)):
                return " ".join(f"{float(v):.6g}" for v in values)
            return f"{float(values):.6g}"

        return [str(self.file), self.status, fmt(self.voxel_size_um), fmt(self.depth_range_um),
                fmt(self.display_range), fmt(self.saturated_fraction),
                " ".join(p.name for p in self.outputs)]


def find_inputs(paths: Sequence[str | Path]) -> list[Path]:
    """Files given, and every OME-TIFF/TIFF file and OME-Zarr folder inside folders given (sorted)."""
    found: list[Path] = []
    for given in map(Path, paths):
        if given.is_dir() and not given.name.lower().endswith(".zarr"):
            found += sorted(p for p in given.iterdir() if p.name.lower().endswith(_IMAGE_SUFFIXES)
                            and not p.name.startswith("."))
        else:
            found.append(given)
    return found


def planned_outputs(inputs: Sequence[Path], outdir: Path, fmt: str) -> dict[Path, Path]:
    """The figure file of each input: ``<outdir>/<stem>.<fmt>``, stems made unique."""
    if "." + fmt not in FIGURE_SUFFIXES:
        fail("format", "one of " + ", ".join(s[1:] for s in FIGURE_SUFFIXES), fmt)
    taken: dict[str, int] = {}
    out = {}
    for path in inputs:
        stem = path.name.split(".")[0] or path.name
        taken[stem] = taken.get(stem, 0) + 1
        name = stem if taken[stem] == 1 else f"{stem}_{taken[stem]}"
        out[path] = outdir / f"{name}.{fmt}"
    return out


def _plan(row: BatchRow, channel: int | None, z_step: float | None) -> tuple[float, int]:
    """Open one input (lazily) and return its z-step in µm and its slices; errors go to the row."""
    from ..io import read_stack

    # lazily: a batch holds many stacks open at once, each is read when its figure is made
    selection = select(read_stack(row.file, lazy=True), channel=channel, several_times="error",
                       name=str(row.file))
    stack = selection.stack
    axis = stack.axis("Z")
    if axis is None:
        fail(str(row.file), "a z-stack (a Z axis)", f"<axes {stack.axes}>")
    step, _, _ = axis_step(stack, axis, z_step)
    row.selection = selection
    return step, int(stack.data.shape[axis])


def _shared_contrast(rows: list[BatchRow]) -> tuple[float, float]:
    """One display range for all inputs: the lowest and highest of their automatic limits."""
    from ..kernels import display_limits

    limits = [display_limits(r.selection.stack.data, axis=r.selection.stack.axis("Z"))
              for r in rows]
    return min(lo for lo, _ in limits), max(hi for _, hi in limits)


def make_figures(inputs: Sequence[Path], outputs: dict[Path, Path], options: ProjectionOptions, *,
                 channel: int | None = None, same_contrast: bool = False, overwrite: bool = False,
                 blank_at_or_below: float | None = None, progress: Progress = None) -> list[BatchRow]:
    """Make one figure per input with shared depth (and, if asked, display) range.

    Parameters
    ----------
    inputs : sequence of Path
        Stacks (see :func:`find_inputs`).
    outputs : dict
        Figure path per input (see :func:`planned_outputs`).
    options : ProjectionOptions
        Method and display options; ``depth_range`` None means the widest
        depth of the inputs, shared by all; for "occlusion", ``density`` None
        means the default density of the deepest input, shared by all.
    channel : int, optional
        Channel of multi-channel inputs.
    same_contrast : bool
        Share one display range (the widest automatic one) unless ``options.clim`` is given.
    overwrite : bool
        Replace existing figure files.
    blank_at_or_below : float, optional
        "max": pixels whose maximum is at or below this value are drawn black.
    progress : callable, optional
        ``progress(done, total)`` over inputs; may raise Cancelled.

    Returns
    -------
    list of BatchRow
        One per input, in order; ``status`` is "ok" or the error text.
    """
    from ..kernels.projection import default_density

    rows = [BatchRow(path) for path in inputs]
    plans: list[tuple[float, int]] = []
    for row in rows:
        try:
            plans.append(_plan(row, channel, options.z_step))
        except (ValueError, OSError) as exc:
            row.status = f"error: {exc}"
    ready = [r for r in rows if r.status == "ok"]
    shared = options
    if ready and options.depth_range is None:
        deepest = max(step * (n - 1) for step, n in plans)
        shared = dataclasses.replace(shared, depth_range=(0.0, max(deepest, 1e-9)))
    if ready and options.method == "occlusion" and options.density is None:
        shared = dataclasses.replace(shared, density=min(default_density(n, step)
                                                         for step, n in plans))
    if ready and same_contrast and options.clim is None:
        shared = dataclasses.replace(shared, clim=_shared_contrast(ready))
    for done, row in enumerate(rows):
        if row.status == "ok":
            _one_figure(row, outputs[row.file], shared, sub_progress(progress, done, len(rows)),
                        overwrite=overwrite, blank_at_or_below=blank_at_or_below)
        report_progress(progress, done + 1, len(rows))
    return rows


def _one_figure(row: BatchRow, path: Path, options: ProjectionOptions, progress: Progress,
                **figure: Any) -> None:
    """Project one input and write its figure (*figure*: options of write_figure); an error is
    recorded on the row."""
    from .figure import write_figure

    try:
        projected = project_stack(row.selection, options, progress=progress)
        files = write_figure(projected, path, **figure)
    except Cancelled:
        raise
    except (ValueError, OSError) as exc:
        row.status = f"error: {exc}"
        return
    record = projected.provenance
    row.voxel_size_um = record.get("voxel_size_um")
    row.depth_range_um = record.get("depth_range_um")
    row.display_range = record.get("clim_used")
    row.saturated_fraction = getattr(projected.result, "saturated_fraction", None)
    row.outputs = [files.figure, files.sidecar, files.methods]


def write_summary(path: Path, rows: Sequence[BatchRow]) -> Path:
    """``summary.csv``: one row per input (file, status, voxel size, ranges, saturation, outputs)."""
    text = io.StringIO()
    writer = csv.writer(text, lineterminator="\n")
    writer.writerow(SUMMARY_COLUMNS)
    for row in rows:
        writer.writerow(row.as_csv())
    return atomic_write(path, lambda tmp: tmp.write_text(text.getvalue(), encoding="utf-8"))
