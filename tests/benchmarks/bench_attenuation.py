"""Speed of the attenuation kernels on a 64 x 1024 x 1024 uint16 stack, and of the interval.

Times are ratios to ``np.max(stack, axis=0)`` measured in the same run (best of
several repeats each, interleaved so that machine load affects both). The
estimate reads a lateral sample (about 16 000 voxels a slice, every 8th row and
column here), so it stays far below a full pass over the data; the correction
writes a new float32 stack and is bounded by memory bandwidth. The ratio of the
estimate is measured without the interval (``n_resamples=0``): the bootstrap's
cost does not grow with the stack's lateral size (it works on the sample).

The interval: the default estimate (1000 resamples of tiles and depth blocks,
each re-running the select-and-fit loop) on the 60 x 256 x 256 demo stack, in
seconds and as a ratio to ``np.max`` of that stack; target at most 10 s on two
cores.

Run on demand::

    python tests/benchmarks/bench_attenuation.py
    pytest tests/benchmarks/bench_attenuation.py -s -o addopts=""

Targets: estimate_attenuation <= 10x, correct_attenuation <= 6x np.max; the estimate
with its interval on 60 x 256 x 256 <= 10 s.
"""

from __future__ import annotations

import os
import platform
import time
import warnings
from typing import Callable

import numpy as np

from viewer_plugin.kernels import correct_attenuation, estimate_attenuation

SHAPE = (64, 1024, 1024)
REPEATS = 5
TARGETS = {"estimate_attenuation": 10.0, "correct_attenuation": 6.0}
INTERVAL_SECONDS = 10.0


def make_stack(seed: int = 0) -> np.ndarray:
    """uint16: offset 100 + Poisson background, random bright fibres fading with depth (l = 80 um)."""
    rng = np.random.default_rng(seed)
    n, h, w = SHAPE
    stack = (100 + rng.poisson(8, size=SHAPE)).astype(np.uint16)
    fade = np.exp(-np.arange(n) * 2.0 / 80.0)
    for z in range(n):
        for _ in range(60):
            y, x = rng.integers(0, h - 300), rng.integers(0, w - 300)
            t = np.arange(300)
            stack[z, y + (t * rng.uniform(0, 1)).astype(int), x + t] += np.uint16(2000 * fade[z])
    return stack


def best_of(calls: dict[str, Callable[[], object]], repeats: int) -> dict[str, float]:
    times = {name: float("inf") for name in calls}
    for _ in range(repeats):
        for name, call in calls.items():
            start = time.perf_counter()
            call()
            times[name] = min(times[name], time.perf_counter() - start)
    return times


def run() -> dict[str, float]:
    stack = make_stack()
    fit = estimate_attenuation(stack, z_step=2.0)  # warm up (numba compilation)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        correct_attenuation(stack, fit)
    calls = {
        "np.max": lambda: np.max(stack, axis=0),
        "estimate_attenuation": lambda: estimate_attenuation(stack, z_step=2.0, n_resamples=0),
        "correct_attenuation": lambda: correct_attenuation(stack, fit),
    }
    times = best_of(calls, REPEATS)
    ratios = {name: times[name] / times["np.max"] for name in TARGETS}
    print(f"\nattenuation benchmark, {SHAPE} uint16, {platform.processor() or platform.machine()}, "
          f"{os.cpu_count()} cpu(s); estimated length {fit.length_um:.1f} um (true 80)")
    print(f"  np.max(stack, axis=0): {times['np.max'] * 1e3:.1f} ms")
    for name, ratio in ratios.items():
        print(f"  {name}: {times[name] * 1e3:.1f} ms = {ratio:.2f}x np.max (target <= {TARGETS[name]}x)")
    return ratios


def run_interval(repeats: int = 3) -> float:
    """Seconds of the default estimate (with its bootstrap interval) on the demo stack."""
    from viewer_plugin.demo import fibre_slab

    demo = fibre_slab(seed=0)  # 60 x 256 x 256 uint16
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = estimate_attenuation(demo.data, z_step=1.0)  # warm up
        times = best_of({"np.max": lambda: np.max(demo.data, axis=0),
                         "estimate": lambda: estimate_attenuation(demo.data, z_step=1.0)}, repeats)
    print(f"\ninterval benchmark, {demo.data.shape} uint16 demo, {os.cpu_count()} cpu(s): "
          f"{fit.describe()}")
    print(f"  estimate with interval ({fit.n_resamples} resamples): {times['estimate']:.2f} s = "
          f"{times['estimate'] / times['np.max']:.0f}x np.max ({times['np.max'] * 1e3:.1f} ms); "
          f"target <= {INTERVAL_SECONDS:g} s")
    return times["estimate"]


def test_attenuation_speed():
    ratios = run()
    for name, ratio in ratios.items():
        assert ratio <= TARGETS[name], f"{name}: {ratio:.2f}x np.max, target {TARGETS[name]}x"


def test_interval_speed():
    assert run_interval() <= INTERVAL_SECONDS


if __name__ == "__main__":
    run()
    run_interval()
