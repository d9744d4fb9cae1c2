"""Write OME-Zarr (NGFF 0.4 or 0.5) multiscale images, streaming, and convert TIFF to it.

The pixels are written batch by batch (a row of chunks along x at a time), so
memory stays near one batch (:data:`BATCH_BYTES`) whatever the image size: a
dask input is computed one batch at a time, and each pyramid level is computed
from the level before it as written on disk. The NGFF metadata (axes with
units, datasets with scale and translation, omero channels) is written by the
``ome-zarr`` library; stackdepth's own key/value metadata goes in the root
attribute ``"stackdepth"``.

Everything is written into a temporary folder beside the target that is
renamed into place at the end, so an error or a cancel leaves no target.
"""

from __future__ import annotations

import contextlib
import os
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator

import numpy as np

from .._shared.jsonio import to_jsonable
from .._shared.progress import Progress, report_progress
from .._shared.stack import Stack
from .._shared.validation import check_choice, check_int, check_number, check_stack, fail, is_dask
from ._zarrstore import ChunkReader, atomic_folder, block_mean
from .omezarr import ATTRIBUTE

__all__ = ["write_ome_zarr", "convert_to_ome_zarr", "default_chunks", "BATCH_BYTES"]

#: Bytes of source pixels read per batch (a batch is a run of chunks along x).
BATCH_BYTES = 32 * 2**20
#: Aim of the default chunk size (1-4 MiB is common practice for OME-Zarr).
CHUNK_BYTES = 2 * 2**20
#: An automatic pyramid stops before a level whose y or x side would drop below this.
MIN_SIDE = 16
#: NGFF order of axes (time, channel, then space).
_ORDER = "TCZYX"
#: Default channel colours, as hex for the omero metadata (same order as the napari reader).
CHANNEL_HEX = ("00FF00", "FF00FF", "00FFFF", "FFFF00", "FFFFFF")


def write_ome_zarr(
    path: str | os.PathLike[str],
    data: Any,
    *,
    axes: str,
    scale: tuple[float, ...],
    channel_names: list[str] | None = None,
    metadata: dict[str, Any] | None = None,
    chunks: tuple[int, ...] | None = None,
    overwrite: bool = False,
    version: str = "0.4",
    levels: int | None = None,
    progress: Progress = None,
    translate: tuple[float, ...] | None = None,
) -> Path:
    """Write an image as a chunked multiscale OME-Zarr folder, streaming and atomically.

    Parameters
    ----------
    path : str or path-like
        Target folder (``.ome.zarr``).
    data : ndarray, dask array or array-like
        Pixels (integer, float or bool). A dask array is computed one batch of
        chunks at a time, never whole; a numpy memory map is read the same way.
    axes : str
        One letter per axis from "TCZYX", with Y and X. Axes are stored in NGFF
        order (T, C, Z, Y, X) whatever the order given.
    scale : tuple of float
        Step per axis: µm for Z/Y/X, s for T (1 for C). Positive.
    channel_names : list of str, optional
        One per channel of a C axis (default "channel i"); stored as omero labels.
    metadata : dict, optional
        JSON-able key/value data (e.g. ``truth``, ``provenance``), stored under
        ``attributes["stackdepth"]["metadata"]``. The key ``"ome_zarr"`` (what
        the reader reports about a file) is not stored.
    chunks : tuple of int, optional
        Chunk shape: one entry per axis of *axes*, or one per spatial axis
        (Z, Y, X) with 1 for T and C. Default :func:`default_chunks` (about 2 MiB,
        e.g. (16, 256, 256) for uint16 ZYX).
    overwrite : bool
        Replace an existing *path* (the old folder is deleted only after the
        new one is in place). Without it an existing path raises.
    version : {"0.4", "0.5"}
        NGFF version: 0.4 is Zarr format 2, 0.5 is Zarr format 3.
    levels : int, optional
        Number of resolution levels (1: no pyramid). Default: halve y and x
        (and z while its step stays below the new y step and z spans more than
        one chunk) until a level fits in one chunk in y and x, or its smaller
        side would drop below 16 pixels.
    progress : callable, optional
        ``progress(done, total)`` in chunks, after each batch; may raise
        :class:`~viewer_plugin._shared.progress.Cancelled`, which stops the
        write and leaves no target.
    translate : tuple of float, optional
        Position of the first voxel per axis, in the units of *scale* (default
        zero); stored as the NGFF translation of the full-resolution level.

    Returns
    -------
    Path
        The written folder. Level *k* is the dataset ``"k"``; its dtype is the
        input's. Coarser levels are block means (rounded to nearest for
        integers); their NGFF scale is the level-0 step times the cumulative
        factor, their translation *translate* plus (factor - 1) / 2 level-0
        steps (pixel centres).

    Raises
    ------
    ParameterError
        When *data*, *axes*, *scale*, *channel_names*, *chunks*, *version* or
        *levels* do not fit.
    FileExistsError
        When *path* exists and *overwrite* is False.
    FileNotFoundError
        When the folder that should contain *path* does not exist.

    References
    ----------
    .. [1] OME-NGFF specification 0.4 and 0.5, "multiscales" metadata,
       https://ngff.openmicroscopy.org

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp()) / "b.ome.zarr"
    >>> stack = np.zeros((2, 8, 600, 500), np.uint16)
    >>> _ = write_ome_zarr(folder, stack, axes="CZYX", scale=(1, 2.0, 0.4, 0.4),
    ...                    channel_names=["GFP", "RFP"])
    >>> from viewer_plugin.io import read_ome_zarr_levels
    >>> [s.data.shape for s in read_ome_zarr_levels(folder)]
    [(2, 8, 600, 500), (2, 8, 300, 250), (2, 8, 150, 125)]
    """
    path = Path(path)
    plan = _plan(data, axes, scale, channel_names, chunks, version, levels, translate)
    if (path.exists() or path.is_symlink()) and not overwrite:
        raise FileExistsError(f"{path} exists; choose another name or allow overwriting")
    if not path.parent.is_dir():
        raise FileNotFoundError(f"{path.parent}: folder does not exist")
    with atomic_folder(path, overwrite=overwrite) as tmp:
        window = _write_levels(tmp, plan, progress)
        _write_metadata(tmp, plan, metadata, path.name.split(".")[0] or "image", window)
    return path


