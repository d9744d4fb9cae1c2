"""Read and write OME-TIFF and plain TIFF stacks with their voxel sizes.

Structural faults (not a TIFF, truncated, unreadable pixel data) raise one
exception, :class:`StackReadError` (a :class:`ValueError`), whose message names
the file and the problem. Odd metadata (missing or unparsable sizes, unknown
units) falls back to defaults with a logged warning, so the file still opens.

Our own key/value metadata (for example the demo's true parameters) is stored
in the OME-XML as ``MapAnnotation`` elements with the namespace
``stackdepth/<key>``; each value is JSON text.
"""

from __future__ import annotations

import json
import logging
import os
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any, Iterator

import numpy as np
import tifffile

from .._shared.atomic import atomic_write
from .._shared.jsonio import to_jsonable
from .._shared.stack import AXES, Stack
from .._shared.validation import check_stack, fail, is_dask
from ._errors import StackReadError
from ._units import LENGTH_UM as _LENGTH_UM
from ._units import TIME_S as _TIME_S

logger = logging.getLogger(__name__)

__all__ = ["Stack", "StackData", "StackReadError", "read_stack", "write_ome_tiff", "NAMESPACE"]

NAMESPACE = "stackdepth/"
#: Files larger than this are opened lazily (dask over tifffile's zarr store).
LAZY_BYTES = 2 * 2**30


#: The container :func:`read_stack` returns (the shared :class:`~viewer_plugin._shared.stack.Stack`).
StackData = Stack


# --------------------------------------------------------------------------- reading


def read_stack(path: str | os.PathLike[str], *, lazy: bool | None = None) -> StackData:
    """Read an OME-TIFF or TIFF file with its voxel size.

    Parameters
    ----------
    path : str or path-like
        The file.
    lazy : bool or None
        Return a dask array instead of loading the pixels. ``None`` (default)
        loads files up to 2 GiB and opens larger ones lazily.

    Returns
    -------
    StackData
        Pixels in the file's dtype, axes, scale in um (and s), channel names.

    Raises
    ------
    StackReadError
        When the file is missing, not a TIFF, truncated or its pixels cannot be read.
    """
    path = Path(path)
    if not path.is_file():
        raise StackReadError(f"{path}: no such file")
    with _quiet_tifffile() as complaints:
        return _read(path, lazy, complaints)


class _Collect(logging.Handler):
    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.messages.append(record.getMessage())


class _quiet_tifffile:
    """Collect tifffile's own log messages while reading, instead of printing them."""

    def __enter__(self) -> list[str]:
        self.logger = logging.getLogger("tifffile")
        self.handler = _Collect()
        self.propagate = self.logger.propagate
        self.logger.addHandler(self.handler)
        self.logger.propagate = False
        return self.handler.messages

    def __exit__(self, *exc: Any) -> None:
        self.logger.removeHandler(self.handler)
        self.logger.propagate = self.propagate
        for message in self.handler.messages:
            logger.debug("tifffile: %s", message)


def _read(path: Path, lazy: bool | None, complaints: list[str]) -> StackData:
    try:
        with tifffile.TiffFile(path) as tif:
            _check_structure(complaints, path)
            series = tif.series[0]
            axes = series.axes
            shape = tuple(series.shape)
            _check_complete(tif, series, path)
            if tif.is_ome and tif.ome_metadata:
                info = _ome_info(tif.ome_metadata, path)
            else:
                info = _plain_info(tif, path)
            nbytes = int(np.prod(shape, dtype=np.int64)) * series.dtype.itemsize
            if lazy or (lazy is None and nbytes > LAZY_BYTES):
                data = _lazy(path, series)
            else:
                data = series.asarray()
    except StackReadError:
        raise
    except (tifffile.TiffFileError, ValueError, OSError, EOFError, KeyError, IndexError) as exc:
        raise StackReadError(f"{path}: cannot read as TIFF ({exc})") from exc
    axes = _normalise_axes(axes, path)
    scale = tuple(_axis_step(a, info) for a in axes)
    channels = list(info.get("channels", []))
    n_channels = shape[axes.index("C")] if "C" in axes else 0
    if n_channels and len(channels) != n_channels:
        if channels:
            logger.warning("%s: %d channel names for %d channels; using defaults",
                           path, len(channels), n_channels)
        channels = [f"channel {i}" for i in range(n_channels)]
    metadata = dict(info.get("annotations", {}))
    if info.get("unusable"):
        # kept so that a job refuses a depth step of 1 that only stands in for a bad value
        metadata["unusable_voxel_size"] = dict(info["unusable"])
    return Stack(data, axes, scale, channels if n_channels else [], metadata, path)


