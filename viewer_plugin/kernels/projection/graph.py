"""The dask graph of a projection: blocks -> partial states -> tree of combines -> tiles.

A dask stack (depth-first, any chunking) becomes one graph per projection:

* *chunk*: one task per group of neighbouring z-blocks of one lateral tile
  (the same chunks of the leading and image axes) folds them into a fresh
  partial state with the compiled loops (:func:`.reduction.fold_blocks`),
  with the global index of each block's first slice, so slice indices are
  global. Small blocks (e.g. one plane each) are grouped up to
  ``reduction.COPY_CHUNK_BYTES`` to keep the number of tasks down;
* *combine*: the partials of a tile are merged ``SPLIT_EVERY`` at a time, in
  depth order, level after level, until one state per tile is left;
* *aggregate*: the tile states are placed into the state of the whole image,
  which the projection turns into its result.

The graph is computed once with the active scheduler: dask's threads by
default, or the workers of a ``dask.distributed`` client in the caller's
context. At most one partial per running task and the partials waiting in
the tree are held beside the blocks being read; the stack is never loaded
whole. Progress counts the chunk tasks as they finish (a
:class:`dask.callbacks.Callback` on local schedulers,
``distributed.as_completed`` on a client); :class:`Cancelled` raised by the
progress callback stops the computation.
"""

from __future__ import annotations

import itertools
import uuid
from dataclasses import dataclass
from typing import Any

import dask
import numpy as np
from dask.callbacks import Callback
from dask.delayed import Delayed
from dask.highlevelgraph import HighLevelGraph

from ..._shared.progress import Progress, report_progress
from . import reduction
from .reduction import DepthFold, fold_blocks

__all__ = ["SPLIT_EVERY", "DepthGraph", "build_graph", "compute_graph", "reduce_dask"]

#: Partial states merged by one combine task.
SPLIT_EVERY = 4
#: A chunk task reads at least this many times the bytes of the partial state
#: it makes (small blocks are grouped): the partials waiting in the tree then
#: stay a fraction of the stack whatever order the scheduler runs the tasks in.
READ_PER_STATE = 4


@dataclass(frozen=True)
class DepthGraph:
    """The graph of one projection over a dask stack.

    Attributes
    ----------
    graph : HighLevelGraph
        The stack's graph plus the fold, combine and tile tasks.
    name : str
        The layer of the projection's tasks.
    leaves : list of keys
        The chunk tasks (one per group of blocks), counted by progress.
    tiles : list of (key, tuple of slices)
        The final state of each lateral tile and where it goes in the state
        of the whole image (leading axes, then rows and columns).
    """

    graph: HighLevelGraph
    name: str
    leaves: list
    tiles: list


def reduce_dask(v: Any, fold: DepthFold, progress: Progress = None) -> tuple:
    """The final state of *fold* over the depth-first dask stack *v*: one graph, one compute."""
    graph = build_graph(v, fold)
    return assemble(v, graph.tiles, compute_graph(graph, progress))


def _groups(z_chunks: tuple, plane_bytes: int, state_bytes: int) -> list[list[int]]:
    """Indices of neighbouring z-blocks folded by one task.

    A block is never split (that would read it twice); small ones are
    grouped up to ``COPY_CHUNK_BYTES`` or ``READ_PER_STATE`` times
    *state_bytes* (the larger), to save per-task overhead and bound the
    partials alive at a time.
    """
    target = max(reduction.COPY_CHUNK_BYTES, READ_PER_STATE * state_bytes)
    groups: list[list[int]] = []
    size = 0
    for i, planes in enumerate(z_chunks):
        nbytes = int(planes) * plane_bytes
        if groups and size + nbytes <= target:
            groups[-1].append(i)
            size += nbytes
        else:
            groups.append([i])
            size = nbytes
    return groups


def _offsets(chunks: tuple) -> list[int]:
    """Start of every chunk along one axis."""
    return [0, *itertools.accumulate(int(c) for c in chunks)][:-1]


