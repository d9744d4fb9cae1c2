"""Helpers shared by the sub-commands: errors, inputs, outputs and terminal progress.

The commands only translate arguments into calls of :mod:`viewer_plugin.jobs`
and write or print what comes back; everything here is about the terminal
and the file system, nothing about the analysis.
"""

from __future__ import annotations

import contextlib
import logging
import os
import sys
from pathlib import Path
from typing import Any, Iterable, Iterator

from .._shared.atomic import atomic_write

#: Exit statuses (documented in ``stackdepth --help``).
EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_USAGE = 2
EXIT_OVER_TOLERANCE = 3

#: Suffixes of the image files and folders the commands write.
OME_TIFF = (".ome.tif", ".ome.tiff")
OME_ZARR = ".ome.zarr"


class CommandError(Exception):
    """A user-facing failure: printed as one line, exit status 2."""


def check_output_path(path: str | os.PathLike[str], *, overwrite: bool, name: str = "--output") -> Path:
    """Refuse to replace an existing file unless *overwrite*; the folder must exist."""
    out = Path(path)
    if out.exists() and not overwrite:
        raise CommandError(f"{name}: {out} exists; pass --overwrite to replace it")
    if not out.parent.exists():
        raise CommandError(f"{name}: folder {out.parent} does not exist")
    return out


def check_outputs(args: Any, options: tuple[str, ...] = ("output", "report", "plot"),
                  images: Iterable[str] = ("output",)) -> dict[str, Path | None]:
    """Check every output option of *args* before any work: no silent overwrite, distinct files.

    The options named in *images* must name OME-TIFF files or OME-Zarr folders. Returns option
    name -> path (or None when not given).
    """
    out: dict[str, Path | None] = {}
    for option in options:
        value = getattr(args, option)
        out[option] = None if value is None else check_output_path(
            value, overwrite=args.overwrite, name=f"--{option}")
    paths = [p.resolve() for p in out.values() if p is not None]
    if len(set(paths)) != len(paths):
        names = "/".join(f"--{o}" for o in options)
        raise CommandError(f"{names}: expected different files, got the same path twice")
    for option in images:
        target = out.get(option)
        if target is not None and not target.name.lower().endswith(OME_TIFF + (OME_ZARR,)):
            raise CommandError(f"--{option}: expected a .ome.tif file or .ome.zarr folder name, "
                               f"got {target.name}")
    return out


def refuse_set(args: Any, why: str, **defaults: Any) -> None:
    """Refuse the first option *args* sets away from its default (``name=default``): ``--name: why``.

    For options that do not fit the chosen method: say so instead of ignoring them.
    """
    for name, default in defaults.items():
        if getattr(args, name) != default:
            raise CommandError(f"--{name.replace('_', '-')}: {why}")


def check_input(path: str, *, name: str = "INPUT") -> Path:
    """An input path that exists and is a file or an OME-Zarr folder; say which when it is not."""
    from ..io import is_ome_zarr

    source = Path(path)
    if not source.exists():
        raise CommandError(f"{name}: {source}: no such file or folder")
    if source.is_dir() and not (source.name.lower().endswith(".zarr") or is_ome_zarr(source)):
        raise CommandError(f"{name}: {source} is a folder; expected an OME-TIFF or TIFF file, or "
                           "an OME-Zarr folder (.ome.zarr)")
    return source


def read_input(path: str, *, name: str = "INPUT") -> Any:
    """Read an input stack (OME-TIFF/TIFF file or OME-Zarr folder, lazily when large)."""
    from ..io import read_stack

    return read_stack(check_input(path, name=name))


def is_zarr_output(path: Path) -> bool:
    """Whether an output path names an OME-Zarr folder (written as a chunked pyramid)."""
    return path.name.lower().endswith(OME_ZARR)


def write_image(path: Path, data: Any, geometry: Any, *, metadata: dict[str, Any],
                overwrite: bool, channel_names: list[str] | None = None) -> Path:
    """Write *data* with its geometry (axes and µm scale), atomically.

    ``.ome.zarr`` outputs become a chunked, multiscale OME-Zarr folder written
    chunk by chunk (a lazy dask result is never held whole in memory);
    anything else an OME-TIFF.
    """
    from ..io import write_ome_tiff, write_ome_zarr

    if is_zarr_output(path):
        axes, scale, translate = geometry.axes, geometry.scale, geometry.translate
        if axes.endswith("S"):  # NGFF has no sample axis: RGB becomes three channels
            import numpy as np

            data = np.moveaxis(np.asarray(data), -1, 0)
            axes, scale, translate = "C" + axes[:-1], (1.0,) + scale[:-1], (0.0,) + translate[:-1]
            channel_names = ["red", "green", "blue"]
        with TerminalProgress(f"writing {path.name}") as progress:
            return write_ome_zarr(path, data, axes=axes, scale=scale,
                                  translate=translate, channel_names=channel_names,
                                  metadata=metadata, overwrite=overwrite, progress=progress)
    return write_ome_tiff(path, data, axes=geometry.axes, scale=geometry.scale,
                          channel_names=channel_names, metadata=metadata, overwrite=overwrite)