def _lazy(path: Path, series: Any) -> Any:
    """A dask array reading one TIFF page per chunk (the file is opened per read, never held)."""
    import dask.array as da

    page_shape = tuple(series.pages[0].shape)
    lead = tuple(series.shape[: len(series.shape) - len(page_shape)])
    n_pages = int(np.prod(lead, dtype=np.int64))
    flat = da.map_blocks(_read_page, path=str(path), page_shape=page_shape, dtype=series.dtype,
                         chunks=((1,) * n_pages, *((n,) for n in page_shape)), meta=np.empty((0,) * (1 + len(page_shape)), series.dtype))
    return flat.reshape(lead + page_shape)


def _read_page(*, path: str, page_shape: tuple[int, ...], block_info: Any = None) -> np.ndarray:
    index = block_info[None]["chunk-location"][0]
    with tifffile.TiffFile(path) as tif:
        return tif.series[0].pages[index].asarray().reshape((1, *page_shape))


def _check_structure(complaints: list[str], path: Path) -> None:
    """Raise when tifffile found offsets past the end of the file while opening it."""
    for message in complaints:
        if "invalid page offset" in message or "invalid value offset" in message:
            raise StackReadError(f"{path}: truncated or corrupt: the file refers to data past its end")


def _check_complete(tif: tifffile.TiffFile, series: Any, path: Path) -> None:
    """Raise when the pixel data of a series runs past the end of the file."""
    size = os.path.getsize(path)
    for page in series.pages:
        if page is None:
            raise StackReadError(f"{path}: missing image data (file truncated?)")
        offsets = getattr(page, "dataoffsets", ()) or ()
        counts = getattr(page, "databytecounts", ()) or ()
        for offset, count in zip(offsets, counts):
            if offset + count > size:
                raise StackReadError(
                    f"{path}: truncated: image data ends at byte {offset + count} "
                    f"but the file has {size} bytes"
                )
    if len(series.pages) * int(np.prod(series.pages[0].shape)) < int(np.prod(series.shape)):
        raise StackReadError(f"{path}: truncated: fewer image planes than the metadata declares")


def _normalise_axes(axes: str, path: Path) -> str:
    out = []
    for a in axes.upper():
        if a in AXES:
            out.append(a)
        elif a in "QI" and "Z" not in axes.upper() and "Z" not in out:
            out.append("Z")  # an unnamed stack axis: treat as depth
        else:
            logger.warning("%s: axis %r is not one of %s; treated as time", path, a, AXES)
            out.append("T" if "T" not in out else "C")
    if len(set(out)) != len(out):
        raise StackReadError(f"{path}: repeated axes {''.join(out)!r}")
    return "".join(out)


def _axis_step(axis: str, info: dict[str, Any]) -> float:
    return float(info.get("steps", {}).get(axis, 1.0))