def build_graph(v: Any, fold: DepthFold) -> DepthGraph:
    """The chunk, combine and tile tasks of *fold* over the depth-first dask stack *v*."""
    (v,) = dask.optimize(v)
    name = f"stackdepth-projection-{uuid.uuid4().hex}"
    leaf, merge = f"{name}-fold", f"{name}-merge"
    lateral = [max(int(c) for c in chunks) for chunks in v.chunks[1:]]
    pixels = int(np.prod(lateral, dtype=np.int64))
    state_bytes = pixels * sum(s.nbytes for s in fold.start((1, 1)))
    groups = _groups(v.chunks[0], pixels * max(v.dtype.itemsize, fold.dtype.itemsize), state_bytes)
    z_starts = _offsets(v.chunks[0])
    starts = [_offsets(chunks) for chunks in v.chunks[1:]]
    dsk: dict = {}
    leaves, tiles = [], []
    for tile in itertools.product(*(range(len(c)) for c in v.chunks[1:])):
        keys = []
        for g, members in enumerate(groups):
            key = (leaf, g, *tile)
            dsk[key] = (fold_blocks, fold, tuple(z_starts[i] for i in members),
                        *((v.name, i, *tile) for i in members))
            keys.append(key)
        leaves.extend(keys)
        level = 0
        while len(keys) > 1:
            level += 1
            parts = [keys[j:j + SPLIT_EVERY] for j in range(0, len(keys), SPLIT_EVERY)]
            keys = [(merge, level, j, *tile) for j in range(len(parts))]
            dsk.update({key: (fold.merge, part) for key, part in zip(keys, parts)})
        slots = tuple(slice(s[t], s[t] + int(c[t])) for s, c, t in zip(starts, v.chunks[1:], tile))
        tiles.append((keys[0], slots))
    graph = HighLevelGraph.from_collections(name, dsk, dependencies=[v])
    return DepthGraph(graph=graph, name=name, leaves=leaves, tiles=tiles)


class _LeafCounter(Callback):
    """Reports ``progress(done, total)`` as the chunk tasks of one graph finish."""

    def __init__(self, leaf: str, total: int, progress: Progress) -> None:
        super().__init__()
        self.leaf, self.total, self.progress, self.done = leaf, total, progress, 0

    def _posttask(self, key: Any, result: Any, dsk: Any, state: Any, worker_id: Any) -> None:
        if isinstance(key, tuple) and key and key[0] == self.leaf:
            self.done += 1
            report_progress(self.progress, self.done, self.total)


def _active_client() -> Any:
    """The ``dask.distributed`` client dask would compute on now, or None."""
    try:
        scheduler = dask.base.get_scheduler()
    except (RuntimeError, ValueError):
        return None
    owner = getattr(scheduler, "__self__", scheduler)
    if type(owner).__module__.startswith("distributed") and hasattr(owner, "compute"):
        return owner
    return None


def compute_graph(graph: DepthGraph, progress: Progress = None) -> list:
    """Compute every tile's final state (in the order of ``graph.tiles``) in one go.

    Raises whatever a task raised, or :class:`Cancelled` from *progress*,
    after the computation has been stopped.
    """
    finals = [Delayed(key, graph.graph, layer=graph.name) for key, _ in graph.tiles]
    total = len(graph.leaves)
    report_progress(progress, 0, total)
    if progress is None:
        return list(dask.compute(*finals))
    client = _active_client()
    if client is not None:
        return _compute_on_client(client, graph, finals, progress)
    counter = _LeafCounter(f"{graph.name}-fold", total, progress)
    with counter:
        states = list(dask.compute(*finals))
    if counter.done < total:  # a scheduler that does not run callbacks
        report_progress(progress, total, total)
    return states


def _compute_on_client(client: Any, graph: DepthGraph, finals: list, progress: Progress) -> list:
    """:func:`compute_graph` on a ``dask.distributed`` client, counting chunk tasks as they finish."""
    from distributed import as_completed

    leaves = [Delayed(key, graph.graph, layer=graph.name) for key in graph.leaves]
    futures = client.compute(finals + leaves)
    tile_futures = futures[:len(finals)]
    pending = as_completed(futures[len(finals):])
    del futures, leaves  # a finished partial is freed once its combine has read it
    try:
        for done, _ in enumerate(pending, 1):
            report_progress(progress, done, len(graph.leaves))
        return client.gather(tile_futures)
    except BaseException:
        pending.clear()
        client.cancel(tile_futures)
        raise


def assemble(v: Any, tiles: list, states: list) -> tuple:
    """The state of the whole image from the final states of its lateral tiles.

    State arrays are laid out (leading axes, [extra axes,] rows, cols); one
    tile is returned as it is.
    """
    if len(states) == 1:  # results a scheduler deserialised from bytes may be read-only
        return tuple(s if s.flags.writeable else s.copy() for s in states[0])
    n_lead = v.ndim - 3
    full = [np.empty(v.shape[1:-2] + s.shape[n_lead:-2] + v.shape[-2:], s.dtype)
            for s in states[0]]
    for k, (_, slots) in enumerate(tiles):
        for whole, part in zip(full, states[k]):
            extra = (slice(None),) * (whole.ndim - n_lead - 2)
            whole[slots[:n_lead] + extra + slots[n_lead:]] = part
        states[k] = None  # free each tile once placed
    return tuple(full)
