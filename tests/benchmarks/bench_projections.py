"""Speed and memory of the projection kernels on a 64 x 1024 x 1024 uint16 stack.

Times are ratios to ``np.max(stack, axis=0)`` measured in the same run (best
of several repeats each, interleaved so that machine load affects both); the
median ratio of the interleaved pairs is given beside it.
The CPU-time ratio (process CPU seconds, all threads) is the work done per
call relative to np.max; on a shared machine it is steadier than wall time,
and with two idle cores the wall ratio approaches half of it.
Extra peak memory is measured with tracemalloc (numpy reports its buffers to
it) and given as a fraction of the stack's bytes.

Run on demand::

    python tests/benchmarks/bench_projections.py
    python tests/benchmarks/bench_projections.py occlusion   # only the cases named so
    pytest tests/benchmarks -s

Targets: peak_projection <= 2.5x, depth_coded_projection <= 3x,
occlusion_projection <= 2.5x np.max; extra peak memory <= 25 % of the stack
(<= 10 % for the grey occlusion projection). The rows marked "dask" project
the same stack as a dask array (one graph, dask's threads) and have no
target: they show the cost of the graph over the in-place numpy path.
"""

from __future__ import annotations

import os

# numba's OpenMP workers must not spin after a parallel region, or the CPU
# times below would count the spinning (set before numba starts its pool).
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")
import platform
import time
import tracemalloc
from typing import Callable

import numba
import numpy as np

from viewer_plugin.kernels import projection as P

SHAPE = (64, 1024, 1024)
REPEATS = 9
TIME_TARGETS = {
    "peak_projection": 2.5,
    "depth_coded_projection[peak]": 3.0,
    "depth_coded_projection[weighted]": 3.0,
    "depth_coded_projection[tinted]": 3.0,
    "occlusion_projection": 2.5,
}
MEMORY_TARGET = 0.25
MEMORY_TARGETS = {"occlusion_projection": 0.10}
#: z-chunk of the dask rows (16 MiB blocks).
DASK_CHUNKS = (8, 1024, 1024)
CLIM = (100.0, 3000.0)


def make_stack(seed: int = 0) -> np.ndarray:
    """A uint16 stack: noisy background plus bright random line segments."""
    rng = np.random.default_rng(seed)
    stack = rng.poisson(120, size=SHAPE).astype(np.uint16)
    n, h, w = SHAPE
    for _ in range(200):
        z, y, x = rng.integers(0, n), rng.integers(0, h - 200), rng.integers(0, w - 200)
        t = np.arange(200)
        stack[z, y + t * rng.integers(0, 2), x + t] = rng.integers(1000, 4000)
    return stack


def cases(stack: np.ndarray) -> dict[str, Callable[[], object]]:
    """The timed calls (explicit clim, as the widget passes its contrast limits)."""
    out: dict[str, Callable[[], object]] = {
        "peak_projection": lambda: P.peak_projection(stack),
    }
    for method in P.METHODS:
        out[f"depth_coded_projection[{method}]"] = (
            lambda m=method: P.depth_coded_projection(stack, method=m, clim=CLIM))
    out["depth_coded_projection[peak, auto clim]"] = (
        lambda: P.depth_coded_projection(stack))
    out["occlusion_projection"] = lambda: P.occlusion_projection(stack, clim=CLIM)
    out["occlusion_projection[bottom]"] = lambda: P.occlusion_projection(stack, clim=CLIM, view="bottom")
    out["occlusion_projection[cmap]"] = lambda: P.occlusion_projection(stack, clim=CLIM, cmap="viridis")
    # slices of optical depth up to 1 (above ln2/2): the range-reduced opacity
    out["occlusion_projection[density 1/um]"] = (
        lambda: P.occlusion_projection(stack, clim=CLIM, density=1.0))
    try:
        import dask.array as da
    except ImportError:
        return out
    lazy = da.from_array(stack, chunks=DASK_CHUNKS)
    out["peak_projection[dask]"] = lambda: P.peak_projection(lazy)
    out["depth_coded_projection[tinted, dask]"] = (
        lambda: P.depth_coded_projection(lazy, method="tinted", clim=CLIM))
    out["occlusion_projection[dask]"] = lambda: P.occlusion_projection(lazy, clim=CLIM)
    return out


def _timed(fn: Callable[[], object]) -> tuple[float, float]:
    """(wall seconds, CPU seconds of the whole process) of one call."""
    start, cpu = time.perf_counter(), time.process_time()
    fn()
    return time.perf_counter() - start, time.process_time() - cpu


def run_benchmarks(stack: np.ndarray | None = None,
                   only: tuple[str, ...] = ()) -> dict[str, dict[str, float]]:
    """Time and measure every case (or those whose name contains one of *only*).

    Returns {name: {seconds, np_max_seconds, ratio, median_ratio, cpu_ratio, memory}}.
    """
    stack = make_stack() if stack is None else stack
    P.warm_up()
    chosen = {name: fn for name, fn in cases(stack).items()
              if not only or any(word in name for word in only)}
    for fn in chosen.values():  # compile anything warm_up did not cover
        fn()
    reference = lambda: np.max(stack, axis=0)  # noqa: E731
    results: dict[str, dict[str, float]] = {}
    for name, fn in chosen.items():
        ref_times, times, ref_cpu, cpu = [], [], [], []
        for _ in range(REPEATS):
            wall, used = _timed(reference)
            ref_times.append(wall)
            ref_cpu.append(used)
            wall, used = _timed(fn)
            times.append(wall)
            cpu.append(used)
        tracemalloc.start()
        fn()
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        results[name] = {
            "seconds": min(times),
            "np_max_seconds": min(ref_times),
            "ratio": min(times) / min(ref_times),
            "median_ratio": float(np.median(np.divide(times, ref_times))),
            "cpu_ratio": min(cpu) / max(min(ref_cpu), 1e-9),
            "memory": peak / stack.nbytes,
        }
    return results


def report(results: dict[str, dict[str, float]]) -> str:
    """Markdown table of the results and the machine."""
    lines = [
        f"date {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; "
        f"{platform.processor() or platform.machine()}, {os.cpu_count()} cores; "
        f"numpy {np.__version__}; numba threads {numba.get_num_threads()}; stack {SHAPE} uint16",
        "",
        "| kernel | seconds | np.max seconds | ratio | median ratio | target | CPU-time ratio "
        "| extra peak memory |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for name, r in results.items():
        target = TIME_TARGETS.get(name)
        lines.append(
            f"| {name} | {r['seconds']:.4f} | {r['np_max_seconds']:.4f} | {r['ratio']:.2f} | "
            f"{r['median_ratio']:.2f} | {'<= %.1f' % target if target else '-'} | "
            f"{r['cpu_ratio']:.2f} | "
            f"{100 * r['memory']:.1f} % |")
    return "\n".join(lines)


def test_projection_speed_and_memory():
    """Speed and memory targets (ratios to np.max in the same run, tracemalloc peak)."""
    results = run_benchmarks()
    print()
    print(report(results))
    for name, target in TIME_TARGETS.items():
        assert results[name]["ratio"] <= target, (name, results[name])
    for name in TIME_TARGETS:
        limit = MEMORY_TARGETS.get(name, MEMORY_TARGET)
        assert results[name]["memory"] <= limit, (name, results[name])


if __name__ == "__main__":
    import sys

    print(report(run_benchmarks(only=tuple(sys.argv[1:]))))
