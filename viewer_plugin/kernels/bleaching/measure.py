"""Measurement helpers of the bleaching kernels: fixed foreground masks and per-frame profiles.

The per-frame signal is the mean of the background-subtracted voxels inside one
*fixed* foreground mask, so that a structure which changes between frames does
not read as a change of brightness. Masks of a time series come from Otsu's
threshold (:func:`..primitives.threshold.otsu_mask`), backgrounds from the
sigma-clipped background level (:mod:`..primitives.background`). Reductions
run chunk by chunk along the acquisition axis (numpy and dask share the code).

The two passes of :func:`..separate_bleaching` are measured on one shared
foreground for the whole stack (:func:`pair_profiles`): chosen on the
smoothed average of the two passes with one threshold on the depth-corrected
stack (the select-and-fit loop of :mod:`..primitives.foreground`), so that
it keeps the same part of the structure at every depth.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import ndimage

from ..._shared.progress import Progress, report_progress
from ..._shared.validation import fail, is_dask
from ..primitives.background import background_level, clipped_stats, rows_background
from ..primitives.chunks import depth_chunks, plane_nbytes
from ..primitives.foreground import (
    ForegroundSample,
    MAX_ITERATIONS,
    MIN_FOREGROUND,
    auto_step,
    exponential_gain,
    iterate_foreground,
    lateral_sample,
)
from ..primitives.threshold import otsu_mask, otsu_threshold

__all__ = ["PairProfiles", "SELECTION_SMOOTHING", "background_ceiling", "masked_profile",
           "neighbour_mean",
           "pair_profiles", "reference_masks"]

#: Fixed background voxels of a time series brighter than the first frame's brightest one plus
#: this many standard deviations are left out (structure that appeared there later). No clip
#: nearer the noise: a clip takes a share of the bright noise and of faint structure edges that
#: changes as the signal fades, and biases the rate.
BACKGROUND_CLIP = 3.0

#: Gaussian sigma (sampled pixels, lateral only) of the average of the two passes on which
#: the shared foreground is chosen.
SELECTION_SMOOTHING = 1.0


def _as_numpy(block: Any) -> np.ndarray:
    if is_dask(block):
        block = block.compute()
    return np.asarray(block)


def _self_weights(size: int, sigma: float) -> np.ndarray:
    """Weight of each position on itself in a 1-D Gaussian filter with mirrored edges."""
    radius = int(4.0 * sigma + 0.5)
    small = min(size, 2 * radius + 2)
    diag = np.diag(ndimage.gaussian_filter1d(np.eye(small), sigma, axis=0, mode="mirror"))
    if small == size:
        return diag
    out = np.full(size, diag[small // 2])
    half = small // 2
    out[:half], out[size - half:] = diag[:half], diag[small - half:]
    return out


def neighbour_mean(image: np.ndarray, sigma: float, axes: tuple[int, ...]) -> np.ndarray:
    """Gaussian-weighted mean of each voxel's neighbours along *axes*, the voxel itself left out.

    A selection made on this value does not depend on the voxel's own noise,
    so the voxels it picks are not the ones that merely happened to be bright
    (no regression to the mean in the values measured on them). float64.
    """
    image = np.asarray(image, dtype=np.float64)
    image = np.where(np.isfinite(image), image, np.nanmedian(image) if np.isfinite(image).any()
                     else 0.0)
    sigmas = [sigma if a in axes and image.shape[a] > 1 else 0.0 for a in range(image.ndim)]
    smooth = ndimage.gaussian_filter(image, sigmas, mode="mirror")
    self_weight = np.ones(())
    for a, s in enumerate(sigmas):
        shape = [1] * image.ndim
        shape[a] = image.shape[a]
        weights = _self_weights(image.shape[a], s) if s > 0 else np.ones(image.shape[a])
        self_weight = self_weight * weights.reshape(shape)
    return (smooth - self_weight * image) / (1.0 - self_weight)


def reference_masks(moved: Any, mask: Any = None) -> tuple[np.ndarray, np.ndarray | None]:
    """The fixed foreground and background voxels of a time series, chosen on its first frame.

    The first frame holds the structure that was there when acquisition
    started; a structure appearing later is not in the foreground and so
    cannot read as a change of brightness. Voxels are chosen on the Gaussian
    mean of their neighbours in the first frame (sigma 1 voxel, the voxel
    itself left out, :func:`neighbour_mean`): a choice on the voxel's own value
    would keep voxels whose noise happened to be high in the first frame.
    The foreground is *mask* when given, else the voxels above Otsu's
    threshold of the neighbour means; the background the voxels outside it
    whose neighbour mean is within 2 standard deviations above the
    sigma-clipped background level (None when there are none). Measured on
    the same voxels in every frame (values above :func:`background_ceiling`,
    structure that appeared there later, left out), the background follows a haze that
    fades with the signal in proportion; a background re-chosen in every frame
    from all its dim voxels (or clipped at 3 standard deviations) would take in a different share of the faint
    edges of structure as the noise falls, and bias the rate.
    """
    frame = _as_numpy(moved[0])
    finite = frame[np.isfinite(frame)] if frame.dtype.kind == "f" else frame
    if finite.size == 0 or finite.min() == finite.max():  # nothing to choose from
        empty = np.zeros(frame.shape, dtype=bool)
        return (empty if mask is None else np.broadcast_to(np.asarray(mask, bool), frame.shape)), None
    selection = neighbour_mean(frame, 1.0, tuple(range(frame.ndim)))
    if mask is None:
        threshold = otsu_threshold(selection)
        foreground = (np.asarray(selection > threshold) if np.isfinite(threshold)
                      else np.zeros(frame.shape, dtype=bool))
    else:
        foreground = np.broadcast_to(np.asarray(mask, dtype=bool), frame.shape)
    stats = clipped_stats(selection[~foreground])
    background = ~foreground & (selection < stats.level + 2.0 * stats.sigma)
    return foreground, (background if background.any() else None)


def _fixed_background(values: np.ndarray, ceiling: float) -> tuple[float, float]:
    """Mean and standard deviation of one frame's fixed background voxels up to *ceiling*
    (all of them when most are above it: the whole background rose, nothing appeared)."""
    values = values.astype(np.float64)
    values = values[np.isfinite(values)]
    below = values <= ceiling
    if np.count_nonzero(below) >= 0.5 * values.size:
        values = values[below]
    if values.size == 0:
        return np.nan, np.nan
    return float(values.mean()), float(values.std())


def background_ceiling(frame: np.ndarray, background: np.ndarray) -> float:
    """Brightest fixed-background value of the first frame plus :data:`BACKGROUND_CLIP`
    standard deviations: later frames (fainter) hold nothing of the first frame's structure
    above it, so only structure that appeared later is left out there."""
    values = np.asarray(frame, dtype=np.float64)[background]
    values = values[np.isfinite(values)]
    return float(values.max() + BACKGROUND_CLIP * values.std()) if values.size else np.inf


def masked_profile(
    moved: Any,
    mask: np.ndarray | None,
    *,
    background: np.ndarray | None = None,
    ceiling: float = np.inf,
    progress: Any = None,
    done: int = 0,
    total: int = 1,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Mean over *mask*, background level, foreground fraction and background sd of every frame.

    All float64, one value per frame of a depth-first array. With ``mask=None``
    every frame uses its own Otsu foreground (for the slices of one stack,
    which show different structures); a frame without one uses all voxels.
    The background of each frame is the mean and standard deviation of the
    fixed *background* voxels up to *ceiling* when given (a time series,
    :func:`reference_masks`, :func:`background_ceiling`), else the sigma-clipped mean of its dim voxels
    (``background_level``); either way a haze that fades with the signal is
    subtracted frame by frame.
    """
    n = int(moved.shape[0])
    if mask is not None:
        mask = np.broadcast_to(mask, tuple(moved.shape[1:]))
        if not mask.any():
            fail("mask", "at least one foreground voxel", "<an empty mask>")
    out = np.empty(n, dtype=np.float64)
    levels = np.empty(n, dtype=np.float64)
    counts = np.empty(n, dtype=np.float64)
    sigmas = np.empty(n, dtype=np.float64)
    plane = plane_nbytes(tuple(moved.shape), moved.dtype)
    for part in depth_chunks(n, plane):
        block = _as_numpy(moved[part])
        for j, frame in enumerate(block):
            here = mask if mask is not None else otsu_mask(frame)
            if not here.any():
                here = np.ones(frame.shape, dtype=bool)
            values = frame[here].astype(np.float64, copy=False)
            finite = np.isfinite(values) if values.dtype.kind == "f" else None
            if finite is not None and not finite.all():
                values = values[finite]
            out[part.start + j] = float(values.mean()) if values.size else np.nan
            counts[part.start + j] = np.count_nonzero(here) / here.size
            if background is None:
                level = background_level(frame)
                levels[part.start + j], sigmas[part.start + j] = level.level, level.sigma
            else:
                levels[part.start + j], sigmas[part.start + j] = _fixed_background(
                    frame[background], ceiling)
        done += part.stop - part.start
        report_progress(progress, done, total)
    return out, levels, counts, sigmas


