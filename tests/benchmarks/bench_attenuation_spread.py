"""Spread and lean of the attenuation estimate against the ideal-mask estimate, on many phantoms.

For each phantom of known Beer-Lambert length (the demo's fibre slab, no bleaching) the
relative error of the decay rate 1/l is measured for

* ideal mask: the per-slice mean above background over the voxels where the noise-free
  structure exceeds 0.2 (the foreground known, and so the true gain);
* noise-free loop: the select-and-fit loop of the estimate ("pinned" threshold) run on the
  noise-free attenuated structure, with the thresholds the noisy stack gets -- what the
  loop costs when it has to find its own gain, with no noise at all;
* estimate: ``estimate_attenuation`` (pinned threshold, the default);
* noisiest rule: the previous threshold rule (following the noisiest measured slice).

Printed: mean error with its standard error ("lean") and the ratio of spreads to the ideal
mask. Two designs: the coverage test's phantoms (40 x 96 x 96, lengths 15-40 um) and the
demo's size (60 x 256 x 256, 14 fibres, 50 um), each with and without a photomultiplier's
excess noise (F2 = 1.3). Run on demand::

    python tests/benchmarks/bench_attenuation_spread.py [N]
    pytest tests/benchmarks/bench_attenuation_spread.py -s -o addopts=""

Goal (issue): 1.3x the ideal mask's spread, at most 1.5x, no lean. Not reached; see
docs/attenuation.md for the numbers and why.
"""

from __future__ import annotations

import math
import sys
import warnings

import numpy as np

from viewer_plugin.demo import fibre_slab
from viewer_plugin.kernels import estimate_attenuation
from viewer_plugin.kernels.primitives.background import rows_background
from viewer_plugin.kernels.primitives.fitting import fit_log_profile
from viewer_plugin.kernels.primitives.foreground import (
    ForegroundSample,
    exponential_gain,
    iterate_foreground,
    measure_depth_profile,
)

DESIGNS = {
    "test phantoms 40x96x96, l 15-40 um": {"shape": (40, 96, 96), "n_fibres": 10, "lengths": (15, 40)},
    "demo size 60x256x256, l 50 um": {"shape": (60, 256, 256), "n_fibres": 14, "lengths": (50, 50)},
}


def _rate(depth: np.ndarray, signal: np.ndarray, sem: np.ndarray) -> float:
    return -fit_log_profile(depth, signal, sem).slope


def ideal_mask_rate(data: np.ndarray, structure: np.ndarray, depth: np.ndarray) -> float:
    n = data.shape[0]
    sample = data.reshape(n, -1).astype(np.float32)
    above = sample - rows_background(sample).level[:, None]
    mask = structure.reshape(n, -1) > 0.2
    count = np.maximum(mask.sum(axis=1), 1)
    mean = np.where(mask, above, 0.0).sum(axis=1) / count
    sq = (np.where(mask, above, 0.0) ** 2).sum(axis=1) / count
    sem = np.sqrt(np.maximum(sq - mean**2, 0.0) / np.maximum(count - 1, 1))
    ok = mask.sum(axis=1) >= 10
    return _rate(depth, np.where(ok, mean, np.nan), np.where(ok, sem, np.nan))


def noise_free_rate(demo, depth: np.ndarray, length: float) -> float:
    n = demo.data.shape[0]
    truth = demo.truth
    clean = (truth["peak_photons"] * demo.structure * truth["counts_per_photon"]
             * np.exp(-depth / length)[:, None, None]).reshape(n, -1).astype(np.float32)
    noisy = demo.data.reshape(n, -1).astype(np.float32)
    selection = ForegroundSample(clean, rows_background(noisy).sigma, demo.data.shape[1:], rule="pinned")
    fg = iterate_foreground(selection, depth, exponential_gain).foreground
    return _rate(depth, fg.signal, fg.sem)


def noisiest_rule_rate(data: np.ndarray, depth: np.ndarray) -> float:
    fg = measure_depth_profile(data, z_step=1.0, rule="noisiest").loop.foreground
    return _rate(depth, fg.signal, fg.sem)


def phantom_errors(design: dict, seed: int, f2: float) -> list[float]:
    rng = np.random.default_rng(seed)
    length = float(rng.uniform(*design["lengths"]))
    demo = fibre_slab(seed=100 + seed, shape=design["shape"], n_fibres=design["n_fibres"],
                      attenuation_length_um=length, bleach_rate_per_exposure=0.0,
                      excess_noise_f2=f2, keep_structure=True)
    depth = np.arange(demo.data.shape[0], dtype=np.float64)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = estimate_attenuation(demo.data, z_step=1.0, n_resamples=0)
    rates = [ideal_mask_rate(demo.data, demo.structure, depth), noise_free_rate(demo, depth, length),
             0.0 if math.isinf(fit.length_um) else 1.0 / fit.length_um,
             noisiest_rule_rate(demo.data, depth)]
    return [r * length - 1.0 for r in rates]


def run(n: int = 50) -> dict[str, float]:
    names = ("ideal mask", "noise-free loop", "estimate", "noisiest rule")
    ratios = {}
    for label, design in DESIGNS.items():
        for f2 in (1.0, 1.3):
            errors = np.array([phantom_errors(design, seed, f2) for seed in range(n)])
            spread = np.nanstd(errors, axis=0, ddof=1)
            print(f"\n{label}, F2 = {f2}, {n} phantoms (relative error of the rate 1/l)")
            for j, name in enumerate(names):
                column = errors[:, j]
                se = np.nanstd(column, ddof=1) / math.sqrt(np.isfinite(column).sum())
                print(f"  {name:16s} mean {np.nanmean(column):+.3f} +/- {se:.3f}   spread {spread[j]:.3f}"
                      f" = {spread[j] / spread[0]:.2f}x ideal mask")
            ratios[f"{label}, F2 {f2}"] = spread[2] / spread[0]
    return ratios


def test_spread_ratio():
    ratios = run(int(sys.argv[1]) if len(sys.argv) > 1 and sys.argv[1].isdigit() else 50)
    for name, ratio in ratios.items():
        assert ratio <= 1.5, f"{name}: {ratio:.2f}x the ideal-mask spread (goal 1.3x, at most 1.5x)"


if __name__ == "__main__":
    run(int(sys.argv[1]) if len(sys.argv) > 1 else 50)
