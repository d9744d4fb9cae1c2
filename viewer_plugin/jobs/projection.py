"""The projection job: one function for the command line and the three projection docks."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._shared.progress import Progress, sub_progress
from .._shared.validation import check_choice, check_interval, fail
from .choices import (
    CMAP_KIND,
    DEFAULT_CMAP,
    DEPTH_CODED,
    DEPTH_MAP_CMAPS,
    PROJECTION_METHODS,
    saturation_warning,
)
from .provenance import provenance
from .stack import (
    Geometry,
    Selection,
    axis_step,
    check_some_finite,
    depth_axis_of,
    describe_voxel,
    drop_axis,
    geometry_of,
)

__all__ = ["ProjectionOptions", "Projected", "SideView", "project_stack", "recolour_projected"]


@dataclass(frozen=True)
class ProjectionOptions:
    """What to project and how (the command line's options, the dock's widgets).

    Attributes
    ----------
    method : str
        One of :data:`~viewer_plugin.jobs.choices.PROJECTION_METHODS`.
    cmap : str or None
        Colour map of depth (depth-coded methods; default
        :data:`~viewer_plugin.jobs.choices.DEFAULT_CMAP`); for "occlusion" a
        colour map makes each slice emit the colour of its depth (None: grey);
        for "max" the colours of the depth map in figures (default the first of
        :data:`~viewer_plugin.jobs.choices.DEPTH_MAP_CMAPS`).
    depth_range : (float, float) or None
        Depths in µm at the two ends of the colour map (default: whole stack;
        for "max", of the depth map's colours in figures).
    clim : (float, float) or None
        Display limits in input units (default: automatic percentiles).
    gamma : float
        Brightness exponent (depth-coded methods).
    density : float or None
        Occlusion: extinction per µm of a fully bright voxel (default from the depth).
    view : str
        Occlusion: "top" (first slice in front) or "bottom".
    side_views : bool
        Occlusion: also render the views along the two lateral axes.
    z_step : float or None
        Slice spacing in µm; None takes it from the stack's scale.
    slab_um : float or None
        Project only a slab this thick (µm) centred on slice ``slab_centre``
        ("max" and the depth-coded methods). Depths still count from the
        stack's first slice and the colours span the whole stack's depth
        (unless ``depth_range`` is given), so they mean the same for every slab.
    slab_centre : int or None
        Index of the slab's centre slice along the depth axis (with ``slab_um``).
    """

    method: str = "peak"
    cmap: str | None = None
    depth_range: tuple[float, float] | None = None
    clim: tuple[float, float] | None = None
    gamma: float = 1.0
    density: float | None = None
    view: str = "top"
    side_views: bool = False
    z_step: float | None = None
    slab_um: float | None = None
    slab_centre: int | None = None


@dataclass(frozen=True)
class SideView:
    """An occlusion view along one lateral axis: depth runs down the rows."""

    along: str
    image: np.ndarray
    geometry: Geometry


@dataclass(frozen=True)
class Projected:
    """What :func:`project_stack` returns.

    Attributes
    ----------
    method : str
    result : object
        The kernel's result: a ``PeakProjection`` ("max"), a
        ``DepthCodedProjection`` (depth-coded methods) or an ndarray ("occlusion").
    geometry : Geometry
        Axes and µm scale of the projected image (without RGB samples).
    provenance : dict
        Everything needed to make it again (stored in files, sidecars, layers).
    side_views : tuple of SideView
        Occlusion views along y and x, when asked for.
    notes : tuple of str
        Warnings the user should see (e.g. a voxel size that looks like a default, or more
        than 1 % of saturated pixels).
    """

    method: str
    result: Any
    geometry: Geometry
    provenance: dict[str, Any]
    side_views: tuple[SideView, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def rgb(self) -> np.ndarray | None:
        """The RGB image in [0, 1] (float32, last axis 3), or None for grey results."""
        if self.method in DEPTH_CODED:
            return np.asarray(self.result.rgb)
        if self.method == "occlusion" and np.ndim(self.result) == len(self.geometry.axes) + 1:
            return np.asarray(self.result)
        return None

    def file_image(self) -> tuple[np.ndarray, Geometry]:
        """The image to write to a file, and its geometry.

        RGB results as uint8 with an "S" axis; the maximum-intensity projection
        in the input dtype; a grey occlusion rendering as float32 in [0, 1].
        """
        rgb = self.rgb
        if rgb is not None:
            pixels = np.rint(np.clip(rgb, 0.0, 1.0) * 255.0).astype(np.uint8)
            return pixels, self.geometry.with_samples()
        if self.method == "max":
            return np.asarray(self.result.peak), self.geometry
        return np.asarray(self.result, dtype=np.float32), self.geometry


def project_stack(selection: Selection, options: ProjectionOptions, *,
                  depth_axis: int | None = None, progress: Progress = None) -> Projected:
    """Project a stack along its depth axis: the one projection job of stackdepth.

    Parameters
    ----------
    selection : Selection
        The stack to project (see :func:`~viewer_plugin.jobs.stack.select`).
    options : ProjectionOptions
        Method and display options.
    depth_axis : int, optional
        Index of the depth axis in ``selection.stack``; default its "Z" axis.
    progress : callable, optional
        ``progress(done, total)``; may raise Cancelled.

    Returns
    -------
    Projected
        The kernel result, the output geometry and the provenance.

    Raises
    ------
    ParameterError
        For an unknown method, options that do not fit the method, a stack
        without a depth axis or without any finite value, or a bad step.
    """
    from ..kernels import projection as kp

    method = check_choice(options.method, name="method", choices=PROJECTION_METHODS)
    stack = selection.stack
    axis = depth_axis_of(selection, depth_axis)
    z_step, z_from, notes = axis_step(stack, axis, options.z_step)
    check_some_finite(stack.data)
    data = stack.data
    entries: dict[str, Any] = {
        "method": method, "z_step_um": z_step, "z_step_from": z_from, "depth_axis": axis,
        "slices": int(stack.data.shape[axis]), "axes": stack.axes,
        "voxel_size_um": describe_voxel(stack, axis, z_step)}
    first, requested = 0, options.depth_range
    if options.slab_um is not None:
        data, first, entries["slab"] = _slab(data, axis, z_step, method, options)
        options = dataclasses.replace(options, depth_range=kp.slab_depth_range(
            requested, n=int(stack.data.shape[axis]), z_step=z_step, first_slice=first))
    sides: tuple[SideView, ...] = ()
    if method == "max":
        result = kp.peak_projection(data, axis=axis, z_step=z_step, progress=progress)
        result = kp.offset_depths(result, first) if first else result
        entries.update(depth_map_cmap=options.cmap or DEPTH_MAP_CMAPS[0], depth_range_um=list(
            check_interval(requested, name="depth_range")
            or _whole_depth(int(stack.data.shape[axis]), z_step)))
    elif method in DEPTH_CODED:
        result, used = _depth_coded(data, axis, z_step, options, progress)
        if options.slab_um is not None:
            result = kp.offset_depths(result, first) if first else result
            used["depth_range_um"] = [float(v) for v in result.depth_range]
            used["depth_range_requested_um"] = requested
        entries.update(used)
        warning = saturation_warning(result.saturated_fraction)
        notes = notes + ((warning,) if warning else ())
    else:
        result, sides, used = _occlusion(data, axis, z_step, options, stack, progress)
        entries.update(used)
    if method != "max":
        entries["caveat"] = "brightness is display contrast, not a calibrated intensity"
    geometry = drop_axis(geometry_of(stack), axis)
    return Projected(method, result, geometry, provenance("projection", selection, **entries),
                     sides, notes)


def _slab(data: Any, axis: int, z_step: float, method: str,
          options: ProjectionOptions) -> tuple[Any, int, dict[str, Any]]:
    """The slab's slices of *data*, its first slice, and what the provenance records of it."""
    from ..kernels import projection as kp

    if method not in ("max", *DEPTH_CODED):
        fail("slab", f"a method that projects a slab (max, {', '.join(DEPTH_CODED)})", method)
    n = int(data.shape[axis])
    centre = options.slab_centre if options.slab_centre is not None else n // 2
    start, stop = kp.slab_bounds(n, centre=centre, thickness_um=options.slab_um, z_step=z_step)
    index = (slice(None),) * axis + (slice(start, stop),)
    record = {"thickness_um": float(options.slab_um), "centre_slice": int(centre),
              "first_slice": start, "last_slice": stop - 1,
              "depths_um": [start * z_step, (stop - 1) * z_step]}
    return data[index], start, record


def _depth_coded(data: Any, axis: int, z_step: float, options: ProjectionOptions,
                 progress: Progress) -> tuple[Any, dict[str, Any]]:
    """The depth-coded projection and what the provenance records of it."""
    from ..kernels import projection as kp

    cmap = options.cmap or DEFAULT_CMAP
    result = kp.depth_coded_projection(
        data, z_step=z_step, method=options.method, cmap=cmap, depth_range=options.depth_range,
        clim=options.clim, gamma=options.gamma, axis=axis, progress=progress)
    return result, _coded_record(result, options, cmap)


def _coded_record(result: Any, options: ProjectionOptions, cmap: Any) -> dict[str, Any]:
    """What the provenance records of a depth-coded result made with *options*."""
    kind = CMAP_KIND.get(cmap, "other") if isinstance(cmap, str) else "other"
    used = {"cmap": cmap, "cmap_kind": kind, "depth_range_um": [float(v) for v in result.depth_range],
            "depth_range_requested_um": options.depth_range, "clim": options.clim,
            "clim_used": [float(v) for v in result.clim], "gamma": options.gamma,
            "saturated_fraction": result.saturated_fraction}
    if result.weight_floor is not None:
        used["weight_floor"] = result.weight_floor
    return used


def recolour_projected(projected: Projected, options: ProjectionOptions) -> Projected:
    """A depth-coded result with new display options, without reading the stack again.

    Equal to :func:`project_stack` with *options* on the same stack, when
    *options* differ from the ones that made *projected* only in colour map,
    depth range, display limits (given, not automatic) and gamma.

    Parameters
    ----------
    projected : Projected
        A depth-coded result of method "peak" or "weighted" (see
        :data:`~viewer_plugin.kernels.projection.RECOLOURABLE`).
    options : ProjectionOptions
        The new options; ``depth_range`` counts from the stack's first slice
        (None: the range the result was made with, for a slab the whole stack's).

    Returns
    -------
    Projected
        A new result and provenance; *projected* is not changed.

    Raises
    ------
    ParameterError
        For a result that cannot be recoloured, or bad options.
    """
    cmap = options.cmap or DEFAULT_CMAP
    result = projected.result
    depth_range = options.depth_range
    if depth_range is None:  # the whole stack's, as project_stack takes it
        n = int(projected.provenance["slices"])
        depth_range = (0.0, (n - 1) * result.z_step if n > 1 else result.z_step)
    recoloured = result.recolour(cmap=cmap, depth_range=depth_range, clim=options.clim,
                                 gamma=options.gamma)
    used = _coded_record(recoloured, options, cmap)
    record = {**projected.provenance, **used}
    warning = saturation_warning(recoloured.saturated_fraction)
    notes = tuple(n for n in projected.notes if n != saturation_warning(result.saturated_fraction))
    return dataclasses.replace(projected, result=recoloured, provenance=record,
                               notes=notes + ((warning,) if warning else ()))


def _occlusion(data: Any, axis: int, z_step: float, options: ProjectionOptions, stack: Any,
               progress: Progress) -> tuple[Any, tuple[SideView, ...], dict[str, Any]]:
    """The occlusion rendering, and its side views with the same density and contrast."""
    from ..kernels import projection as kp

    n = int(data.shape[axis])
    density = options.density if options.density is not None else kp.default_density(n, z_step)
    clim = options.clim
    parts = 3 if options.side_views else 1
    if clim is None:  # the kernel's default, recorded; and one contrast for all three views
        clim = kp.display_limits(data, axis=axis)
    top = kp.occlusion_projection(data, z_step=z_step, density=density, clim=clim,
                                  view=options.view, cmap=options.cmap, axis=axis,
                                  progress=sub_progress(progress, 0, parts))
    sides: list[SideView] = []
    if options.side_views:
        sides = _side_views(data, axis, z_step, density, clim, options.cmap, stack, progress)
    used = {"density_per_um": density, "view": options.view, "clim": options.clim,
            "clim_used": None if clim is None else [float(v) for v in clim], "cmap": options.cmap,
            "side_views": bool(options.side_views), "note": "a rendering, not a measurement"}
    if options.cmap is not None:  # the depths the colours span: first to last slice
        used["depth_range_um"] = list(_whole_depth(n, z_step))
    return top, tuple(sides), used


def _whole_depth(n: int, z_step: float) -> tuple[float, float]:
    """First to last slice in µm (one step for a single slice), as the kernels' colours span."""
    return 0.0, (n - 1) * z_step if n > 1 else z_step


def _side_views(data: Any, axis: int, z_step: float, density: float, clim: Any, cmap: Any,
                stack: Any, progress: Progress) -> list[SideView]:
    """Views along the two lateral axes; rows are depth, each row coloured by its depth."""
    from ..kernels import projection as kp

    lateral = [i for i in range(data.ndim) if i != axis][-2:]
    colours = None
    if cmap is not None:  # a side-view ray runs at one depth: its colour is that depth's colour
        colours = kp.depth_colours(int(data.shape[axis]), z_step=z_step, cmap=cmap)
        colours = colours.astype(np.float32)[:, None, :]
    base = geometry_of(stack)
    views = []
    for k, side_axis in enumerate(lateral, start=1):
        step = float(stack.scale[side_axis])
        view = kp.occlusion_projection(data, z_step=step, density=density, clim=clim, view="top",
                                       axis=side_axis, depth_axis=axis,
                                       progress=sub_progress(progress, k, 3))
        depth_pos = axis if axis < side_axis else axis - 1
        view = np.moveaxis(np.asarray(view), depth_pos, -2)
        if colours is not None:
            view = view[..., None] * colours
        across = lateral[1] if side_axis == lateral[0] else lateral[0]
        lead = [i for i in range(data.ndim) if i not in (axis, *lateral)]
        order = lead + [axis, across]
        geometry = Geometry("".join(base.axes[i] for i in order),
                            tuple(z_step if i == axis else base.scale[i] for i in order),
                            tuple(base.translate[i] for i in order))
        along = stack.axes[side_axis].lower()
        views.append(SideView(along, view, geometry))
    return views
