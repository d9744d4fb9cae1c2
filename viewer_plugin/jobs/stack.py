"""Picking what a job works on, and the geometry of what it produces.

Every job takes a :class:`~viewer_plugin._shared.stack.Stack` (from a file, a
napari layer or an array). The helpers here pick one channel or time point,
find the depth axis and its step in µm, and describe each output's axes and
µm scale as a :class:`Geometry`, computed once for files, layers and figures.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._shared.stack import UNITS, Stack
from .._shared.validation import check_int, check_number, fail, is_dask

__all__ = ["Corrected", "Geometry", "Selection", "axis_step", "drop_axis",
           "geometry_of", "select"]


@dataclass(frozen=True)
class Geometry:
    """Axes and physical placement of an output image.

    Attributes
    ----------
    axes : str
        One letter per axis, e.g. "YX", "TYX" or "YXS" (S: RGB samples, last).
    scale : tuple of float
        Step per axis (µm for Z/Y/X, s for T, 1 for C and S).
    translate : tuple of float
        Position of the first pixel per axis, in the units of *scale*.
    """

    axes: str
    scale: tuple[float, ...]
    translate: tuple[float, ...]

    @property
    def units(self) -> tuple[str, ...]:
        """Unit per axis ("µm", "s" or "")."""
        return tuple(UNITS.get(a, "") for a in self.axes)

    @property
    def image_axes(self) -> str:
        """The two axes of the image plane: the last two that are not RGB samples."""
        return self.axes.replace("S", "")[-2:]

    @property
    def pixel_size_um(self) -> tuple[float, float]:
        """Size of one image pixel (rows, columns) in µm: the steps of :attr:`image_axes`."""
        rows, cols = self.image_axes
        return float(self.scale[self.axes.index(rows)]), float(self.scale[self.axes.index(cols)])

    def with_samples(self) -> "Geometry":
        """The same geometry with an RGB sample axis "S" appended (step 1)."""
        if self.axes.endswith("S"):
            return self
        return Geometry(self.axes + "S", self.scale + (1.0,), self.translate + (0.0,))

    def plane(self) -> "Geometry":
        """Only the image plane (and samples): what one 2-D figure shows."""
        keep = [i for i, a in enumerate(self.axes) if a in self.image_axes or a == "S"]
        return Geometry("".join(self.axes[i] for i in keep), tuple(self.scale[i] for i in keep),
                        tuple(self.translate[i] for i in keep))


@dataclass(frozen=True)
class Corrected:
    """A corrected copy of a stack: new data, its geometry and provenance (the source is untouched)."""

    data: Any
    geometry: Geometry
    provenance: dict[str, Any]
    notes: tuple[str, ...] = ()


def geometry_of(stack: Stack) -> Geometry:
    """The geometry of *stack* itself."""
    return Geometry(stack.axes, tuple(float(s) for s in stack.scale),
                    tuple(float(t) for t in stack.translate))


def drop_axis(geometry: Geometry, axis: int) -> Geometry:
    """*geometry* without axis number *axis* (what a projection along it keeps)."""
    keep = [i for i in range(len(geometry.axes)) if i != axis]
    return Geometry("".join(geometry.axes[i] for i in keep), tuple(geometry.scale[i] for i in keep),
                    tuple(geometry.translate[i] for i in keep))


@dataclass(frozen=True)
class Selection:
    """What a job works on after picking a channel and a time point.

    Attributes
    ----------
    stack : Stack
        The picked data (a view; the source is never copied or changed).
    channel : int or None
        The channel picked (None when the source has no channels).
    channel_name : str or None
        Its name.
    time : int or None
        The time point picked (None when all were kept or there were none).
    notes : tuple of str
        What the user should know about the choice (e.g. "checking channel 0").
    """

    stack: Stack
    channel: int | None = None
    channel_name: str | None = None
    time: int | None = None
    notes: tuple[str, ...] = ()


def _take(stack: Stack, letter: str, index: int) -> Stack:
    """*stack* at position *index* of axis *letter*, that axis removed (a view)."""
    axis = stack.axes.index(letter)
    keep = [i for i in range(len(stack.axes)) if i != axis]
    return dataclasses.replace(
        stack, data=stack.data[(slice(None),) * axis + (index,)],
        axes="".join(stack.axes[i] for i in keep), scale=tuple(stack.scale[i] for i in keep),
        translate=tuple(stack.translate[i] for i in keep),
        channel_names=[] if letter == "C" else list(stack.channel_names))


def select(
    stack: Stack,
    *,
    channel: int | None = None,
    time: int | None = None,
    several_channels: str = "error",
    several_times: str = "keep",
    name: str = "INPUT",
) -> Selection:
    """Pick one channel and, if asked, one time point of *stack*.

    Parameters
    ----------
    stack : Stack
        The source (not modified; the result holds views of its data).
    channel : int, optional
        Channel index; required when the stack has several channels and
        *several_channels* is "error".
    time : int, optional
        Time point to keep; with None the rule *several_times* applies.
    several_channels : {"error", "first"}
        What to do with several channels and no *channel*: refuse, or take
        channel 0 with a note.
    several_times : {"keep", "first", "error"}
        What to do with several time points and no *time*: keep the time
        axis, take time point 0 with a note, or refuse.
    name : str
        How the source is called in messages (e.g. "INPUT", "--reverse").

    Returns
    -------
    Selection

    Raises
    ------
    ParameterError
        For RGB input, a channel or time point out of range, or several
        channels / time points where the rule says "error".
    """
    notes: list[str] = []
    if "S" in stack.axes:
        fail(name, "a stack of intensities", f"<an RGB image (axes {stack.axes})>")
    picked, channel_name = None, None
    if "C" in stack.axes:
        n = int(stack.data.shape[stack.axes.index("C")])
        names = list(stack.channel_names) or [f"channel {i}" for i in range(n)]
        if channel is None and n > 1 and several_channels == "error":
            listed = ", ".join(f"{i}={nm}" for i, nm in enumerate(names))
            fail("--channel", f"a channel index for a file with {n} channels ({listed})", "<none>")
        if channel is None and n > 1:
            notes.append(f"{name} has {n} channels; checking channel 0 (choose with --channel N)")
        picked = 0 if channel is None else check_int(channel, name="--channel")
        if not 0 <= picked < n:
            fail("--channel", f"an index from 0 to {n - 1}", picked)
        channel_name = names[picked]
        stack = _take(stack, "C", picked)
    elif channel not in (None, 0):
        fail("--channel", f"no channel ({name} has none)", channel)
    taken = None
    if "T" in stack.axes:
        n_time = int(stack.data.shape[stack.axes.index("T")])
        if time is None and n_time > 1 and several_times == "error":
            fail(name, "a single z-stack", f"<{n_time} time points>",
                 hint="pick a time point or check the series with 'stackdepth bleaching'")
        if time is None and (n_time == 1 or several_times != "keep"):
            time = 0
            if n_time > 1:
                notes.append(f"{name} has {n_time} time points; using time point 0")
        if time is not None:
            taken = check_int(time, name="--time")
            if not 0 <= taken < n_time:
                fail("--time", f"a time point from 0 to {n_time - 1}", taken)
            stack = _take(stack, "T", taken)
    return Selection(stack, picked, channel_name, taken, tuple(notes))


def axis_step(stack: Stack, axis: int, override: float | None = None, *,
              name: str = "z_step") -> tuple[float, str, tuple[str, ...]]:
    """The step (µm, or s for time) along *axis*, where it came from, and warnings.

    Parameters
    ----------
    stack : Stack
    axis : int
        The axis whose step is wanted (e.g. the depth axis).
    override : float, optional
        A step given by the user; used instead of the stack's scale.
    name : str
        Parameter name for messages.

    Returns
    -------
    step : float
    source : str
        "given" (the override) or "file" (the stack's scale).
    warnings : tuple of str
        E.g. when the file's voxel size looks like a default of 1.

    Raises
    ------
    ParameterError
        When the step is not a positive finite number.
    """
    if override is not None:
        return check_number(override, name=name, low=0.0, low_open=True), "given", ()
    step = float(stack.scale[axis])
    bad = _unusable(stack).get(stack.axes[axis])
    if bad is not None:
        fail(name, f"a positive voxel size along {stack.axes[axis]} from the file",
             f"<PhysicalSize{stack.axes[axis]}={bad!r} in {stack.source}>",
             hint="give the step yourself (--z-step on the command line, 'Override z-step' "
                  "in the dock)")
    if not (math.isfinite(step) and step > 0):
        fail(name, "a positive step along the depth axis", step,
             hint="the file's voxel size is not usable; give the step yourself")
    warnings: tuple[str, ...] = tuple(
        f"{stack.source}: PhysicalSize{letter}={value!r} is not a usable voxel size; 1 \u00b5m "
        "is used instead, so lengths along that axis (and scale bars) are in pixels"
        for letter, value in _unusable(stack).items() if letter in stack.axes)
    spatial = [float(stack.scale[i]) for i, a in enumerate(stack.axes) if a in "ZYX"]
    if spatial and all(s == 1.0 for s in spatial) and not warnings:
        warnings = (f"{stack.source}: voxel size 1 \u00d7 1 \u00d7 1 \u00b5m, probably not in the file; "
                    "depths are in \u00b5m only if the step is: set it with --z-step (command "
                    "line) or 'Override z-step' (dock)",)
    return step, "file", warnings


def check_some_finite(data: Any) -> None:
    """Refuse a stack with no finite value: a strided look first, the whole only if needed."""
    if np.dtype(data.dtype).kind != "f":
        return
    step = max(1, int(data.shape[-1]) // 64)
    sample = data[..., ::step]
    if is_dask(sample):
        sample = sample[(slice(None, None, max(1, int(data.shape[0]) // 8)),)].compute()
    if np.isfinite(np.asarray(sample)).any():
        return
    finite = np.isfinite(data).any()
    if bool(finite.compute() if is_dask(finite) else finite):
        return
    fail("stack", "some finite values", "<only NaN or infinite values>",
         hint="is the file empty or the wrong channel?")


def depth_axis_of(selection: Selection, depth_axis: int | None) -> int:
    """The depth axis of a selection: *depth_axis*, or its "Z" axis; it must hold 2+ slices."""
    stack = selection.stack
    if depth_axis is None:
        depth_axis = stack.axis("Z")
        if depth_axis is None:
            fail("INPUT", "a z-stack (a Z axis)", f"<axes {stack.axes} and shape {tuple(stack.data.shape)}>")
    if not 0 <= depth_axis < stack.data.ndim:
        fail("depth axis", f"an axis from 0 to {stack.data.ndim - 1}", depth_axis)
    if int(stack.data.shape[depth_axis]) < 2:
        fail("INPUT", "a z-stack with 2 or more slices along the depth axis",
             f"<{int(stack.data.shape[depth_axis])} slice>")
    return depth_axis


def _unusable(stack: Stack) -> dict[str, Any]:
    """Voxel sizes the reader found in the file but could not use (axis letter -> value)."""
    bad = stack.metadata.get("unusable_voxel_size") if isinstance(stack.metadata, dict) else None
    return dict(bad) if isinstance(bad, dict) else {}


def describe_voxel(stack: Stack, depth_axis: int, step: float) -> list[float]:
    """[depth step, row step, column step] in µm, for provenance and methods sentences."""
    others = [i for i in range(len(stack.axes)) if i != depth_axis and stack.axes[i] in "ZYX"]
    return [float(step)] + [float(stack.scale[i]) for i in others[-2:]]

