"""Read OME-Zarr (NGFF 0.4 on Zarr format 2, NGFF 0.5 on Zarr format 3) lazily.

The NGFF metadata (axes, units, datasets and their coordinate
transformations, omero channel labels) is parsed by the ``ome-zarr`` library;
the pixels are dask arrays over :class:`~._zarrstore.ChunkReader`, so nothing is
read until a chunk is computed, and a broken chunk raises
:class:`StackReadError` naming the chunk file.

Steps come back in µm (space) and s (time). Odd metadata (a missing or unknown
unit, a zero or negative scale) falls back with a logged warning naming the
value, as the TIFF reader does; structural faults (no such folder, not a Zarr
group, no multiscales, unsupported axes) raise :class:`StackReadError`.
"""

from __future__ import annotations

import json
import logging
import math
import os
import uuid
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .._shared.stack import Stack
from .._shared.validation import check_int, fail
from ._errors import StackReadError
from ._units import length_in_um, time_in_s
from ._zarrstore import ChunkReader

logger = logging.getLogger(__name__)

__all__ = ["is_ome_zarr", "read_ome_zarr", "read_ome_zarr_levels", "ATTRIBUTE"]

#: Root attribute holding stackdepth's own data: ``{"metadata": {...}, "every_chunk_written": true}``.
ATTRIBUTE = "stackdepth"


