"""The five docks on lazy (dask-backed) layers, as an OME-Zarr opens in napari.

For the peak depth map, depth colour, occlusion, attenuation and bleaching docks:

- the job runs off the GUI thread (the ``viewer_plugin.jobs`` function is called in a
  worker thread);
- the stack is streamed, not loaded: the traced peak memory of the job (``tracemalloc``,
  to which numpy reports its buffers) stays below a quarter of the stack's size, while a
  counting ``dask.array.map_blocks`` source shows that every chunk was read;
- a multiscale layer is computed on its finest level: no job reads a coarser level (the
  depth colour preview reads a coarser level on purpose, and only that);
- results have the finest level's lateral shape and the layer's scale and translate (µm);
  corrected stacks stay lazy.

The stack is made chunk by chunk from each block's position, never held whole: a
uniform background of 95-105 counts plus bright rows whose place moves with depth and
whose brightness falls as exp(-depth / 150 µm) (and by 5 % per time point in the series).
"""

from __future__ import annotations

import threading
import tracemalloc

import numpy as np
import pytest

pytestmark = pytest.mark.gui

WAIT_MS = 300_000  # first calls compile the numba kernels; CI machines are slow and shared

SHAPE = (192, 1024, 1024)         # 384 MiB of uint16
CHUNKS = (16, 256, 256)           # 2 MiB: the default chunk of `stackdepth convert` for uint16
SCALE = (2.0, 0.5, 0.5)           # µm
TRANSLATE = (0.0, 10.0, -4.0)     # µm
LENGTH_UM = 150.0                 # the generator's attenuation length
FADE_PER_FRAME = 0.05             # the generator's loss per time point (series only)
#: A job may hold at most this share of the stack in traced memory at once.
MEMORY_SHARE = 0.25


class ChunkLog:
    """Counts the chunks read from each pyramid level (thread-safe)."""

    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.reads: dict[int, int] = {}

    def record(self, level: int) -> None:
        with self.lock:
            self.reads[level] = self.reads.get(level, 0) + 1

    def snapshot(self) -> dict[int, int]:
        with self.lock:
            return dict(self.reads)