def default_chunks(shape: tuple[int, ...], axes: str, dtype: Any) -> tuple[int, ...]:
    """A chunk shape of about 2 MiB: 1 along T and C, up to 256 along Y and X, Z filling the rest.

    Examples
    --------
    >>> default_chunks((300, 2048, 2048), "ZYX", np.uint16)
    (16, 256, 256)
    >>> default_chunks((3, 40, 100, 120), "CZYX", np.uint8)
    (1, 40, 100, 120)
    """
    sizes = dict(zip(axes.upper(), shape))
    plane = min(256, sizes["Y"]) * min(256, sizes["X"]) * np.dtype(dtype).itemsize
    depth = max(1, min(sizes.get("Z", 1), CHUNK_BYTES // plane))
    pick = {"T": 1, "C": 1, "Z": depth, "Y": min(256, sizes["Y"]), "X": min(256, sizes["X"])}
    return tuple(pick[a] for a in axes.upper())


# --------------------------------------------------------------------------- planning


@dataclass
class _Plan:
    """A checked write: data in NGFF axis order and the pyramid to make of it."""

    data: Any
    axes: str
    scale: tuple[float, ...]
    names: list[str]
    chunks: tuple[int, ...]
    shapes: list[tuple[int, ...]]
    factors: list[tuple[int, ...]]
    version: str
    translate: tuple[float, ...]


def _plan(data: Any, axes: str, scale: Any, channel_names: Any, chunks: Any, version: Any,
          levels: Any, translate: Any) -> _Plan:
    data, _ = check_stack(data, name="data", min_ndim=2)
    axes = str(axes).upper() if isinstance(axes, str) else axes
    if (not isinstance(axes, str) or len(axes) != data.ndim or len(set(axes)) != len(axes)
            or any(a not in _ORDER for a in axes) or "Y" not in axes or "X" not in axes):
        fail("axes", f"{data.ndim} distinct letters from 'TCZYX' including Y and X", axes,
             hint="RGB samples (S) go on a C axis")
    if not hasattr(scale, "__len__") or len(scale) != data.ndim:
        fail("scale", f"{data.ndim} steps, one per axis", scale)
    steps = [check_number(s, name=f"scale[{i}]", low=0, low_open=True) for i, s in enumerate(scale)]
    translate = (0.0,) * data.ndim if translate is None else translate
    if not hasattr(translate, "__len__") or len(translate) != data.ndim:
        fail("translate", f"{data.ndim} positions, one per axis", translate)
    shift = [check_number(t, name=f"translate[{i}]") for i, t in enumerate(translate)]
    version = check_choice(version, name="version", choices=("0.4", "0.5"))
    names = _names(channel_names, axes, data.shape)
    order = sorted(range(data.ndim), key=lambda i: _ORDER.index(axes[i]))
    if order != list(range(data.ndim)):
        data = data.transpose(order)
    axes = "".join(axes[i] for i in order)
    steps = tuple(steps[i] for i in order)
    shift = tuple(shift[i] for i in order)
    chunks = _chunks(chunks, axes, tuple(data.shape), data.dtype, order)
    if levels is not None:
        levels = check_int(levels, name="levels", low=1)
    shapes, factors = _pyramid(tuple(data.shape), axes, steps, chunks, levels)
    return _Plan(data, axes, steps, names, chunks, shapes, factors, version, shift)


def _names(channel_names: Any, axes: str, shape: tuple[int, ...]) -> list[str]:
    if "C" not in axes:
        if channel_names:
            fail("channel_names", "no names (the data has no C axis)", channel_names)
        return []
    n = shape[axes.index("C")]
    names = [f"channel {i}" for i in range(n)] if channel_names is None else list(channel_names)
    if len(names) != n or not all(isinstance(x, str) for x in names):
        fail("channel_names", f"{n} names (one per channel)", channel_names)
    return names


def _chunks(chunks: Any, axes: str, shape: tuple[int, ...], dtype: Any,
            order: list[int]) -> tuple[int, ...]:
    if chunks is None:
        return default_chunks(shape, axes, dtype)
    spatial = [a for a in axes if a in "ZYX"]
    if not hasattr(chunks, "__len__") or len(chunks) not in (len(axes), len(spatial)):
        fail("chunks", f"{len(spatial)} sizes ({', '.join(spatial)}) or {len(axes)} (one per axis)",
             chunks)
    sizes = [check_int(c, name=f"chunks[{i}]", low=1) for i, c in enumerate(chunks)]
    if len(sizes) == len(axes):
        sizes = [sizes[i] for i in order]
    else:
        given = dict(zip(spatial, sizes))
        sizes = [given.get(a, 1) for a in axes]
    return tuple(min(c, n) for c, n in zip(sizes, shape))


def _pyramid(shape: tuple[int, ...], axes: str, steps: tuple[float, ...], chunks: tuple[int, ...],
             levels: int | None) -> tuple[list[tuple[int, ...]], list[tuple[int, ...]]]:
    """Shapes of the levels and the factor of each level relative to the one before."""
    y, x, z = axes.index("Y"), axes.index("X"), axes.find("Z")
    shapes, factors, steps = [shape], [(1,) * len(shape)], list(steps)
    while levels is None or len(shapes) < levels:
        cur = shapes[-1]
        if levels is None and cur[y] <= chunks[y] and cur[x] <= chunks[x]:
            break
        if cur[y] == 1 and cur[x] == 1:
            fail("levels", f"at most {len(shapes)} levels for {shape[y]} x {shape[x]} pixels", levels)
        f = [1] * len(shape)
        f[y], f[x] = (2 if cur[y] > 1 else 1), (2 if cur[x] > 1 else 1)
        if z >= 0 and cur[z] > chunks[z] and steps[z] < steps[y] * f[y]:
            f[z] = 2
        nxt = tuple(-(-n // k) for n, k in zip(cur, f))
        if levels is None and min(nxt[y], nxt[x]) < MIN_SIDE:
            break
        shapes.append(nxt)
        factors.append(tuple(f))
        steps = [s * k for s, k in zip(steps, f)]
    return shapes, factors


# --------------------------------------------------------------------------- pixels


def _write_levels(folder: Path, plan: _Plan, progress: Progress) -> list[tuple[float, float]]:
    """Write every level, batch by batch; return (min, max) per channel of the coarsest level."""
    import zarr

    group = zarr.open_group(store=str(folder), mode="w",
                            zarr_format=2 if plan.version == "0.4" else 3)
    dtype = np.dtype(plan.data.dtype).newbyteorder("=")
    total = sum(_count(shape, _clip(plan.chunks, shape)) for shape in plan.shapes)
    done, window = 0, _Window(plan.axes)
    report_progress(progress, done, total)
    previous = None
    for k, (shape, factors) in enumerate(zip(plan.shapes, plan.factors)):
        chunks = _clip(plan.chunks, shape)
        target = group.create_array(name=str(k), shape=shape, chunks=chunks, dtype=dtype,
                                    fill_value=0, config={"write_empty_chunks": True},
                                    **_layout(plan))
        if previous is None:
            read = _source(plan.data, dtype)
        else:
            read = _downsampler(ChunkReader(previous, folder / str(k - 1), strict=True), factors,
                                dtype)
        source_bytes = int(np.prod(chunks)) * dtype.itemsize * int(np.prod(factors))
        for region, n in _batches(shape, chunks, max(1, BATCH_BYTES // source_bytes)):
            block = read(region)
            target[region] = block
            if k == len(plan.shapes) - 1:
                window.add(region, block)
            done += n
            report_progress(progress, done, total)
        previous = target
    return window.limits()


def _layout(plan: _Plan) -> dict[str, Any]:
    """Zarr options: NGFF 0.4 uses "/" between chunk indices; 0.5 names the dimensions."""
    if plan.version == "0.4":
        return {"chunk_key_encoding": {"name": "v2", "separator": "/"}}
    return {"dimension_names": [a.lower() for a in plan.axes]}


def _clip(chunks: tuple[int, ...], shape: tuple[int, ...]) -> tuple[int, ...]:
    return tuple(min(c, n) for c, n in zip(chunks, shape))


def _count(shape: tuple[int, ...], chunks: tuple[int, ...]) -> int:
    return int(np.prod([-(-n // c) for n, c in zip(shape, chunks)]))


def _batches(shape: tuple[int, ...], chunks: tuple[int, ...],
             per_batch: int) -> Iterator[tuple[tuple[slice, ...], int]]:
    """Regions of up to *per_batch* chunks, in C order, with their chunk count.

    A batch is a run of chunks along the last axis or, when a whole row fits,
    several whole rows along the axis before it (so a batch covers whole TIFF
    strips more often).
    """
    grid = [-(-n // c) for n, c in zip(shape, chunks)]  # at least 2 axes (Y, X)
    across = min(per_batch, grid[-1])
    rows = max(1, per_batch // grid[-1])
    for lead in np.ndindex(*grid[:-2], -(-grid[-2] // rows)):
        head = tuple(slice(i * c, min((i + 1) * c, n)) for i, c, n in zip(lead, chunks, shape))
        first = lead[-1] * rows
        head = head[:-1] + (slice(first * chunks[-2], min((first + rows) * chunks[-2], shape[-2])),)
        height = min(rows, grid[-2] - first)
        for start in range(0, grid[-1], across):
            stop = min(start + across, grid[-1])
            last = slice(start * chunks[-1], min(stop * chunks[-1], shape[-1]))
            yield head + (last,), (stop - start) * height


def _source(data: Any, dtype: np.dtype) -> Callable[[tuple[slice, ...]], np.ndarray]:
    """Reads one region after another in this process (the writer is sequential): with dask's
    threads, also under a dask.distributed client, whose workers could not open a TIFF read
    through a local file handle."""
    if is_dask(data):
        return lambda region: np.asarray(data[region].compute(scheduler="threads"), dtype=dtype)
    return lambda region: np.asarray(data[region], dtype=dtype)


def _downsampler(reader: ChunkReader, factors: tuple[int, ...],
                 dtype: np.dtype) -> Callable[[tuple[slice, ...]], np.ndarray]:
    def read(region: tuple[slice, ...]) -> np.ndarray:
        source = tuple(slice(s.start * f, min(s.stop * f, n))
                       for s, f, n in zip(region, factors, reader.shape))
        return block_mean(reader[source], factors, dtype)

    return read


class _Window:
    """Running (min, max) per channel, for the omero display window."""

    def __init__(self, axes: str) -> None:
        self.channel = axes.find("C")
        self.low: dict[int, float] = {}
        self.high: dict[int, float] = {}

    def add(self, region: tuple[slice, ...], block: np.ndarray) -> None:
        if self.channel < 0:
            return
        first = region[self.channel].start
        for i in range(block.shape[self.channel]):
            plane = np.take(block, i, axis=self.channel)
            lo, hi = float(plane.min()), float(plane.max())
            self.low[first + i] = min(lo, self.low.get(first + i, lo))
            self.high[first + i] = max(hi, self.high.get(first + i, hi))

    def limits(self) -> list[tuple[float, float]]:
        return [(self.low[c], self.high[c]) for c in sorted(self.low)]


# --------------------------------------------------------------------------- metadata


def _write_metadata(folder: Path, plan: _Plan, metadata: dict[str, Any] | None, name: str,
                    window: list[tuple[float, float]]) -> None:
    import zarr
    from ome_zarr.format import FormatV04, FormatV05

    with warnings.catch_warnings():  # ome_zarr.writer deprecates a class at import time
        warnings.simplefilter("ignore", DeprecationWarning)
        from ome_zarr.writer import write_multiscales_metadata

    from .. import __version__

    group = zarr.open_group(store=str(folder), mode="r+")
    fmt = FormatV04() if plan.version == "0.4" else FormatV05()
    extra: dict[str, Any] = {
        "description": "each level is the mean of 2 x 2 (y, x) or 2 x 2 x 2 (z, y, x) pixel "
                       "blocks of the level before, rounded to the input type",
        "method": "block mean", "version": f"stackdepth {__version__}"}
    if "C" in plan.axes:
        extra["omero"] = _omero(plan, window)
    write_multiscales_metadata(group, _datasets(plan), fmt=fmt, axes=_axes(plan.axes), name=name,
                               metadata=extra)
    ours = {k: v for k, v in (metadata or {}).items() if k != "ome_zarr"}
    group.attrs[ATTRIBUTE] = {"metadata": to_jsonable(ours), "every_chunk_written": True}


def _axes(axes: str) -> list[dict[str, str]]:
    kinds = {"T": ("time", "second"), "C": ("channel", None)}
    out = []
    for a in axes:
        kind, unit = kinds.get(a, ("space", "micrometer"))
        out.append({"name": a.lower(), "type": kind, **({"unit": unit} if unit else {})})
    return out


def _datasets(plan: _Plan) -> list[dict[str, Any]]:
    out, total = [], np.ones(len(plan.axes), dtype=np.int64)
    for k, factors in enumerate(plan.factors):
        total = total * np.asarray(factors)
        scale = [float(s * t) for s, t in zip(plan.scale, total)]
        shift = [float(o + (t - 1) / 2 * s) for s, t, o in zip(plan.scale, total, plan.translate)]
        out.append({"path": str(k), "coordinateTransformations": [
            {"type": "scale", "scale": scale}, {"type": "translation", "translation": shift}]})
    return out


def _omero(plan: _Plan, window: list[tuple[float, float]]) -> dict[str, Any]:
    dtype = np.dtype(plan.data.dtype)
    channels = []
    for c, label in enumerate(plan.names):
        low, high = window[c] if c < len(window) else (0.0, 1.0)
        if dtype.kind in "ui":
            full = (float(np.iinfo(dtype).min), float(np.iinfo(dtype).max))
        else:
            full = (min(low, 0.0), max(high, 1.0))
        channels.append({"label": label, "color": CHANNEL_HEX[c % len(CHANNEL_HEX)],
                         "active": True,
                         "window": {"min": full[0], "max": full[1], "start": low,
                                    "end": high if high > low else low + 1.0}})
    return {"channels": channels, "rdefs": {"model": "color"}}


# --------------------------------------------------------------------------- conversion


def convert_to_ome_zarr(
    src: str | os.PathLike[str],
    dst: str | os.PathLike[str],
    *,
    chunks: tuple[int, ...] | None = None,
    overwrite: bool = False,
    version: str = "0.4",
    progress: Progress = None,
) -> Path:
    """Convert an OME-TIFF or TIFF file to a multiscale OME-Zarr folder, in bounded memory.

    The TIFF is read lazily (a memory map when its pixels are stored
    uncompressed in one piece, else tifffile's Zarr view of its strips or
    tiles), batch by batch; memory stays near :data:`BATCH_BYTES` plus the TIFF
    strips a batch touches. Axes, voxel size, channel names and stackdepth's
    metadata are kept; RGB samples become a C axis.

    Parameters
    ----------
    src : str or path-like
        The TIFF file.
    dst : str or path-like
        The OME-Zarr folder to write.
    chunks : tuple of int, optional
        (Z, Y, X) chunk sizes (or one per axis); default :func:`default_chunks`.
    overwrite : bool
        Replace an existing *dst*.
    version : {"0.4", "0.5"}
        NGFF version.
    progress : callable, optional
        ``progress(done, total)`` in chunks; may raise ``Cancelled``.

    Returns
    -------
    Path
        The written folder.

    Raises
    ------
    StackReadError
        When *src* cannot be read.
    FileExistsError
        When *dst* exists and *overwrite* is False.
    ParameterError
        When *chunks* or *version* do not fit.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from viewer_plugin.io import write_ome_tiff, read_stack
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> tif = write_ome_tiff(folder / "c.ome.tif", np.ones((4, 32, 32), np.uint8),
    ...                      axes="ZYX", scale=(3.0, 0.5, 0.5))
    >>> out = convert_to_ome_zarr(tif, folder / "c.ome.zarr", chunks=(2, 16, 16))
    >>> read_stack(out).scale
    (3.0, 0.5, 0.5)
    """
    from .ometiff import read_stack

    src, dst = Path(src), Path(dst)
    if (dst.exists() or dst.is_symlink()) and not overwrite:
        raise FileExistsError(f"{dst} exists; choose another name or allow overwriting")
    stack = read_stack(src, lazy=True)  # metadata; its page-per-chunk pixels are not used
    with _tiff_pixels(src) as pixels:
        stack = _samples_as_channels(Stack(pixels, stack.axes, stack.scale, stack.channel_names,
                                           stack.metadata, src, translate=stack.translate))
        return write_ome_zarr(dst, stack.data, axes=stack.axes, scale=stack.scale,
                              channel_names=stack.channel_names or None, metadata=stack.metadata,
                              chunks=chunks, overwrite=overwrite, version=version,
                              progress=progress, translate=stack.translate)


@contextlib.contextmanager
def _tiff_pixels(path: Path) -> Iterator[Any]:
    """The first series of a TIFF as a memory map or a dask array over tifffile's Zarr store."""
    import tifffile

    try:
        pixels = tifffile.memmap(path, series=0, mode="r")
    except ValueError:
        pixels = None  # compressed, or not stored in one piece
    if pixels is not None:
        yield pixels
        return
    import dask.array as da
    import zarr

    with tifffile.TiffFile(path) as tif:
        store = tif.series[0].aszarr()
        try:
            yield da.from_zarr(zarr.open_array(store=store, mode="r"))
        finally:
            store.close()


def _samples_as_channels(stack: Stack) -> Stack:
    if "S" not in stack.axes:
        return stack
    if "C" in stack.axes:
        fail("src", "an image with channels or RGB samples, not both", stack.axes)
    n = stack.data.shape[stack.axes.index("S")]
    names = ["red", "green", "blue", "alpha"][:n] if n in (3, 4) else [f"channel {i}" for i in range(n)]
    return Stack(stack.data, stack.axes.replace("S", "C"), stack.scale, names, stack.metadata,
                 stack.path, translate=stack.translate)