@dataclass(frozen=True)
class PairProfiles:
    """Both passes measured on one shared foreground (float64 arrays, one value per slice).

    ``forward`` and ``reverse`` are mean intensities above each pass's own
    background; ``log_ratio_var`` the variance of ``ln(reverse / forward)``
    from the scatter of the voxel differences (structure cancels in them);
    ``fraction`` the share of sampled voxels in the foreground; ``valid`` the
    slices fit to enter the fits; ``noise`` the background standard deviation
    of the forward pass.
    """

    forward: np.ndarray
    reverse: np.ndarray
    log_ratio_var: np.ndarray
    fraction: np.ndarray
    valid: np.ndarray
    noise: np.ndarray
    converged: bool


def _flat_planes(moved: Any) -> Any:
    """A depth-first stack as (slices, rows, columns): extra plane axes joined into the rows."""
    if moved.ndim == 3:
        return moved
    return moved.reshape((moved.shape[0], -1, moved.shape[-1]))


def _smoothed(rows: np.ndarray, plane: tuple[int, int]) -> np.ndarray:
    """Each row of a lateral sample as the neighbour means of the plane it came from."""
    planes = np.where(np.isfinite(rows), rows, 0.0).reshape((rows.shape[0],) + plane)
    return neighbour_mean(planes, SELECTION_SMOOTHING, (1, 2)).reshape(rows.shape)