def _ome_info(xml: str, path: Path) -> dict[str, Any]:
    """Physical sizes, time step, channel names and our annotations from OME-XML."""
    info: dict[str, Any] = {"steps": {}, "channels": [], "annotations": {}}
    try:
        root = ET.fromstring(xml)
    except ET.ParseError as exc:
        logger.warning("%s: OME-XML cannot be parsed (%s); using scale 1", path, exc)
        return info
    ns = root.tag.split("}")[0] + "}" if root.tag.startswith("{") else ""
    pixels = root.find(f"{ns}Image/{ns}Pixels")
    if pixels is None:
        logger.warning("%s: OME-XML has no Image/Pixels; using scale 1", path)
        return info
    for axis in "XYZ":
        step = _physical(pixels, f"PhysicalSize{axis}", _LENGTH_UM, path)
        if step is not None:
            info["steps"][axis] = step
        elif pixels.get(f"PhysicalSize{axis}") is not None:
            info.setdefault("unusable", {})[axis] = pixels.get(f"PhysicalSize{axis}")
        elif axis in "XY":
            logger.warning("%s: no PhysicalSize%s; using 1 (pixels, not um)", path, axis)
    step = _physical(pixels, "TimeIncrement", _TIME_S, path)
    if step is not None:
        info["steps"]["T"] = step
    info["channels"] = [c.get("Name") or f"channel {i}"
                        for i, c in enumerate(pixels.findall(f"{ns}Channel"))]
    for annotation in root.iter(f"{ns}MapAnnotation"):
        namespace = annotation.get("Namespace", "")
        if not namespace.startswith(NAMESPACE):
            continue
        values = {}
        for item in annotation.iter(f"{ns}M"):
            text = item.text or ""
            try:
                values[item.get("K", "")] = json.loads(text)
            except json.JSONDecodeError:
                values[item.get("K", "")] = text
        if set(values) == {"value"}:
            values = values["value"]
        info["annotations"][namespace[len(NAMESPACE):]] = values
    return info


def _physical(element: ET.Element, name: str, units: dict[str, float], path: Path) -> float | None:
    text = element.get(name)
    if text is None:
        return None
    unit = element.get(f"{name}Unit", "µm" if units is _LENGTH_UM else "s")
    try:
        value = float(text) * units[unit]
    except (ValueError, KeyError):
        logger.warning("%s: cannot use %s=%r %r; using 1", path, name, text, unit)
        return None
    if not np.isfinite(value) or value <= 0:
        logger.warning("%s: %s=%r is not positive; using 1", path, name, text)
        return None
    return value


def _plain_info(tif: tifffile.TiffFile, path: Path) -> dict[str, Any]:
    """Voxel size of a plain TIFF: resolution tags, and ``unit``/``spacing``/``finterval`` entries of its image description."""
    info: dict[str, Any] = {"steps": {}, "channels": [], "annotations": {}}
    page = tif.pages.first
    ij = tif.imagej_metadata or {}  # tifffile's parse of the image description's key=value entries
    unit = str(ij.get("unit", "")).replace("\\u00B5", "µ").lower()
    resunit = page.tags.get("ResolutionUnit")
    resunit = int(resunit.value) if resunit is not None else 1
    per_unit = {"micron": 1.0, "um": 1.0, "µm": 1.0, "nm": 1e-3, "mm": 1e3}.get(unit)
    if per_unit is None:
        per_unit = {2: 25400.0, 3: 1e4}.get(resunit)
    for axis, tag in (("X", "XResolution"), ("Y", "YResolution")):
        res = page.tags.get(tag)
        if res is None or per_unit is None:
            continue
        num, den = res.value if isinstance(res.value, tuple) else (res.value, 1)
        if num > 0 and den > 0:
            info["steps"][axis] = per_unit * den / num
    if "spacing" in ij and per_unit is not None:
        try:
            info["steps"]["Z"] = float(ij["spacing"]) * per_unit
        except (TypeError, ValueError):
            logger.warning("%s: the z spacing %r in the image description is not a number", path, ij["spacing"])
    if "finterval" in ij:
        try:
            info["steps"]["T"] = float(ij["finterval"])
        except (TypeError, ValueError):
            pass
    if "X" not in info["steps"]:
        logger.warning("%s: no usable resolution tags; pixel size set to 1 (not um)", path)
    return info


# --------------------------------------------------------------------------- writing


