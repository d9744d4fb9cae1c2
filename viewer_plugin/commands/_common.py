"""Helpers shared by the sub-commands: errors, progress, atomic outputs."""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path
from typing import Any

from .._shared.jsonio import write_json

#: Exit statuses (documented in ``stackdepth --help``).
EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_USAGE = 2
EXIT_OVER_TOLERANCE = 3


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


def check_outputs(args: Any, options: tuple[str, ...] = ("output", "report", "plot")) -> dict[str, Path | None]:
    """Check every output option of *args* before any work: no silent overwrite, distinct files.

    ``--output`` must name an OME-TIFF. Returns option name -> path (or None when not given).
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
    for option in ("output", "equalise"):
        target = out.get(option)
        if target is not None and not target.name.lower().endswith((".ome.tif", ".ome.tiff")):
            raise CommandError(f"--{option}: expected a .ome.tif file name, got {target.name}")
    return out


class TerminalProgress:
    """A one-line progress bar on stderr, shown only when stderr is a terminal.

    Call it as ``progress(done, total)``; it matches the kernels' callback.
    """

    def __init__(self, label: str, *, stream: Any = None, enabled: bool | None = None) -> None:
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = self.stream.isatty() if enabled is None else enabled
        self._last = 0.0
        self._shown = False

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if done < total and now - self._last < 0.1:
            return
        self._last = now
        fraction = 1.0 if total <= 0 else min(1.0, done / total)
        width = 30
        filled = int(round(width * fraction))
        self.stream.write(f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] {fraction:4.0%}")
        self.stream.flush()
        self._shown = True

    def close(self) -> None:
        if self.enabled and self._shown:
            self.stream.write("\n")
            self.stream.flush()
            self._shown = False

    def __enter__(self) -> "TerminalProgress":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()