def _masked_means(above: np.ndarray, mask: np.ndarray, count: np.ndarray) -> np.ndarray:
    total = np.where(mask, above, 0.0).sum(axis=1, dtype=np.float64)
    return total / np.maximum(count, 1)


def _equal_exposure_factor(above_f: np.ndarray, above_r: np.ndarray) -> np.ndarray:
    """Per slice ``sqrt(F R) / ((F + R) / 2)`` of the two passes' totals (1 where undefined).

    Scales the average of the passes to their geometric mean, which has had the
    same number of exposures in every slice: its depth profile is then
    attenuation alone, which the exponential gain of the selection loop fits.
    """
    totals = [np.nansum(above, axis=1) for above in (above_f, above_r)]
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = totals[1] / totals[0]
        factor = 2.0 * np.sqrt(ratio) / (1.0 + ratio)
    return np.where(np.isfinite(factor) & (ratio > 0), factor, 1.0)[:, None]


def pair_profiles(forward: Any, reverse: Any, *, z_step: float, progress: Progress = None,
                  min_contrast: float = 3.0) -> PairProfiles:
    """Mean foreground signal of every slice of two passes, on one foreground for the whole stack.

    Both passes are read as a lateral sample (:func:`..primitives.foreground.lateral_sample`)
    and each slice of each pass has its own background subtracted (a haze
    fades with the signal, differently in the two passes): the mean of one set
    of dim voxels per slice, the same set in both passes (outside the
    foreground, neighbour mean within 2 standard deviations of the
    background), so that it holds the same share of faint structure in both. The
    foreground is chosen on the average of the two passes, as the lateral
    Gaussian mean of each voxel's neighbours (:data:`SELECTION_SMOOTHING`
    pixels, the voxel itself left out: :func:`neighbour_mean`, so that a
    voxel's own noise does not decide whether it is selected), with one threshold applied
    to the depth-corrected average; the correction comes from an exponential
    fit to the selected signal and selection and fit alternate until they
    settle (:func:`..primitives.foreground.iterate_foreground`). A selection
    made slice by slice on each slice's own histogram would keep a smaller
    share of a dim slice's signal and steepen the decay.

    Slices with fewer than 10 foreground voxels, or whose foreground is less
    than *min_contrast* background standard deviations above the background
    in either pass, are not valid.
    """
    fwd_moved, rev_moved = _flat_planes(forward), _flat_planes(reverse)
    n = int(fwd_moved.shape[0])
    step = auto_step(tuple(fwd_moved.shape[1:]))
    chunks = len(list(depth_chunks(n, plane_nbytes(tuple(fwd_moved.shape), fwd_moved.dtype))))
    total = 2 * chunks + MAX_ITERATIONS

    def second(done: int, _: int) -> None:
        report_progress(progress, chunks + done, total)

    samples = (lateral_sample(fwd_moved, None, step, progress, total),
               lateral_sample(rev_moved, None, step, second if progress else None, total))
    backgrounds = [rows_background(sample) for sample in samples]
    above_f, above_r = (sample - bg.level[:, None] for sample, bg in zip(samples, backgrounds))
    plane = tuple(int(v) for v in fwd_moved[0, ::step, ::step].shape)
    selection = _smoothed(0.5 * (above_f + above_r), plane) * _equal_exposure_factor(above_f, above_r)
    sel_bg = rows_background(selection)
    selection -= sel_bg.level[:, None]
    depth = np.arange(n, dtype=np.float64) * z_step
    loop = iterate_foreground(ForegroundSample(selection, sel_bg.sigma, plane), depth,
                              exponential_gain, progress=progress, done=2 * chunks, total=total)
    finite = np.isfinite(above_f) & np.isfinite(above_r)
    with np.errstate(invalid="ignore"):
        mask = finite & (selection * loop.gain[:, None] > loop.foreground.threshold)
    mask &= np.isfinite(loop.foreground.signal)[:, None]
    count = mask.sum(axis=1)
    # one background set per slice for both passes (dim neighbour means, outside the foreground)
    with np.errstate(invalid="ignore"):
        dim = finite & ~mask & (selection <= 2.0 * sel_bg.sigma[:, None])
    n_dim = dim.sum(axis=1)
    above_f, above_r = (np.where(finite, sample, 0.0) - _masked_means(sample, dim, n_dim)[:, None]
                        for sample in samples)
    fwd, rev = _masked_means(above_f, mask, count), _masked_means(above_r, mask, count)
    with np.errstate(invalid="ignore", divide="ignore"):
        # ln(R / F) - ln(rho) ~ (R - rho F) / R: the voxel differences R - rho F hold the noise
        diff = above_r - (rev / fwd)[:, None] * above_f
        centred = np.where(mask, diff - _masked_means(diff, mask, count)[:, None], 0.0)
        spread = (centred**2).sum(axis=1) / np.maximum(count - 1, 1)
        var = spread / np.maximum(count, 1) / rev**2
        valid = ((count >= MIN_FOREGROUND) & (fwd > min_contrast * backgrounds[0].sigma)
                 & (rev > min_contrast * backgrounds[1].sigma) & np.isfinite(var) & (n_dim > 0))
    report_progress(progress, total, total)
    return PairProfiles(forward=fwd, reverse=rev, log_ratio_var=var,
                        fraction=count / max(1, mask.shape[1]), valid=valid,
                        noise=backgrounds[0].sigma, converged=loop.converged)
