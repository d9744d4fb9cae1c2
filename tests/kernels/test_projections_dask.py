"""Projections of dask stacks: one graph (chunk -> combine tree -> tiles), equal to numpy.

Outside references (see ../shared/REFERENCES.md):

* numpy.max / numpy.argmax (first occurrence on ties) -- numpy documentation;
  the in-memory projections are checked against them in test_projections.py,
  and here every chunking of a dask stack must give the in-memory result;
* "over" is associative, not commutative -- T. Porter, T. Duff, SIGGRAPH '84
  (confirmed): partials of any grouping, merged in depth order, give the
  composite of one pass.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pytest

from viewer_plugin.kernels import Cancelled
from viewer_plugin.kernels import projection as P
from viewer_plugin.kernels.projection import graph, limits, peak, reduction

da = pytest.importorskip("dask.array")
dask = pytest.importorskip("dask")

SHAPE = (11, 2, 13, 17)  # z, channel, y, x
CHUNKINGS = [
    ((1,) * 11, (1, 1), (5, 8), (6, 6, 5)),  # single planes, every axis split
    ((3, 4, 4), (2,), (13,), (9, 8)),
    ((2, 3, 1, 5), (1, 1), (4, 4, 5), (17,)),  # uneven
    ((11,), (1, 1), (7, 6), (5, 12)),  # z whole, image split
]
CLIM = (300.0, 2500.0)


def make_stack(dtype=np.uint16, seed=61):
    rng = np.random.default_rng(seed)
    if np.dtype(dtype).kind == "f":
        stack = (rng.random(SHAPE) * 3000).astype(dtype)
        stack[rng.random(SHAPE) < 0.1] = np.nan
        stack[:, 0, 0, 0] = np.nan  # an all-NaN ray
        return stack
    stack = rng.integers(0, 3000, SHAPE).astype(dtype)
    stack[:, :, 1, :] = rng.integers(0, 3, (11, 2, 17))  # ties across blocks
    stack[:, :, 2, 3] = 0  # rays of the dtype's minimum (numpy.argmax gives 0)
    return stack


@pytest.fixture
def every_block_a_task(monkeypatch):
    """No grouping of small blocks, and a binary tree: every combine path is exercised."""
    monkeypatch.setattr(reduction, "COPY_CHUNK_BYTES", 1)
    monkeypatch.setattr(graph, "READ_PER_STATE", 0)
    monkeypatch.setattr(graph, "SPLIT_EVERY", 2)


def assert_same(a, b, exact=True):
    if exact:
        np.testing.assert_array_equal(a, b)
    else:  # partials regrouped: equal to float rounding
        np.testing.assert_allclose(a, b, rtol=1e-6, atol=1e-7)
    assert a.dtype == b.dtype and a.shape == b.shape


@pytest.mark.parametrize("chunks", CHUNKINGS)
@pytest.mark.parametrize("dtype", [np.uint16, np.float32])
def test_peak_and_depth_codes_equal_numpy(chunks, dtype, every_block_a_task):
    stack = make_stack(dtype)
    lazy = da.from_array(stack, chunks=chunks)
    a, b = P.peak_projection(lazy, z_step=0.5), P.peak_projection(stack, z_step=0.5)
    assert_same(a.peak, b.peak)
    assert_same(a.index, b.index)  # numpy.argmax ties: the first slice, whatever the grouping
    assert_same(a.depth_um, b.depth_um)
    for method in P.METHODS:
        c = P.depth_coded_projection(lazy, method=method, clim=CLIM, gamma=0.7)
        d = P.depth_coded_projection(stack, method=method, clim=CLIM, gamma=0.7)
        exact = method != "weighted"  # weighted sums are regrouped by block
        for name in ("rgb", "depth_um", "brightness"):
            assert_same(getattr(c, name), getattr(d, name), exact)
        assert_same(c.peak, d.peak)  # what recolour works from, and the saturation it reports
        if d.index is not None:
            assert_same(c.index, d.index)
        assert c.saturated_fraction == d.saturated_fraction and c.weight_floor == d.weight_floor
        if method != "tinted":
            again = dict(cmap="viridis", clim=(500.0, 2000.0), gamma=1.3)
            assert_same(c.recolour(**again).rgb, d.recolour(**again).rgb, exact)


@pytest.mark.parametrize("chunks", CHUNKINGS)
@pytest.mark.parametrize("dtype", [np.uint16, np.float32])
@pytest.mark.parametrize("view", ["top", "bottom"])
@pytest.mark.parametrize("cmap", [None, "magma"])
def test_occlusion_equals_numpy(chunks, dtype, view, cmap, every_block_a_task):
    stack = make_stack(dtype)
    lazy = da.from_array(stack, chunks=chunks)
    kwargs = dict(clim=CLIM, view=view, cmap=cmap, z_step=0.8, density=0.4)
    assert_same(P.occlusion_projection(lazy, **kwargs), P.occlusion_projection(stack, **kwargs),
                exact=False)


def test_other_axes_and_default_limits(every_block_a_task):
    stack = make_stack()
    tzyx = np.moveaxis(stack, 0, 1)  # (channel, z, y, x): project along axis 1
    lazy = da.from_array(tzyx, chunks=(1, 3, 6, 17))
    a, b = P.peak_projection(lazy, axis=1), P.peak_projection(tzyx, axis=1)
    assert_same(a.index, b.index)
    side = da.from_array(stack[:, 0], chunks=(4, 5, 6))  # projecting along y
    assert_same(P.peak_projection(side, axis=1).index, P.peak_projection(stack[:, 0], axis=1).index)
    for method in P.METHODS:  # default clim from the strided sample, the same on both
        c, d = P.depth_coded_projection(lazy, axis=1, method=method), \
            P.depth_coded_projection(tzyx, axis=1, method=method)
        assert c.clim == d.clim
        assert_same(c.rgb, d.rgb, exact=method != "weighted")


def test_one_graph_per_projection_and_one_for_the_limits(every_block_a_task):
    """The default limits of "weighted" (percentiles and background floor) read one sample graph."""
    stack = make_stack()
    lazy = da.from_array(stack, chunks=(1, 1, 7, 17))
    computations = []
    with dask.callbacks.Callback(start=lambda dsk: computations.append(len(dsk))):
        P.depth_coded_projection(lazy, method="weighted")
    assert len(computations) == 2  # the strided sample, then the projection
    assert limits.weighted_clim(lazy) == limits.weighted_clim(stack)


def test_graph_is_a_tree_of_partials():
    stack = make_stack()
    lazy = da.from_array(stack, chunks=((1,) * 11, 2, 13, 17))
    kdtype = reduction.kernel_dtype(stack.dtype)
    spec = reduction.DepthFold(start=partial(peak.start_peak, kdtype=kdtype, n=11),
                               update=peak._update_peak, combine=reduction.combine_peak,
                               dtype=kdtype)
    g = graph.build_graph(lazy, spec)
    # 11 planes of 884 bytes are grouped into one task below COPY_CHUNK_BYTES
    assert len(g.leaves) == 1 and len(g.tiles) == 1
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(reduction, "COPY_CHUNK_BYTES", 1)
        patch.setattr(graph, "READ_PER_STATE", 0)
        g = graph.build_graph(lazy, spec)
    assert len(g.leaves) == 11
    merges = [k for k in g.graph.to_dict() if isinstance(k, tuple) and k[0].endswith("-merge")]
    assert len(merges) == 3 + 1  # 11 -> 3 -> 1 with SPLIT_EVERY = 4


def test_progress_counts_blocks_and_cancel_stops(every_block_a_task):
    stack = make_stack()
    lazy = da.from_array(stack, chunks=(1, 2, 7, 17))
    for scheduler in ("threads", "sync"):
        seen = []
        with dask.config.set(scheduler=scheduler):
            P.peak_projection(lazy, progress=lambda d, t: seen.append((d, t)))
        assert [d for d, _ in seen] == list(range(11 * 2 + 1))  # 11 z-blocks x 2 row tiles
        assert {t for _, t in seen} == {22}
    ran = []

    def stop(done, total):
        ran.append(done)
        if done == 3:
            raise Cancelled

    for call in (lambda: P.peak_projection(lazy, progress=stop),
                 lambda: P.depth_coded_projection(lazy, clim=CLIM, method="tinted", progress=stop),
                 lambda: P.occlusion_projection(lazy, clim=CLIM, view="bottom", progress=stop)):
        ran.clear()
        with pytest.raises(Cancelled):
            call()
        assert ran[-1] == 3


def test_memory_stays_bounded(monkeypatch):
    """Blocks made on demand: the stack is never held whole, only a few blocks and partials."""
    import tracemalloc

    monkeypatch.setattr(reduction, "COPY_CHUNK_BYTES", 2**20)
    n, h, w = 64, 256, 256  # 8 MiB of uint16 in 32 blocks of 256 KiB

    def block(block_info=None):
        z0 = block_info[None]["array-location"][0][0]
        rng = np.random.default_rng(z0)
        return rng.integers(0, 4000, (2, h, w), dtype=np.uint16)

    lazy = da.map_blocks(block, chunks=((2,) * (n // 2), h, w), dtype=np.uint16)
    stack = lazy.compute()
    expected = P.peak_projection(stack)
    tracemalloc.start()
    got = P.peak_projection(lazy)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert_same(got.index, expected.index)
    assert peak < 0.5 * stack.nbytes, peak / stack.nbytes


def test_distributed_cluster_runs_blocks_on_both_workers(every_block_a_task):
    distributed = pytest.importorskip("distributed")
    stack = make_stack()[:, 0]
    lazy = da.from_array(stack, chunks=(1, 13, 17))
    expected = P.peak_projection(stack)
    occluded = P.occlusion_projection(stack, clim=CLIM, view="bottom", cmap="viridis")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                       dashboard_address=None)
    with cluster, distributed.Client(cluster) as client:
        with distributed.get_task_stream(client) as stream:
            got = P.peak_projection(lazy)
        assert_same(got.peak, expected.peak)
        assert_same(got.index, expected.index)
        assert len({task["worker"] for task in stream.data}) == 2
        seen = []
        rgb = P.occlusion_projection(lazy, clim=CLIM, view="bottom", cmap="viridis",
                                     progress=lambda d, t: seen.append((d, t)))
        assert_same(rgb, occluded, exact=False)
        assert [d for d, _ in seen] == list(range(12)) and seen[-1][1] == 11

        def stop(done, total):
            if done == 2:
                raise Cancelled

        with pytest.raises(Cancelled):
            P.depth_coded_projection(lazy, clim=CLIM, progress=stop)
