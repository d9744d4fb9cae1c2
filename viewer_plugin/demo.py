"""The synthetic demo scenario: a "fibre slab" imaged by a point-scanning confocal.

A slab of cleared tissue holds tortuous, occasionally branching axon-like fibres
(radius 0.3-1 um). A one-photon point-scanning confocal with a photomultiplier
images it with 0.3 x 0.3 um pixels and 1 um z-steps. The signal model, per voxel, is::

    photons   = (P * fibre(z, y, x) + haze) * exp(-z / L) * (1 - k) ** n_exposures
    electrons = Poisson(photons)
    counts    = offset + Gamma(electrons / (F2 - 1), g * (F2 - 1)) + Normal(0, read_noise)

with the attenuation length ``L`` (Beer-Lambert, excitation and emission
together), the bleaching rate ``k`` per slice exposure, the detector gain
``g`` (counts per photon), a detector offset and read noise. The haze (diffuse
out-of-focus light from the labelled tissue around the focus) is attenuated
and bleached like the in-focus signal: it comes from the same depth. The
photomultiplier's gain is itself random: each photoelectron's output varies,
which multiplies the variance of the counts by the excess noise factor ``F2``
(``Var = F2 * g**2 * photons``; a Gamma-distributed sum of the electrons'
outputs has that mean and variance; ``F2 = 1`` is a noise-free gain). In
one-photon confocal imaging every slice exposure bleaches the whole depth, so slice *i*
of a stack is seen after *i* exposures; in the deepest-first second pass of a
two-pass acquisition after ``2N - 1 - i``; in a time series, time point *t*
slice *i* after ``t * N + i``.

All numbers here are invented for the demo; every sample records its true
parameters in ``truth`` so that docs and tests can compare recovered values
against them. Nothing here imports napari.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import ndimage

from . import __version__
from ._shared.validation import check_int, check_number

__all__ = ["DemoStack", "fibre_slab", "bleach_series", "two_pass_pair", "SCENARIO"]

SCENARIO = "fibre slab: synthetic cleared-tissue slab with axon-like fibres, one-photon confocal"

#: Default parameters of the scenario (all invented).
DEFAULTS: dict[str, Any] = {
    "voxel_size_um": (1.0, 0.3, 0.3),
    "attenuation_length_um": 50.0,
    "bleach_rate_per_exposure": 0.005,
    "peak_photons": 100.0,
    "haze_photons": 1.5,
    "counts_per_photon": 6.0,
    "detector_offset": 100.0,
    "read_noise_counts": 4.0,
    # excess noise factor F2 of the detector's gain: 1 is an ideal photon counter (the
    # default, see the module docstring); photomultipliers are quoted at about 1.1-1.5
    # (from memory, not confirmed in a source)
    "excess_noise_f2": 1.0,
    "psf_sigma_um": (0.35, 0.1, 0.1),
}


@dataclass
class DemoStack:
    """One synthetic dataset.

    Attributes
    ----------
    name : str
        Layer / file name.
    data : ndarray of uint16
        Detector counts, axes as in *axes*.
    axes : str
        "ZYX" or "TZYX".
    scale : tuple of float
        Step per axis (um for Z/Y/X, seconds for T).
    truth : dict
        The true parameters used to make it (JSON-serialisable).
    structure : ndarray of float32 or None
        The noise-free fibre density before attenuation (peak about 1 on a
        fibre's axis), kept only when asked for (``keep_structure=True``):
        the "ideal mask" of the estimator benchmarks.
    """

    name: str
    data: np.ndarray
    axes: str
    scale: tuple[float, ...]
    truth: dict[str, Any] = field(default_factory=dict)
    structure: np.ndarray | None = None


def _walk(rng: np.random.Generator, start: np.ndarray, heading: np.ndarray,
          extent: np.ndarray, step: float, persistence_um: float) -> np.ndarray:
    """A persistent random walk in um until it leaves the lateral extent."""
    max_steps = int(4 * (extent[1] + extent[2]) / step)
    noise = rng.normal(0.0, np.sqrt(step / persistence_um), size=(max_steps, 3))
    noise[:, 0] *= 0.35  # fibres in a slab wander less in depth than laterally
    points = np.empty((max_steps, 3))
    pos, head = start.astype(float).copy(), heading / np.linalg.norm(heading)
    for i in range(max_steps):
        head = head + noise[i]
        head /= np.linalg.norm(head)
        low, high = 1.5, extent[0] - 1.5  # stay inside the slab (reflect in depth)
        if (pos[0] < low and head[0] < 0) or (pos[0] > high and head[0] > 0):
            head[0] = -head[0]
        pos = pos + head * step
        points[i] = pos
        if not (0 <= pos[1] <= extent[1] and 0 <= pos[2] <= extent[2]):
            return points[: i + 1]
    return points


def _fibres(rng: np.random.Generator, extent: np.ndarray, n_fibres: int,
            step: float = 0.15) -> list[tuple[np.ndarray, float, float]]:
    """Fibre centre lines as (points_um, radius_um, brightness)."""
    fibres: list[tuple[np.ndarray, float, float]] = []
    for _ in range(n_fibres):
        side = rng.integers(4)
        along = rng.uniform(0.1, 0.9)
        z0 = rng.uniform(0.1, 0.9) * extent[0]
        if side == 0:
            start, heading = np.array([z0, 0.0, along * extent[2]]), np.array([0, 1.0, 0])
        elif side == 1:
            start, heading = np.array([z0, extent[1], along * extent[2]]), np.array([0, -1.0, 0])
        elif side == 2:
            start, heading = np.array([z0, along * extent[1], 0.0]), np.array([0, 0, 1.0])
        else:
            start, heading = np.array([z0, along * extent[1], extent[2]]), np.array([0, 0, -1.0])
        heading = heading + rng.normal(0, 0.35, 3) * np.array([0.25, 1, 1])
        radius = float(rng.uniform(0.3, 1.0))
        brightness = float(rng.uniform(0.6, 1.4))
        path = _walk(rng, start, heading, extent, step, persistence_um=25.0)
        fibres.append((path, radius, brightness))
        # occasional branches: a thinner fibre leaving at 30-50 degrees
        n_branches = rng.poisson(len(path) * step / 120.0)
        for _ in range(n_branches):
            at = int(rng.integers(len(path) // 5, max(len(path) // 5 + 1, 4 * len(path) // 5)))
            direction = path[min(at + 1, len(path) - 1)] - path[max(at - 1, 0)]
            angle = np.deg2rad(rng.uniform(30, 50)) * rng.choice([-1, 1])
            c, s = np.cos(angle), np.sin(angle)
            branch_head = np.array([direction[0], c * direction[1] - s * direction[2],
                                    s * direction[1] + c * direction[2]])
            branch = _walk(rng, path[at], branch_head, extent, step, persistence_um=25.0)
            fibres.append((branch, max(0.3, 0.7 * radius), brightness * 0.8))
    return fibres


def _splat(volume: np.ndarray, points_vox: np.ndarray, weight: float) -> None:
    """Add *weight* at each point with trilinear weights (sub-voxel placement)."""
    base = np.floor(points_vox).astype(np.int64)
    frac = points_vox - base
    shape = np.array(volume.shape)
    for corner in np.ndindex(2, 2, 2):
        idx = base + np.array(corner)
        w = np.prod(np.where(np.array(corner), frac, 1 - frac), axis=1) * weight
        ok = np.all((idx >= 0) & (idx < shape), axis=1)
        np.add.at(volume, tuple(idx[ok].T), w[ok])


def _structure(rng: np.random.Generator, shape: tuple[int, int, int],
               voxel: tuple[float, float, float], n_fibres: int) -> np.ndarray:
    """Noise-free fibre density, peak about 1 on a fibre's axis (float32)."""
    voxel_arr = np.asarray(voxel, dtype=float)
    extent = voxel_arr * (np.asarray(shape) - 1)
    psf = np.asarray(DEFAULTS["psf_sigma_um"])
    bins = [(0.3, 0.55), (0.55, 0.8), (0.8, 1.01)]
    out = np.zeros(shape, dtype=np.float32)
    fibres = _fibres(rng, extent, n_fibres)
    for low, high in bins:
        members = [f for f in fibres if low <= f[1] < high]
        if not members:
            continue
        radius = 0.5 * (low + min(high, 1.0))
        sigma_um = np.sqrt((radius / 2.0) ** 2 + psf ** 2)
        sigma_vox = sigma_um / voxel_arr
        layer = np.zeros(shape, dtype=np.float32)
        for points, _, brightness in members:
            _splat(layer, points / voxel_arr, weight=brightness * 0.15 / voxel[2])
        layer = ndimage.gaussian_filter(layer, sigma_vox, mode="constant", truncate=3.0)
        # a line of unit density blurred by a Gaussian peaks at 1 / (2 pi s_a s_b)
        layer *= 2 * np.pi * sigma_vox[0] * sigma_vox[1] * min(1.0, radius / 0.8)
        out += layer
    return out


def _expose(rng: np.random.Generator, structure: np.ndarray, exposures: np.ndarray,
            p: dict[str, Any]) -> np.ndarray:
    """Detector counts (uint16) for a structure seen after *exposures* per slice."""
    dz = p["voxel_size_um"][0]
    depth_um = dz * np.arange(structure.shape[0])
    attenuation = np.exp(-depth_um / p["attenuation_length_um"])
    bleach = (1.0 - p["bleach_rate_per_exposure"]) ** exposures
    factor = (attenuation * bleach).astype(np.float32)[:, None, None]
    photons = (p["peak_photons"] * structure + p["haze_photons"]) * factor
    electrons = rng.poisson(photons)
    f2 = float(p["excess_noise_f2"])
    if f2 > 1.0:  # random multiplication: mean g per electron, variance (F2 - 1) g**2 per electron
        counts = rng.gamma(electrons / (f2 - 1.0), p["counts_per_photon"] * (f2 - 1.0))
        counts = counts.astype(np.float32)
    else:
        counts = p["counts_per_photon"] * electrons.astype(np.float32)
    counts += p["detector_offset"]
    counts += rng.normal(0.0, p["read_noise_counts"], size=counts.shape).astype(np.float32)
    return np.clip(np.rint(counts), 0, 65535).astype(np.uint16)


def _params(overrides: dict[str, Any]) -> dict[str, Any]:
    p = dict(DEFAULTS)
    p.update({k: v for k, v in overrides.items() if v is not None})
    check_number(p["attenuation_length_um"], name="attenuation_length_um", low=0, low_open=True,
                 allow_inf=True)
    check_number(p["bleach_rate_per_exposure"], name="bleach_rate_per_exposure", low=0, high=1,
                 high_open=True)
    check_number(p["excess_noise_f2"], name="excess_noise_f2", low=1.0)
    return p


def _truth(p: dict[str, Any], seed: int, **extra: Any) -> dict[str, Any]:
    dz = float(p["voxel_size_um"][0])
    k = float(p["bleach_rate_per_exposure"])
    inv = 1.0 / float(p["attenuation_length_um"]) - np.log1p(-k) / dz
    truth = {
        "scenario": SCENARIO,
        "generator": f"stackdepth {__version__} viewer_plugin.demo",
        "seed": int(seed),
        "voxel_size_um": [float(v) for v in p["voxel_size_um"]],
        "attenuation_length_um": float(p["attenuation_length_um"]),
        "bleach_rate_per_exposure": k,
        "effective_attenuation_length_um": float(1.0 / inv) if inv > 0 else float("inf"),
        "detector_offset": float(p["detector_offset"]),
        "counts_per_photon": float(p["counts_per_photon"]),
        "read_noise_counts": float(p["read_noise_counts"]),
        "excess_noise_f2": float(p["excess_noise_f2"]),
        "peak_photons": float(p["peak_photons"]),
        "haze_photons": float(p["haze_photons"]),
    }
    truth.update(extra)
    return truth


def fibre_slab(*, seed: int = 0, shape: tuple[int, int, int] = (60, 256, 256),
               n_fibres: int = 14, keep_structure: bool = False, **overrides: Any) -> DemoStack:
    """The single z-stack "fibre slab" (sample a).

    Parameters
    ----------
    seed : int
        Seed of the random generator; the same seed gives the same stack.
    shape : tuple of int
        (Z, Y, X) in voxels.
    n_fibres : int
        Number of primary fibres (branches come on top).
    keep_structure : bool
        Also return the noise-free structure (``DemoStack.structure``).
    **overrides
        Any key of :data:`DEFAULTS`, e.g. ``attenuation_length_um=80``.

    Returns
    -------
    DemoStack
        uint16 counts, axes "ZYX", scale = voxel size in um, and ``truth``.

    Examples
    --------
    >>> demo = fibre_slab(shape=(8, 32, 32), n_fibres=2)
    >>> demo.data.dtype, demo.data.shape, demo.truth["attenuation_length_um"]
    (dtype('uint16'), (8, 32, 32), 50.0)
    """
    seed = check_int(seed, name="seed", low=0)
    p = _params(overrides)
    rng = np.random.default_rng(seed)
    structure = _structure(rng, shape, p["voxel_size_um"], n_fibres)
    data = _expose(rng, structure, np.arange(shape[0]), p)
    truth = _truth(p, seed, acquisition="forward (slice 0 first)", n_slices=int(shape[0]))
    return DemoStack("fibre slab", data, "ZYX", tuple(float(v) for v in p["voxel_size_um"]), truth,
                     structure if keep_structure else None)


def bleach_series(*, seed: int = 1, n_time: int = 20, shape: tuple[int, int, int] = (16, 128, 128),
                  interval_s: float = 30.0, n_fibres: int = 6,
                  bleach_rate_per_exposure: float = 0.001, **overrides: Any) -> DemoStack:
    """A time series of a smaller fibre slab, bleaching between time points (sample b).

    Every time point is a full z-stack of ``shape[0]`` slice exposures, so
    time point *t*, slice *i*, is seen after ``t * N + i`` exposures and the
    per-frame rate is ``1 - (1 - k) ** N``.

    Returns
    -------
    DemoStack
        uint16 counts, axes "TZYX", scale (interval_s, dz, dy, dx) and ``truth``
        with ``interval_s``, ``bleach_rate_per_frame`` and ``exposures_per_frame``.
    """
    seed = check_int(seed, name="seed", low=0)
    n_time = check_int(n_time, name="n_time", low=2)
    interval_s = check_number(interval_s, name="interval_s", low=0, low_open=True)
    p = _params({**overrides, "bleach_rate_per_exposure": bleach_rate_per_exposure})
    rng = np.random.default_rng(seed)
    structure = _structure(rng, shape, p["voxel_size_um"], n_fibres)
    n_z = shape[0]
    frames = [_expose(rng, structure, t * n_z + np.arange(n_z), p) for t in range(n_time)]
    k = p["bleach_rate_per_exposure"]
    truth = _truth(p, seed, interval_s=interval_s, exposures_per_frame=n_z, n_time=n_time,
                   bleach_rate_per_frame=float(1 - (1 - k) ** n_z),
                   acquisition="time series of forward stacks")
    scale = (interval_s, *(float(v) for v in p["voxel_size_um"]))
    return DemoStack("fibre slab series", np.stack(frames), "TZYX", scale, truth)


def two_pass_pair(*, seed: int = 2, shape: tuple[int, int, int] = (40, 192, 192),
                  n_fibres: int = 10, **overrides: Any) -> tuple[DemoStack, DemoStack]:
    """The same stack acquired twice: forward, then deepest-first (sample c).

    Both stacks are stored top slice first. Slice *i* is seen after *i*
    exposures in the forward pass and after ``2N - 1 - i`` in the reverse pass.

    Returns
    -------
    (DemoStack, DemoStack)
        Forward and reverse passes (uint16, axes "ZYX"), sharing ``truth``.
    """
    seed = check_int(seed, name="seed", low=0)
    p = _params(overrides)
    rng = np.random.default_rng(seed)
    structure = _structure(rng, shape, p["voxel_size_um"], n_fibres)
    n = shape[0]
    forward = _expose(rng, structure, np.arange(n), p)
    reverse = _expose(rng, structure, 2 * n - 1 - np.arange(n), p)
    scale = tuple(float(v) for v in p["voxel_size_um"])
    base = _truth(p, seed, n_slices=int(n))
    return (
        DemoStack("fibre slab forward pass", forward, "ZYX", scale,
                  {**base, "acquisition": "forward (slice 0 first), first pass"}),
        DemoStack("fibre slab reverse pass", reverse, "ZYX", scale,
                  {**base, "acquisition": "reverse (deepest slice first), second pass"}),
    )