def write_ome_tiff(
    path: str | os.PathLike[str],
    data: Any,
    *,
    axes: str,
    scale: tuple[float, ...],
    channel_names: list[str] | None = None,
    metadata: dict[str, Any] | None = None,
    overwrite: bool = False,
    compression: str | None = "zlib",
) -> Path:
    """Write an OME-TIFF with voxel sizes, atomically.

    Parameters
    ----------
    path : str or path-like
        Target file (``.ome.tif``).
    data : ndarray or dask array
        Pixels; dask arrays are written plane by plane.
    axes : str
        One letter per axis from "TCZYXS" (S last, for RGB).
    scale : tuple of float
        Step per axis: um for Z/Y/X, seconds for T (others ignored).
    channel_names : list of str, optional
        One per channel of a C axis.
    metadata : dict, optional
        JSON-serialisable key/value data; each top-level key becomes a
        ``MapAnnotation`` with namespace ``stackdepth/<key>``.
    overwrite : bool
        Replace an existing file. Without it an existing file raises.
    compression : str or None
        Passed to tifffile (default zlib: lossless).

    Returns
    -------
    Path
        The written file.

    Raises
    ------
    FileExistsError
        When *path* exists and *overwrite* is False.
    ParameterError
        When *axes* or *scale* do not match the data.
    """
    path = Path(path)
    axes = str(axes).upper()
    data, _ = check_stack(data, name="data", min_ndim=2)
    if len(axes) != data.ndim or any(a not in AXES for a in axes) or len(set(axes)) != len(axes):
        fail("axes", f"{data.ndim} distinct letters from {AXES!r}", axes)
    if len(scale) != data.ndim:
        fail("scale", f"{data.ndim} steps, one per axis", tuple(scale))
    if path.exists() and not overwrite:
        raise FileExistsError(f"{path} exists; choose another name or allow overwriting")
    if not path.parent.is_dir():
        raise FileNotFoundError(f"{path.parent}: folder does not exist")
    ome = _ome_metadata(axes, scale, channel_names, metadata, data.shape)
    nbytes = int(np.prod(data.shape, dtype=np.int64)) * np.dtype(data.dtype).itemsize
    options: dict[str, Any] = {"ome": True, "metadata": ome, "bigtiff": nbytes > 2**31 - 2**26,
                               "compression": compression, "photometric":
                               "rgb" if axes.endswith("S") else "minisblack"}
    def write(tmp: Path) -> None:
        if is_dask(data):
            plane_axes = 3 if axes.endswith("S") else 2
            tifffile.imwrite(tmp, _planes(data, plane_axes), shape=data.shape, dtype=data.dtype,
                             **options)
        else:
            tifffile.imwrite(tmp, np.asarray(data), **options)

    atomic_write(path, write)
    return path


def _planes(data: Any, plane_axes: int) -> Iterator[np.ndarray]:
    lead = data.shape[: data.ndim - plane_axes]
    for index in np.ndindex(*lead):
        yield np.asarray(data[index].compute())


def _ome_metadata(axes: str, scale: tuple[float, ...], channel_names: list[str] | None,
                  metadata: dict[str, Any] | None, shape: tuple[int, ...]) -> dict[str, Any]:
    ome: dict[str, Any] = {"axes": axes}
    for a, step in zip(axes, scale):
        if a in "XYZ":
            ome[f"PhysicalSize{a}"] = float(step)
            ome[f"PhysicalSize{a}Unit"] = "µm"
        elif a == "T":
            ome["TimeIncrement"] = float(step)
            ome["TimeIncrementUnit"] = "s"
    if "C" in axes:
        n = shape[axes.index("C")]
        names = list(channel_names or [f"channel {i}" for i in range(n)])
        if len(names) != n:
            fail("channel_names", f"{n} names", names)
        ome["Channel"] = {"Name": names}
    if metadata:
        annotations = []
        for key, value in metadata.items():
            items = value if isinstance(value, dict) else {"value": value}
            annotations.append({"Namespace": NAMESPACE + str(key),
                                **{str(k): json.dumps(to_jsonable(v)) for k, v in items.items()}})
        ome["MapAnnotation"] = annotations
    return ome