def save_figure(path: Path, figure: Any, *, dpi: int = 120) -> Path:
    """Save a matplotlib figure as PNG, atomically."""
    return atomic_write(path, lambda tmp: figure.savefig(tmp, format="png", dpi=dpi))


def in_cli_words(record: dict[str, Any]) -> dict[str, Any]:
    """A job's provenance with its step sources named as the options that set them."""
    words = {"z_step_from": "--z-step", "interval_from": "--interval"}
    return {key: (words[key] if key in words and value == "given" else value)
            for key, value in record.items()}


def finish_parser(parser: Any, run: Any, *, channel_help: str | None = None,
                  overwrite_help: str = "replace existing output files") -> None:
    """The options a computing command ends with, and the function that runs it.

    ``--channel N`` (when *channel_help* says what it does), ``--overwrite``,
    ``--workers``/``--scheduler`` (see :func:`add_compute_options`).
    """
    if channel_help is not None:
        parser.add_argument("--channel", type=int, default=None, metavar="N", help=channel_help)
    parser.add_argument("--overwrite", action="store_true", help=overwrite_help)
    add_compute_options(parser)
    parser.set_defaults(func=run)


def add_compute_options(parser: Any) -> None:
    """``--workers N`` / ``--scheduler ADDRESS``: where a command's dask graphs run."""
    group = parser.add_argument_group(
        "where to compute (for OME-Zarr and other chunked inputs; default: threads on this machine)")
    group.add_argument("--workers", type=int, default=None, metavar="N",
                       help="start a local dask.distributed cluster of N worker processes for "
                            "this command")
    group.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="run on an existing dask.distributed cluster (e.g. tcp://host:8786)")


@contextlib.contextmanager
def compute_scheduler(args: Any) -> Iterator[Any]:
    """Run the command's dask work on the cluster its options ask for (None: dask's threads).

    A local cluster is started for the command and closed after it; an
    existing scheduler is connected to and left running. Chunked inputs
    (OME-Zarr, large TIFF) are then computed block by block on the workers.
    """
    workers, address = getattr(args, "workers", None), getattr(args, "scheduler", None)
    if workers is None and address is None:
        yield None
        return
    if workers is not None and address is not None:
        raise CommandError("--workers/--scheduler: expected one of them, got both")
    if workers is not None and workers < 1:
        raise CommandError(f"--workers: expected a number of workers >= 1, got {workers}")
    try:
        from distributed import Client, LocalCluster
    except ImportError:  # pragma: no cover - a dependency of stackdepth
        raise CommandError("--workers/--scheduler: needs dask.distributed "
                           "(pip install 'dask[distributed]')") from None
    if address is not None:
        try:
            client = Client(address, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise CommandError(f"--scheduler: cannot reach {address} ({exc})") from None
        with client:
            yield client
        return
    threads = max(1, (os.cpu_count() or 1) // workers)
    with LocalCluster(n_workers=workers, threads_per_worker=threads, processes=True,
                      dashboard_address=None, silence_logs=logging.ERROR) as cluster, \
            Client(cluster) as client:
        yield client


def print_notes(notes: Iterable[str]) -> None:
    """Notes go to stderr, each on its own line (only once the command has succeeded)."""
    for text in notes:
        print(f"stackdepth: note: {text}", file=sys.stderr)


class TerminalProgress:
    """A progress bar on stderr (tqdm: rate and time left), only when stderr is a terminal.

    Call it as ``progress(done, total)``; it matches the kernels' callback.
    """

    def __init__(self, label: str, *, stream: Any = None, enabled: bool | None = None) -> None:
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = _is_terminal(self.stream) if enabled is None else enabled
        self._bar: Any = None

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        if self._bar is None:
            from tqdm import tqdm

            self._bar = tqdm(total=total, desc=self.label, file=self.stream, leave=True,
                             dynamic_ncols=True, mininterval=0.1)
        if self._bar.total != total:
            self._bar.total = total
        self._bar.n = min(done, total)
        self._bar.refresh()

    def close(self) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None

    def __enter__(self) -> "TerminalProgress":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


def _is_terminal(stream: Any) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False
