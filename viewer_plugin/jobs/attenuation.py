"""The attenuation jobs: measure how the signal fades with depth, and correct a copy."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._shared.progress import Progress
from .._shared.validation import check_number, fail
from .choices import ATTENUATION_CAVEAT, DEFAULT_MAX_GAIN
from .provenance import provenance
from .stack import Corrected, Selection, axis_step, geometry_of

__all__ = ["AttenuationOptions", "Measured", "attenuation_record", "correct_measured",
           "measure_attenuation"]


@dataclass(frozen=True)
class AttenuationOptions:
    """Options of the attenuation jobs.

    Attributes
    ----------
    model : str
        "exponential", "smooth" or "quantile" (see :func:`~viewer_plugin.kernels.estimate_attenuation`).
    max_gain : float
        Cap on the per-slice gain of the correction.
    z_step : float or None
        Slice spacing along the depth axis in µm; None takes the stack's scale.
    """

    model: str = "exponential"
    max_gain: float = DEFAULT_MAX_GAIN
    z_step: float | None = None


@dataclass(frozen=True)
class Measured:
    """One stack's attenuation estimate, with what the user should know about it.

    Attributes
    ----------
    selection : Selection
        The stack that was measured (one channel, one time point).
    fit : AttenuationFit
        The kernel's result.
    depth_axis : int
    options : AttenuationOptions
    notes : tuple of str
        The fit's own warnings and anything the kernels warned about.
    capped : int
        Slices whose gain exceeds ``options.max_gain`` (capped on correction).
    provenance : dict
    """

    selection: Selection
    fit: Any
    depth_axis: int
    options: AttenuationOptions
    notes: tuple[str, ...]
    capped: int
    provenance: dict[str, Any]


def _caught(caught: list[Any], known: tuple[str, ...] = ()) -> tuple[str, ...]:
    """Messages of caught warnings not already in *known*."""
    return tuple(str(w.message) for w in caught if str(w.message) not in known)


def measure_attenuation(selection: Selection, options: AttenuationOptions, *,
                        depth_axis: int | None = None, mask: Any = None,
                        progress: Progress = None) -> Measured:
    """Estimate the attenuation of one z-stack: the one attenuation job of stackdepth.

    Parameters
    ----------
    selection : Selection
        A single 3-D stack (one channel, one time point).
    options : AttenuationOptions
    depth_axis : int, optional
        Index of the depth axis; default the stack's "Z" axis.
    mask : array_like of bool, optional
        Only voxels where it is true are measured.
    progress : callable, optional

    Returns
    -------
    Measured

    Raises
    ------
    ParameterError
        For a stack that is not 3-D, a bad option, or one without structure.
    """
    from ..kernels import estimate_attenuation

    stack = selection.stack
    if stack.data.ndim != 3:
        fail("INPUT", "one z-stack (3-D: pick a channel and a time point)",
             f"<axes {stack.axes} and shape {tuple(stack.data.shape)}>")
    axis = stack.axis("Z") if depth_axis is None else int(depth_axis)
    if axis is None:
        fail("INPUT", "a z-stack with a Z axis", f"<axes {stack.axes}>")
    max_gain = check_number(options.max_gain, name="max_gain", low=1.0, allow_inf=True)
    z_step, z_from, step_notes = axis_step(stack, axis, options.z_step)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fit = estimate_attenuation(stack.data, z_step=z_step, model=options.model, axis=axis,
                                   mask=mask, progress=progress)
    notes = step_notes + tuple(fit.warnings) + _caught(caught, tuple(fit.warnings))
    gains = np.where(np.isfinite(fit.gain), fit.gain, 1.0)
    capped = int(np.sum(gains > max_gain))
    record = provenance("attenuation", selection, model=fit.model, depth_axis=axis,
                        axes=stack.axes, z_step_um=z_step, z_step_from=z_from, max_gain=max_gain,
                        length_um=fit.length_um, length_interval_um=list(fit.length_interval_um),
                        interval_method=fit.interval_method, n_resamples=fit.n_resamples,
                        seed=fit.seed, masked=mask is not None, caution=ATTENUATION_CAVEAT)
    return Measured(selection, fit, axis, options, notes, capped, record)


def correct_measured(measured: Measured, *, max_gain: float | None = None,
                     progress: Progress = None) -> Corrected:
    """A corrected float32 copy of the measured stack (lazy for dask input).

    Parameters
    ----------
    measured : Measured
        From :func:`measure_attenuation`.
    max_gain : float, optional
        Cap on the gain; default the one the stack was measured with.
    progress : callable, optional

    Returns
    -------
    Corrected
        Same shape and geometry as the source; values relative, not calibrated.
    """
    from ..kernels import correct_attenuation

    cap = measured.options.max_gain if max_gain is None else max_gain
    stack = measured.selection.stack
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        data = correct_attenuation(stack.data, measured.fit, max_gain=cap, axis=measured.depth_axis,
                                   progress=progress)
    record = dict(measured.provenance, job="attenuation correction", max_gain=cap)
    return Corrected(data, geometry_of(stack), record, _caught(caught))


def attenuation_record(measured: Measured) -> dict[str, Any]:
    """The report entries of one estimate (JSON keys of ``stackdepth attenuation --report``)."""
    fit = measured.fit
    cap = measured.options.max_gain
    gains = np.where(np.isfinite(fit.gain), fit.gain, 1.0)
    return {
        "channel": measured.selection.channel,
        "channel_name": measured.selection.channel_name,
        "length_um": fit.length_um,
        "length_interval_um": list(fit.length_interval_um),
        "interval_method": fit.interval_method,
        "n_resamples": fit.n_resamples,
        "n_tiles": fit.n_tiles,
        "seed": fit.seed,
        "field_fraction": fit.field_fraction,
        "model": fit.model,
        "r_squared": fit.r_squared,
        "offset": fit.offset,
        "converged": fit.converged,
        "n_iterations": fit.n_iterations,
        "slices_capped_at_max_gain": measured.capped,
        "depth_um": fit.depth_um,
        "profile": fit.profile,
        "profile_sem": fit.profile_sem,
        "model_profile": fit.model_profile,
        "gain": fit.gain,
        "gain_applied": np.minimum(gains, cap),
        "background": fit.background,
        "foreground_fraction": fit.foreground_fraction,
        "warnings": list(measured.notes),
    }

