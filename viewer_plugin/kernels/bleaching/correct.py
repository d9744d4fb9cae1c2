"""Bleaching correction, and contrast equalisation for display (numpy chunk by chunk, or lazy dask).

:func:`correct_bleaching` rescales the background-subtracted signal of each
frame by a gain and puts the background back, ``(I - offset) * g + offset``:
with ``rescale="model"`` the gain divides by the fitted decay, with
``rescale="measured"`` by the frame's measured foreground signal (ratio
normalisation). Intensities stay proportional to the signal.

:func:`equalise_to_reference` is not a correction of intensities: it maps
each frame's grey levels so that its histogram matches a reference frame's
(histogram specification), which helps display and segmentation but changes
the relation between intensities.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..._shared.progress import Progress
from ..._shared.validation import check_choice, check_int, check_stack, fail, is_dask
from ..primitives.chunks import map_depth_blocks
from ..primitives.gain import apply_gains
from ..primitives.matching import empirical_cdf, match_to_cdf
from .estimate import BleachingReport, estimate_bleaching  # noqa: F401 (the Examples use it)

__all__ = ["RESCALE", "correct_bleaching", "equalise_to_reference"]


#: How :func:`correct_bleaching` rescales each frame.
RESCALE = ("model", "measured")


def correct_bleaching(series: Any, report: BleachingReport, *, rescale: str = "model",
                      axis: int = 0, progress: Progress = None) -> Any:
    """Divide the fading measured by :func:`estimate_bleaching` out of a series.

    Parameters
    ----------
    series : array_like or dask array
        The series the report was measured on (same length along *axis*).
        Never modified.
    report : BleachingReport
        From :func:`estimate_bleaching` on this series.
    rescale : {"model", "measured"}
        ``"model"``: divide by the fitted decay, ``(I - offset) * g + offset``
        with ``g_t = model[0] / model[t]`` (smooth; follows the model).
        ``"measured"``: divide by each frame's measured foreground signal,
        ``g_t = profile[0] / profile[t]`` (ratio normalisation: follows
        frame-to-frame changes, noisier).
    axis : int
        The acquisition axis (as given to :func:`estimate_bleaching`).
    progress : callable, optional
        ``progress(done, total)`` between chunks of frames (numpy input only).

    Returns
    -------
    ndarray or dask array of float32
        Same shape as *series*; lazy when *series* is a dask array (one task
        per block). Corrected
        intensities are relative, not calibrated, and the correction amplifies
        the noise of late, faded frames.

    Raises
    ------
    ParameterError
        For an unknown *rescale*, a report of another series, or a model or
        profile that is not positive in every frame.

    References
    ----------
    .. [1] Rescaling by the fitted decay follows from first-order bleaching
       kinetics, ``I_t = I_0 (1 - k)**t``; rescaling by the measured signal is
       ratio normalisation to the first frame (common practice).

    Examples
    --------
    >>> frame = np.zeros((4, 16, 16)); frame[:, 4:12, 4:12] = 1000.0
    >>> series = 100 + frame * 0.9 ** np.arange(6)[:, None, None, None]
    >>> report = estimate_bleaching(series)
    >>> flat = correct_bleaching(series, report)
    >>> flat.dtype, round(float(flat[-1, 0, 8, 8]), 1)
    (dtype('float32'), 1100.0)
    """
    series, axis = check_stack(series, name="series", axis=axis)
    rescale = check_choice(rescale, name="rescale", choices=RESCALE)
    if not isinstance(report, BleachingReport):
        fail("report", "a BleachingReport from estimate_bleaching", report)
    n = int(series.shape[axis])
    if report.n_frames != n:
        fail("report", f"a report of a series with {n} frames along axis {axis}",
             f"<a report of {report.n_frames} frames>")
    base = report.model_profile if rescale == "model" else report.profile
    if report.model == "none":
        base = np.ones(n)
    if not np.all(base > 0):
        fail("report", f"a positive {'model' if rescale == 'model' else 'measured'} signal in "
             "every frame", f"<{int(np.count_nonzero(~(base > 0)))} frames at or below the background>",
             hint="use a mask on the structure")
    gains = float(base[0]) / np.asarray(base, dtype=np.float64)
    return apply_gains(series, gains, report.offset, axis=axis, progress=progress)


def equalise_to_reference(
    series: Any,
    *,
    reference: int = 0,
    axis: int = 0,
    progress: Progress = None,
) -> Any:
    """Map every frame's grey levels so its histogram matches a reference frame's.

    For display and segmentation only: histogram specification changes the
    relation between intensities, so the result must not be used to measure
    them.

    Parameters
    ----------
    series : array_like or dask array
        At least 3-D; never modified.
    reference : int
        Index of the reference frame along *axis* (default 0, the first).
    axis : int
        The acquisition axis.
    progress : callable, optional
        ``progress(done, total)`` between chunks of frames (numpy input only).

    Returns
    -------
    ndarray or dask array of float32
        Same shape as *series*; lazy when *series* is a dask array (whole
        frames per block, one task per block).

    Raises
    ------
    ParameterError
        For a bad series or a reference frame outside the series.

    References
    ----------
    .. [1] R. C. Gonzalez, R. E. Woods, Digital Image Processing, ch. 3
       (histogram matching / specification).
    .. [2] scikit-image, ``skimage.exposure.match_histograms`` (the same
       mapping, used as the reference of the tests).

    Examples
    --------
    >>> series = np.stack([np.arange(16.0).reshape(4, 4) * f for f in (1.0, 0.5)])[:, None]
    >>> out = equalise_to_reference(series)
    >>> bool(np.allclose(out[1], series[0]))
    True
    """
    series, axis = check_stack(series, name="series", axis=axis)
    n = int(series.shape[axis])
    reference = check_int(reference, name="reference")
    if not 0 <= reference < n:
        fail("reference", f"a frame index from 0 to {n - 1}", reference)
    if is_dask(series):
        import dask.array as da

        frame = np.asarray(da.take(series, [reference], axis=axis).compute())
    else:
        frame = np.take(np.asarray(series), [reference], axis=axis)
    template = empirical_cdf(frame)

    def block_fn(src: np.ndarray, dst: np.ndarray, start: int) -> None:
        for i in range(src.shape[0]):
            dst[i] = match_to_cdf(src[i], template)

    return map_depth_blocks(series, block_fn, axis=axis, whole_planes=True, progress=progress)
