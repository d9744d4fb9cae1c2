"""Chunk-level access to Zarr arrays for the OME-Zarr reader and writer.

* :class:`ChunkReader` reads regions of a Zarr array and turns every failure
  (a missing, truncated or undecodable chunk file) into :class:`StackReadError`
  naming the chunk file; dask arrays are built on it so that the error surfaces
  with our type and message when the chunk is computed.
* :func:`atomic_folder` writes a folder under a temporary name beside the
  target and renames it into place.
* :func:`block_mean` is the 2x downsampling of the pyramid.
"""

from __future__ import annotations

import contextlib
import itertools
import logging
import os
import shutil
import tempfile
import uuid
from pathlib import Path
from typing import Any, Iterator

import numpy as np

from .._shared.atomic import _UMASK
from ._errors import StackReadError

logger = logging.getLogger(__name__)

__all__ = ["ChunkReader", "atomic_folder", "block_mean", "chunk_grid"]


def chunk_grid(array: Any) -> tuple[int, ...]:
    """Shape of the unit stored in one file: the shard when the array is sharded, else the chunk."""
    shards = getattr(array, "shards", None)
    return tuple(int(n) for n in (shards or array.chunks))


class ChunkReader:
    """Region reads from a Zarr array whose errors name the chunk file.

    Parameters
    ----------
    array : zarr.Array
        An array of a local store.
    folder : Path
        The array's folder (chunk keys are relative to it).
    strict : bool
        Treat an absent chunk file as an error. The Zarr specification reads an
        absent chunk as the fill value (writers may skip chunks that hold only
        the fill value), so this is only set for arrays known to have every
        chunk written.
    """

    def __init__(self, array: Any, folder: Path, *, strict: bool) -> None:
        self.array = array
        self.folder = Path(folder)
        self.strict = strict
        self.shape = tuple(int(n) for n in array.shape)
        self.dtype = np.dtype(array.dtype)
        self.ndim = len(self.shape)
        self.grid = chunk_grid(array)
        self._warned = False

    def __getitem__(self, key: Any) -> np.ndarray:
        slices = _as_slices(key, self.shape)
        if any(s.stop <= s.start for s in slices):
            return np.empty(tuple(max(0, s.stop - s.start) for s in slices), self.dtype)
        coords = self._chunks_of(slices)
        self._check_present(coords)
        try:
            return np.asarray(self.array[slices])
        except Exception as exc:  # noqa: BLE001 - any decoding failure is a broken chunk
            raise StackReadError(f"{self._culprit(coords)}: chunk missing or unreadable "
                                 f"({type(exc).__name__}: {exc})") from exc

    def chunk_path(self, coords: tuple[int, ...]) -> Path:
        """The file holding the chunk (or shard) at grid position *coords*."""
        return self.folder / self.array.metadata.encode_chunk_key(tuple(coords))

    def _chunks_of(self, slices: tuple[slice, ...]) -> list[tuple[int, ...]]:
        ranges = [range(s.start // g, (s.stop - 1) // g + 1) for s, g in zip(slices, self.grid)]
        return list(itertools.product(*ranges))

    def _check_present(self, coords: list[tuple[int, ...]]) -> None:
        for c in coords:
            path = self.chunk_path(c)
            if path.exists():
                continue
            if self.strict:
                raise StackReadError(f"{path}: chunk missing or unreadable (no such file; the "
                                     "folder was written with every chunk, so it is incomplete)")
            if not self._warned:
                self._warned = True
                logger.warning("%s: chunk file absent; read as the fill value %r, as the Zarr "
                               "specification says (further absent chunks of this array are "
                               "not reported)", path, self.array.fill_value)

    def _culprit(self, coords: list[tuple[int, ...]]) -> Path:
        """The first chunk of *coords* that fails on its own (else the first one)."""
        if len(coords) > 1:
            for c in coords:
                region = tuple(slice(i * g, min((i + 1) * g, n))
                               for i, g, n in zip(c, self.grid, self.shape))
                try:
                    self.array[region]
                except Exception:  # noqa: BLE001
                    return self.chunk_path(c)
        return self.chunk_path(coords[0])


def _as_slices(key: Any, shape: tuple[int, ...]) -> tuple[slice, ...]:
    key = key if isinstance(key, tuple) else (key,)
    key = key + (slice(None),) * (len(shape) - len(key))
    out = []
    for k, n in zip(key, shape):
        if not isinstance(k, slice):
            raise TypeError(f"ChunkReader takes slices, got {k!r}")
        start, stop, step = k.indices(n)
        if step != 1:
            raise TypeError("ChunkReader takes slices with step 1")
        out.append(slice(start, max(start, stop)))
    return tuple(out)


def block_mean(block: np.ndarray, factors: tuple[int, ...], dtype: Any) -> np.ndarray:
    """Mean over blocks of *factors* pixels, cast to *dtype* (integers rounded to nearest).

    An axis whose length is not a multiple of its factor is padded by repeating
    its last pixel, so the last output pixel is the mean of what is there.

    Examples
    --------
    >>> block_mean(np.array([[0, 2, 4], [2, 4, 7]], np.uint8), (2, 2), np.uint8)
    array([[2, 6]], dtype=uint8)
    """
    pad = [(0, (-n) % f) for n, f in zip(block.shape, factors)]
    if any(p for _, p in pad):
        block = np.pad(block, pad, mode="edge")
    shape = [n for size, f in zip(block.shape, factors) for n in (size // f, f)]
    mean = block.reshape(shape).mean(axis=tuple(range(1, 2 * block.ndim, 2)), dtype=np.float64)
    dtype = np.dtype(dtype)
    if dtype.kind == "b":
        return mean >= 0.5
    if dtype.kind in "ui":
        info = np.iinfo(dtype)
        return np.clip(np.rint(mean, out=mean), info.min, info.max, out=mean).astype(dtype)
    return mean.astype(dtype)


@contextlib.contextmanager
def atomic_folder(path: Path, *, overwrite: bool) -> Iterator[Path]:
    """Yield a temporary folder beside *path*; on success rename it to *path*.

    On any error (or :class:`~viewer_plugin._shared.progress.Cancelled`) the
    temporary folder is removed and *path* is untouched. With *overwrite*, an
    existing *path* is renamed aside, the new folder renamed in, then the old
    one deleted; if the second rename fails the old one is put back.
    """
    tmp = Path(tempfile.mkdtemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent))
    try:
        yield tmp
        os.chmod(tmp, 0o777 & ~_UMASK)
        _swap_in(tmp, path, overwrite=overwrite)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def _swap_in(tmp: Path, path: Path, *, overwrite: bool) -> None:
    if not (path.exists() or path.is_symlink()):
        os.rename(tmp, path)
        return
    if not overwrite:
        raise FileExistsError(f"{path} exists; choose another name or allow overwriting")
    aside = path.with_name(f".{path.name}.old-{uuid.uuid4().hex[:8]}")
    os.rename(path, aside)
    try:
        os.rename(tmp, path)
    except BaseException:
        os.rename(aside, path)
        raise
    try:
        if aside.is_dir() and not aside.is_symlink():
            shutil.rmtree(aside)
        else:
            aside.unlink()
    except OSError as exc:
        logger.warning("%s: the replaced data could not be deleted (%s); remove it by hand",
                       aside, exc)
