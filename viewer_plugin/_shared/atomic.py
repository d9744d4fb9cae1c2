"""Atomic file writes: write to a temporary file beside the target, then rename it into place."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable

__all__ = ["atomic_write"]


def _read_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


#: Read once at import: os.umask can only be read by setting it, which is not thread-safe.
_UMASK = _read_umask()


def atomic_write(path: str | os.PathLike[str], write: Callable[[Path], None]) -> Path:
    """Call ``write(tmp)`` on a temporary file in the target folder, then rename it to *path*.

    An interrupted or failed write never leaves a partial file under the target
    name, and the temporary file is removed. The result gets the usual
    permissions (``0o666`` less the umask), not the private mode of a temp file.
    Overwrite checks are the caller's job.
    """
    path = Path(path)
    suffix = "".join(path.suffixes) or ".tmp"
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix, dir=path.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        write(tmp)
        os.chmod(tmp, 0o666 & ~_UMASK)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
