"""Progress callbacks and cancellation, shared by every layer of stackdepth.

A long computation takes ``progress=None`` or a callable ``progress(done,
total)`` and calls it between pieces of work (z-chunks, bootstrap rounds,
files). The callback may raise :class:`Cancelled` to stop the work at that
point; nothing half-made is returned or written.
"""

from __future__ import annotations

from typing import Callable, Optional

__all__ = ["Cancelled", "Progress", "report_progress", "sub_progress"]

#: The type of a progress callback: ``progress(done, total)``.
Progress = Optional[Callable[[int, int], None]]


class Cancelled(Exception):
    """Raised by a progress callback to stop a long computation early."""


def report_progress(progress: Progress, done: int, total: int) -> None:
    """Call a progress callback ``progress(done, total)`` when one was given.

    The callback may raise :class:`Cancelled` to stop the computation.
    """
    if progress is not None:
        progress(done, total)


def sub_progress(progress: Progress, part: int, parts: int, *, resolution: int = 1000) -> Progress:
    """A callback that maps a sub-task's progress onto part *part* of *parts* of a bar.

    Parameters
    ----------
    progress : callable or None
        The callback of the whole job.
    part : int
        Which part this sub-task is (0-based).
    parts : int
        How many equal parts the job's bar is split into.
    resolution : int
        Steps of the whole bar.

    Returns
    -------
    callable or None
        ``None`` when *progress* is None; otherwise a callback that reports
        ``(part + done / total) / parts`` of the bar (and passes on
        :class:`Cancelled` raised by *progress*).

    Examples
    --------
    >>> seen = []
    >>> second = sub_progress(lambda d, t: seen.append((d, t)), 1, 2, resolution=100)
    >>> second(1, 2)
    >>> seen
    [(75, 100)]
    """
    if progress is None:
        return None

    def mapped(done: int, total: int) -> None:
        fraction = 1.0 if total <= 0 else min(1.0, max(0.0, done / total))
        progress(int(round((part + fraction) / parts * resolution)), resolution)

    return mapped