def is_ome_zarr(path: str | os.PathLike[str]) -> bool:
    """True when *path* is a folder whose Zarr group attributes hold NGFF ``multiscales``.

    A quick check for the napari reader hook: it reads one small JSON file and
    imports nothing.
    """
    folder = Path(path)
    for name, key in (("zarr.json", "attributes"), (".zattrs", None)):
        try:
            document = json.loads((folder / name).read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        attrs = document.get(key, {}) if key else document
        if isinstance(attrs, dict) and isinstance(attrs.get("ome"), dict):
            attrs = attrs["ome"]
        if isinstance(attrs, dict) and "multiscales" in attrs:
            return True
    return False


def read_ome_zarr(path: str | os.PathLike[str], *, level: int = 0) -> Stack:
    """Open one resolution level of an OME-Zarr image as a lazy :class:`Stack`.

    Parameters
    ----------
    path : str or path-like
        The image folder (``.ome.zarr``; or ``.zarr`` with NGFF metadata).
    level : int
        Resolution level: 0 (default) is full resolution.

    Returns
    -------
    Stack
        ``data`` is a dask array in the file's dtype (nothing is read yet);
        ``axes`` a subset of "TCZYX"; ``scale`` in µm (and s for T);
        ``channel_names`` from the omero channel labels (else "channel i");
        ``translate`` the NGFF translation in µm (and s); ``metadata``
        stackdepth's stored key/value data plus ``"ome_zarr"``: NGFF version,
        ``level``, ``levels``, ``chunks``, ``shapes`` of all levels and the
        file's ``units`` (and ``"unusable_voxel_size"`` when a scale is not
        positive, as the TIFF reader reports it).

    Raises
    ------
    StackReadError
        When the folder is missing or not an OME-Zarr image; later, when a
        chunk is computed that is missing (in folders written by stackdepth)
        or unreadable.
    ParameterError
        When *level* is not a level of the image.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from viewer_plugin.io import write_ome_zarr
    >>> folder = pathlib.Path(tempfile.mkdtemp()) / "a.ome.zarr"
    >>> _ = write_ome_zarr(folder, np.zeros((4, 8, 8), np.uint16), axes="ZYX", scale=(2, .5, .5))
    >>> stack = read_ome_zarr(folder)
    >>> stack.axes, stack.scale, type(stack.data).__name__
    ('ZYX', (2.0, 0.5, 0.5), 'Array')
    """
    stacks = read_ome_zarr_levels(path)
    level = check_int(level, name="level")
    if not 0 <= level < len(stacks):
        fail("level", f"an integer from 0 to {len(stacks) - 1} (the image has {len(stacks)} levels)",
             level)
    return stacks[level]


def read_ome_zarr_levels(path: str | os.PathLike[str]) -> list[Stack]:
    """All resolution levels of an OME-Zarr image, full resolution first, coarsest last.

    Each level is a :class:`Stack` as returned by :func:`read_ome_zarr` (with
    its own ``scale``); the list of ``stack.data`` is what napari takes as
    multiscale image data. Nothing is read but metadata.

    Raises
    ------
    StackReadError
        When the folder is missing or not an OME-Zarr image.
    """
    image = _open(Path(path))
    return [_level(image, k) for k in range(len(image.arrays))]


@dataclass
class _Image:
    """What :func:`_open` learnt about an image folder."""

    path: Path
    version: str
    axes: str
    units: tuple[str | None, ...]
    datasets: list[str]
    arrays: list[Any]
    scales: list[tuple[float, ...]]
    translations: list[tuple[float, ...]]
    channel_names: list[str] = field(default_factory=list)
    metadata: dict[str, Any] = field(default_factory=dict)
    strict: bool = False


def _open(path: Path) -> _Image:
    if not path.exists():
        raise StackReadError(f"{path}: no such folder")
    if not path.is_dir():
        raise StackReadError(f"{path}: not a folder (an OME-Zarr image is a folder)")
    group, attrs = _group(path)
    node, spec = _ome_node(path, attrs)
    axes_meta = list(node.metadata.get("axes") or [])
    axes = _axis_letters(axes_meta, path)
    arrays = [_array(group, p, path, len(axes)) for p in spec.datasets]
    units = tuple(a.get("unit") for a in axes_meta)
    raw = _raw_transforms(node, spec, len(axes), path)
    factors = _unit_factors(axes_meta, axes, path)
    shapes = [tuple(a.shape) for a in arrays]
    scales, unusable = _steps([s for s, _ in raw], factors, shapes, axes_meta, path)
    translations = [tuple(float(t) * f if math.isfinite(t) else 0.0 for t, f in zip(tr, factors))
                    for _, tr in raw]
    ours = attrs.get(ATTRIBUTE) if isinstance(attrs.get(ATTRIBUTE), dict) else {}
    metadata = dict(ours.get("metadata") or {})
    if unusable:  # as the TIFF reader: a job refuses a step of 1 that only stands in for a bad value
        metadata["unusable_voxel_size"] = {axes[i]: value for i, value in unusable.items()}
    image = _Image(path, spec.zarr.version, axes, units, list(spec.datasets), arrays, scales,
                   translations, metadata=metadata, strict=bool(ours.get("every_chunk_written")))
    image.channel_names = _channel_names(node.metadata.get("channel_names"), axes, shapes[0], path)
    return image


def _group(path: Path) -> tuple[Any, dict[str, Any]]:
    import zarr

    try:
        group = zarr.open_group(store=str(path), mode="r")
    except Exception as exc:  # noqa: BLE001 - zarr raises several types for "not a group"
        raise StackReadError(f"{path}: not a Zarr group, so not OME-Zarr "
                             f"({type(exc).__name__}: {exc})") from exc
    attrs = group.attrs.asdict()
    ome = attrs.get("ome", attrs) if isinstance(attrs.get("ome"), dict) else attrs
    if "multiscales" not in ome:
        raise StackReadError(f"{path}: a Zarr group without NGFF 'multiscales' metadata, so not an "
                             "OME-Zarr image (a plate, a well or a collection: open one image folder)")
    return group, attrs


def _ome_node(path: Path, attrs: dict[str, Any]) -> tuple[Any, Any]:
    """The ome-zarr node and multiscales spec of the image (metadata parsed by ome-zarr)."""
    from ome_zarr.format import FormatV04, detect_format, format_from_version
    from ome_zarr.io import ZarrLocation
    from ome_zarr.reader import Multiscales, Node, Reader

    try:
        if isinstance(attrs.get("ome"), dict):  # NGFF 0.5 and later: version in the "ome" namespace
            fmt = format_from_version(str(attrs["ome"].get("version")))
        else:  # NGFF 0.4 and earlier: version in each multiscales entry
            fmt = detect_format(attrs, FormatV04())
        location = ZarrLocation(str(path), fmt=fmt)
        node = Node(location, Reader(location))
    except Exception as exc:  # noqa: BLE001 - ome-zarr raises ValueError/KeyError/... for bad metadata
        raise StackReadError(f"{path}: OME-Zarr metadata not valid ({type(exc).__name__}: {exc})") from exc
    spec = node.first(Multiscales)
    if spec is None or not spec.datasets:
        raise StackReadError(f"{path}: OME-Zarr metadata lists no datasets")
    return node, spec


def _array(group: Any, dataset: str, path: Path, ndim: int) -> Any:
    try:
        array = group[dataset]
    except Exception as exc:  # noqa: BLE001
        raise StackReadError(f"{path / dataset}: dataset listed in the metadata is missing or "
                             f"unreadable ({type(exc).__name__}: {exc})") from exc
    if len(array.shape) != ndim:
        raise StackReadError(f"{path / dataset}: {len(array.shape)} dimensions but the metadata "
                             f"names {ndim} axes")
    return array


def _axis_letters(axes: list[dict[str, Any]], path: Path) -> str:
    letters = []
    for axis in axes:
        name = str(axis.get("name", "")).lower()
        kind = axis.get("type")
        if kind == "time" or (kind is None and name == "t"):
            letters.append("T")
        elif kind == "channel" or (kind is None and name == "c"):
            letters.append("C")
        elif name in ("z", "y", "x") and kind in ("space", None):
            letters.append(name.upper())
        else:
            raise StackReadError(f"{path}: axis {name!r} of type {kind!r} is not supported "
                                 "(expected t, c, z, y, x)")
    text = "".join(letters)
    if len(set(text)) != len(text) or "Y" not in text or "X" not in text:
        raise StackReadError(f"{path}: axes {text!r}: expected distinct axes from TCZYX with Y and X")
    return text


def _raw_transforms(node: Any, spec: Any, ndim: int,
                    path: Path) -> list[tuple[tuple[float, ...], tuple[float, ...]]]:
    """(scale, translation) per dataset in file units, the multiscales-wide transform folded in."""
    per_dataset = node.metadata.get("coordinateTransformations") or [None] * len(spec.datasets)
    multiscales = spec.lookup("multiscales", [{}])[0]
    outer_scale, outer_shift = _scale_translation(multiscales.get("coordinateTransformations"),
                                                  ndim, path)
    out = []
    for transforms in per_dataset:
        scale, shift = _scale_translation(transforms, ndim, path)
        out.append((tuple(s * o for s, o in zip(scale, outer_scale)),
                    tuple(t * o + u for t, o, u in zip(shift, outer_scale, outer_shift))))
    return out


def _scale_translation(transforms: Any, ndim: int,
                       path: Path) -> tuple[tuple[float, ...], tuple[float, ...]]:
    scale, shift = [1.0] * ndim, [0.0] * ndim
    for t in transforms or []:
        values = t.get(t.get("type"))
        if t.get("type") not in ("scale", "translation") or values is None:
            if t.get("type") != "identity":
                logger.warning("%s: coordinate transformation %r not used (only inline scale and "
                               "translation are); using scale 1", path, t)
            continue
        if len(values) != ndim:
            raise StackReadError(f"{path}: a {t['type']} of {len(values)} values for {ndim} axes")
        target = scale if t["type"] == "scale" else shift
        target[:] = [_number(v) for v in values]
    return tuple(scale), tuple(shift)


def _number(value: Any) -> float:
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def _unit_factors(axes: list[dict[str, Any]], letters: str, path: Path) -> list[float]:
    """Micrometres (or seconds) per file unit, per axis; 1 with a warning when missing or unknown."""
    factors = []
    for axis, letter in zip(axes, letters):
        if letter == "C":
            factors.append(1.0)
            continue
        unit = axis.get("unit")
        convert, assumed = (time_in_s, "s") if letter == "T" else (length_in_um, "µm")
        factor = convert(unit) if unit is not None else None
        if factor is None:
            what = "has no unit" if unit is None else f"has the unknown unit {unit!r}"
            logger.warning("%s: axis %r %s; its steps are taken as %s", path, axis.get("name"),
                           what, assumed)
            factor = 1.0
        factors.append(factor)
    return factors


def _steps(raw: list[tuple[float, ...]], factors: list[float], shapes: list[tuple[int, ...]],
           axes: list[dict[str, Any]], path: Path) -> tuple[list[tuple[float, ...]], dict[int, Any]]:
    """Steps per level in µm/s (a non-positive step falls back to 1 at full resolution), and
    the unusable full-resolution values by axis index."""
    steps = [[s * f for s, f in zip(level, factors)] for level in raw]
    unusable: dict[int, Any] = {}
    for i, axis in enumerate(axes):
        for k, level in enumerate(steps):
            if math.isfinite(level[i]) and level[i] > 0:
                continue
            fallback = 1.0 if k == 0 else steps[0][i] * shapes[0][i] / max(1, shapes[k][i])
            logger.warning("%s: the scale %r of axis %r in dataset %d is not a positive number; "
                           "using %g", path, raw[k][i], axis.get("name"), k, fallback)
            if k == 0 and axis.get("type") != "channel":
                unusable[i] = raw[k][i]
            level[i] = fallback
    return [tuple(float(s) for s in level) for level in steps], unusable


def _channel_names(names: Any, axes: str, shape: tuple[int, ...], path: Path) -> list[str]:
    if "C" not in axes:
        return []
    n = shape[axes.index("C")]
    names = [str(x) for x in names] if isinstance(names, list) else []
    if len(names) != n:
        if names:
            logger.warning("%s: %d channel labels for %d channels; using defaults", path, len(names), n)
        names = [f"channel {i}" for i in range(n)]
    return names


def _level(image: _Image, k: int) -> Stack:
    import dask.array as da

    array = image.arrays[k]
    reader = ChunkReader(array, image.path / image.datasets[k], strict=image.strict)
    data = da.from_array(reader, chunks=reader.grid, name=f"ome-zarr-{uuid.uuid4().hex}",
                         meta=np.empty((0,) * reader.ndim, reader.dtype), fancy=False)
    info = {"version": image.version, "level": k, "levels": len(image.arrays),
            "dataset": image.datasets[k], "chunks": reader.grid,
            "shapes": [tuple(int(n) for n in a.shape) for a in image.arrays], "units": image.units}
    return Stack(data, image.axes, image.scales[k], list(image.channel_names),
                 {**image.metadata, "ome_zarr": info}, image.path, translate=image.translations[k])