def lazy_level(log: ChunkLog, *, level: int = 0, shape=SHAPE, chunks=CHUNKS):
    """A uint16 dask array made block by block; level *k* halves y and x *k* times.

    Shape (z, y, x) or (t, z, y, x); each block is computed from its position alone.
    """
    import dask.array as da

    factor = 2 ** level
    shape = tuple(shape[:-2]) + (-(-shape[-2] // factor), -(-shape[-1] // factor))
    chunks = tuple(chunks[:-2]) + (min(chunks[-2], shape[-2]), min(chunks[-1], shape[-1]))

    def block(block_info=None):
        location = block_info[None]["array-location"]
        log.record(level)
        rng = np.random.default_rng([start for start, _ in location] + [level])
        out = rng.integers(95, 106, size=tuple(b - a for a, b in location), dtype=np.uint16)
        (z0, z1), (y0, y1), (x0, x1) = location[-3:]
        z = np.arange(z0, z1)[:, None, None]
        y = np.arange(y0, y1)[None, :, None] * factor
        x = np.arange(x0, x1)[None, None, :] * factor
        amplitude = 1500 * np.exp(-z * SCALE[0] / LENGTH_UM)
        if len(location) == 4:
            t0, t1 = location[0]
            amplitude = amplitude * (1 - FADE_PER_FRAME) ** np.arange(t0, t1)[:, None, None, None]
        out += ((y + x // 64 + z) % 32 < 2) * amplitude.astype(np.uint16)
        return out

    return da.map_blocks(block, dtype=np.uint16, chunks=da.core.normalize_chunks(chunks, shape),
                         meta=np.empty((0,) * len(shape), np.uint16))


def add_lazy(viewer, log: ChunkLog, *, levels: int = 3, shape=SHAPE, chunks=CHUNKS,
             scale=SCALE, translate=TRANSLATE, labels=("z", "y", "x")):
    """A layer of *levels* lazy levels (1: a plain dask layer), as the OME-Zarr reader adds it."""
    data = [lazy_level(log, level=k, shape=shape, chunks=chunks) for k in range(levels)]
    return viewer.add_image(data if levels > 1 else data[0], multiscale=levels > 1,
                            name="cleared", scale=scale, translate=translate, axis_labels=labels,
                            units=("um",) * len(shape), contrast_limits=(100.0, 1600.0))


class JobRecord:
    """Wraps ``viewer_plugin.jobs`` functions: thread, traced peak memory and chunks read per call."""

    def __init__(self, monkeypatch, log: ChunkLog, names: tuple[str, ...]) -> None:
        from viewer_plugin import jobs

        self.log = log
        self.calls: list[dict] = []
        for name in names:  # the docks import these from viewer_plugin.jobs when they run
            monkeypatch.setattr(jobs, name, self._wrap(name, getattr(jobs, name)))

    def _wrap(self, name, function):
        def wrapped(*args, **kwargs):
            before = self.log.snapshot()
            tracemalloc.reset_peak()
            start, _ = tracemalloc.get_traced_memory()
            result = function(*args, **kwargs)
            peak = tracemalloc.get_traced_memory()[1] - start
            after = self.log.snapshot()
            self.calls.append({
                "name": name, "gui_thread": threading.current_thread() is threading.main_thread(),
                "peak_bytes": peak, "reads": {k: after[k] - before.get(k, 0) for k in after}})
            return result

        return wrapped

    def call(self, name: str) -> dict:
        found = [c for c in self.calls if c["name"] == name]
        assert found, f"{name} was not called"
        return found[-1]


@pytest.fixture(scope="module")
def compiled():
    """Compile every kernel the jobs use once, untraced (tracing slows compilation down)."""
    from viewer_plugin import jobs
    from viewer_plugin._shared.stack import Stack
    from viewer_plugin.kernels.projection import warm_up

    warm_up()
    small = jobs.Selection(Stack(lazy_level(ChunkLog(), shape=(32, 256, 256)), "ZYX", SCALE))
    for method in ("max", "peak", "occlusion"):
        jobs.project_stack(small, jobs.ProjectionOptions(method=method), depth_axis=0)
    measured = jobs.measure_attenuation(small, jobs.AttenuationOptions())
    jobs.correct_measured(measured).data[:2].compute()
    checked = jobs.check_bleaching(small, jobs.BleachingOptions(axis_kind="depth"))
    jobs.correct_checked(checked).data[:2].compute()


@pytest.fixture
def traced(compiled):
    tracemalloc.start()
    yield
    tracemalloc.stop()


def run(qtbot, widget, worker):
    assert worker is not None
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)


def n_chunks(shape=SHAPE, chunks=CHUNKS) -> int:
    return int(np.prod([-(-n // c) for n, c in zip(shape, chunks)]))


def check_streamed(call: dict, *, stack_bytes: int = int(np.prod(SHAPE)) * 2,
                   chunks: int | None = n_chunks()) -> None:
    """Off the GUI thread, on the finest level only, in far less memory than the stack.

    *chunks*: how many level-0 chunks the job must at least have read (None: a lazy
    result, nothing need be read).
    """
    assert not call["gui_thread"], call
    assert all(n == 0 for level, n in call["reads"].items() if level > 0), call
    if chunks is not None:
        assert call["reads"].get(0, 0) >= chunks, call
    assert call["peak_bytes"] < MEMORY_SHARE * stack_bytes, call


def check_geometry(out, shape=SHAPE[1:], scale=SCALE[1:], translate=TRANSLATE[1:]) -> None:
    assert tuple(out.data.shape[:len(shape)]) == tuple(shape), out.name
    np.testing.assert_allclose(out.scale[-len(shape):], scale)
    np.testing.assert_allclose(out.translate[-len(shape):], translate)


@pytest.mark.parametrize(("dock", "levels"), [("peak", 1), ("peak", 3), ("colour", 3),
                                              ("occlusion", 3)])
def test_projection_docks_stream_the_finest_level(make_napari_viewer, qtbot, monkeypatch, traced,
                                                  dock, levels):
    from viewer_plugin.widgets.projection import (
        DepthColourWidget,
        OcclusionWidget,
        PeakDepthWidget,
    )

    viewer = make_napari_viewer(show=True)
    log = ChunkLog()
    layer = add_lazy(viewer, log, levels=levels)
    widget = {"peak": PeakDepthWidget, "colour": DepthColourWidget,
              "occlusion": OcclusionWidget}[dock](viewer)
    if dock == "colour":
        widget.live.value = False
    assert widget.layer is layer and widget.z_step.value == pytest.approx(SCALE[0])
    record = JobRecord(monkeypatch, log, ("project_stack",))
    run(qtbot, widget, widget.compute(start_thread=False))
    check_streamed(record.call("project_stack"))
    added = [out for out in viewer.layers if out is not layer]
    assert added
    for out in added:
        check_geometry(out)
    if dock == "peak":
        # numpy.max and numpy.argmax (first occurrence on ties) on the same voxels, slab by slab
        full = layer.data[0] if levels > 1 else layer.data
        band = np.asarray(full[:, :64])
        np.testing.assert_array_equal(widget.max_layer.data[:64], band.max(axis=0))
        np.testing.assert_allclose(widget.depth_layer.data[:64], band.argmax(axis=0) * SCALE[0])


def test_attenuation_dock_streams_and_corrects_lazily(make_napari_viewer, qtbot, monkeypatch,
                                                      traced):
    from viewer_plugin.widgets.attenuation import AttenuationWidget

    viewer = make_napari_viewer(show=True)
    log = ChunkLog()
    add_lazy(viewer, log)
    widget = AttenuationWidget(viewer)
    record = JobRecord(monkeypatch, log, ("measure_attenuation", "correct_measured"))
    run(qtbot, widget, widget.fit(start_thread=False))
    check_streamed(record.call("measure_attenuation"))
    # analytic: the generator's fibres fade as exp(-depth / 150 µm)
    assert widget.fit_result.length_um == pytest.approx(LENGTH_UM, rel=0.1)
    run(qtbot, widget, widget.correct(start_thread=False))
    check_streamed(record.call("correct_measured"), chunks=None)
    out = viewer.layers["cleared attenuation-corrected"]
    assert hasattr(out.data, "dask") and out.data.dtype == np.float32  # lazy, not loaded
    check_geometry(out, SHAPE, SCALE, TRANSLATE)


def test_bleaching_dock_streams_a_stack_and_corrects_lazily(make_napari_viewer, qtbot,
                                                            monkeypatch, traced):
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    log = ChunkLog()
    add_lazy(viewer, log)
    widget = BleachingWidget(viewer)
    assert widget.axis_kind.value == "depth"
    record = JobRecord(monkeypatch, log, ("check_bleaching", "correct_checked"))
    run(qtbot, widget, widget.check(start_thread=False))
    check_streamed(record.call("check_bleaching"))
    # analytic: loss per 2 µm slice 1 - exp(-2 / 150)
    assert widget.report.rate_per_frame == pytest.approx(1 - np.exp(-SCALE[0] / LENGTH_UM),
                                                         rel=0.1)
    run(qtbot, widget, widget.correct(start_thread=False))
    check_streamed(record.call("correct_checked"), chunks=None)
    out = viewer.layers["cleared bleaching-corrected"]
    assert hasattr(out.data, "dask") and out.data.dtype == np.float32
    check_geometry(out, SHAPE, SCALE, TRANSLATE)


def test_bleaching_dock_streams_a_time_series(make_napari_viewer, qtbot, monkeypatch, traced):
    """Along time, memory does not grow with the number of time points.

    (The check chooses its foreground on the whole first frame, so its memory goes with
    the size of one frame; docs/large-data.md gives the measured figure.)
    """
    from viewer_plugin.widgets.bleaching import BleachingWidget

    viewer = make_napari_viewer(show=True)
    widget = BleachingWidget(viewer)
    peaks = {}
    for frames in (16, 64):
        shape, chunks = (frames, 16, 256, 256), (1, 16, 256, 256)  # 2 MiB a frame
        log = ChunkLog()
        layer = add_lazy(viewer, log, shape=shape, chunks=chunks, scale=(30.0,) + SCALE,
                         translate=(0.0,) + TRANSLATE, labels=("t", "z", "y", "x"))
        widget.layer_combo.value = layer
        assert widget.axis_kind.value == "time"
        record = JobRecord(monkeypatch, log, ("check_bleaching",))
        run(qtbot, widget, widget.check(start_thread=False))
        call = record.call("check_bleaching")
        check_streamed(call, stack_bytes=1e30, chunks=n_chunks(shape, chunks))
        peaks[frames] = call["peak_bytes"]
        # analytic: the generator's signal falls by 5 % per time point
        assert widget.report.rate_per_frame == pytest.approx(FADE_PER_FRAME, rel=0.1)
    assert peaks[64] < 1.25 * peaks[16], peaks  # 4x the time points, about the same memory


def test_depth_colour_preview_reads_a_coarse_level(make_napari_viewer, qtbot, monkeypatch, traced):
    """The preview of a pyramid reads the coarsest level not coarser than the preview grid."""
    from viewer_plugin.widgets.projection import DepthColourWidget

    viewer = make_napari_viewer(show=True)
    log = ChunkLog()
    add_lazy(viewer, log)
    widget = DepthColourWidget(viewer)
    widget.live.value = False
    record = JobRecord(monkeypatch, log, ("project_stack",))
    worker = widget.update_live(start_thread=False, downsample=True)
    with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
        worker.start()
    call = record.call("project_stack")
    # every 8th pixel of 1024 x 1024 (8 M voxels at most); level 2 is 4x coarser: every 2nd of it
    assert not call["gui_thread"]
    assert call["reads"].get(0, 0) == 0 and call["reads"].get(1, 0) == 0
    assert call["reads"][2] == n_chunks((192, 256, 256))
    preview = widget.preview_layer
    assert preview.data.shape == (128, 128, 3)
    np.testing.assert_allclose(preview.scale, (4.0, 4.0))
    # a level-2 pixel is the mean of 4 x 4 full-resolution pixels: its centre is 1.5 pixels in
    np.testing.assert_allclose(preview.translate, np.array(TRANSLATE[1:]) + 1.5 * 0.5)


def test_background_jobs_run_dask_on_one_thread_per_core(make_napari_viewer, qtbot):
    """Off the main thread dask would start cores + 4 threads (dask.threaded.get); a job gets cores.

    A scheduler the user chose (here the synchronous one) is left alone.
    """
    import os

    import dask

    from viewer_plugin.widgets._runner import BackgroundTask

    make_napari_viewer()
    task = BackgroundTask(label="dask threads")
    seen = []
    for chosen in (None, "synchronous"):
        with dask.config.set(scheduler=chosen):
            worker = task.start(lambda progress: seen.append(dask.config.get("num_workers", None)),
                                on_result=lambda _: None, start_thread=False)
            with qtbot.waitSignal(worker.finished, timeout=WAIT_MS):
                worker.start()
            qtbot.waitUntil(lambda: not task.running, timeout=WAIT_MS)
    assert seen == [os.cpu_count(), None]
    assert dask.config.get("num_workers", None) is None  # restored after the job
