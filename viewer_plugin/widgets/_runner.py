"""Run a kernel off the GUI thread with progress, cancellation and notifications.

Usage inside a widget::

    self._task = BackgroundTask(label="Depth colour projection")
    self._task.start(lambda progress: kernel(data, progress=progress),
                     on_result=self._add_layer)

The kernel receives a ``progress(done, total)`` callback. Progress is
forwarded to a napari progress bar created on the GUI thread; when the user
cancels, the callback raises :class:`~viewer_plugin.kernels.Cancelled` at
the kernel's next chunk boundary. Input errors become napari notifications.

A job's dask work runs on as many threads as the machine has cores
(:func:`dask_threads`): called from a worker thread, dask's threaded scheduler
would otherwise start a pool of cores + 4 threads, which holds more blocks in
memory at once and oversubscribes the cores.
"""

from __future__ import annotations

import contextlib
import logging
import os
from typing import Any, Callable

from napari.qt.threading import create_worker
from napari.utils import notifications
from napari.utils import progress as napari_progress
from qtpy.QtCore import QObject, Signal

from .._shared.progress import Cancelled

logger = logging.getLogger(__name__)

ProgressCallback = Callable[[int, int], None]


def dask_threads() -> contextlib.AbstractContextManager[Any]:
    """Dask's threaded scheduler with one thread per core, for work started off the main thread.

    Leaves the configuration alone when the user has chosen a scheduler, a
    pool or a number of workers (e.g. a ``dask.distributed`` client).
    """
    import dask

    if any(dask.config.get(key, None) is not None for key in ("scheduler", "pool", "num_workers")):
        return contextlib.nullcontext()
    return dask.config.set(num_workers=os.cpu_count() or 1)


class _Relay(QObject):
    """Carries progress from the worker thread to the GUI thread."""

    advanced = Signal(int, int)


class Stopped:
    """An expected stop of a job (cancel or bad input), carried back as a value."""

    def __init__(self, exc: BaseException) -> None:
        self.exc = exc
        self.cancelled = isinstance(exc, Cancelled)


class BackgroundTask:
    """One long computation at a time for a widget.

    Parameters
    ----------
    label : str
        Shown beside the napari progress bar.
    """

    def __init__(self, label: str) -> None:
        self.label = label
        self.worker: Any = None
        self._bar: Any = None
        self._relay = _Relay()
        self._relay.advanced.connect(self._on_progress)
        self._cancel_requested = False
        self.started: list[Callable[[], None]] = []
        self.finished: list[Callable[[], None]] = []

    @property
    def running(self) -> bool:
        return self.worker is not None

    def start(
        self,
        job: Callable[[ProgressCallback], Any],
        *,
        on_result: Callable[[Any], None],
        on_stopped: Callable[[BaseException], None] | None = None,
        start_thread: bool = True,
    ) -> Any:
        """Start *job(progress)* in a worker thread; call *on_result* on the GUI thread.

        An expected stop (cancel, bad input: ``ValueError``, ``OSError``,
        ``MemoryError``) is shown as a napari notification and passed to
        *on_stopped*; anything else is logged and shown as an unexpected error.
        Returns the napari worker (not started when ``start_thread=False``,
        which tests use to wait on its signals).
        """
        if self.worker is not None:
            notifications.show_warning(f"{self.label}: a computation is already running; cancel it first")
            return None
        self._cancel_requested = False
        self._bar = napari_progress(total=0, desc=self.label)

        def emit(done: int, total: int) -> None:
            if self._cancel_requested:
                raise Cancelled
            self._relay.advanced.emit(int(done), int(total))

        def guarded(progress: ProgressCallback) -> Any:
            # expected stops come back as values, so `returned` always fires
            try:
                with dask_threads():
                    return job(progress)
            except (Cancelled, ValueError, OSError, MemoryError) as exc:
                return Stopped(exc)

        def done(result: Any) -> None:
            if isinstance(result, Stopped):
                self._notify(result.exc)
                if on_stopped is not None:
                    on_stopped(result.exc)
            else:
                on_result(result)

        # unexpected errors are handled by _on_error; without _ignore_errors napari re-raises them
        worker = create_worker(guarded, emit, _start_thread=False, _ignore_errors=True)
        worker.returned.connect(done)
        worker.errored.connect(self._on_error)
        worker.finished.connect(self._on_finished)
        self.worker = worker
        for callback in self.started:
            callback()
        if start_thread:
            worker.start()
        return worker

    def cancel(self) -> None:
        """Ask the running computation to stop at its next progress call (chunk boundary)."""
        if self.worker is not None:
            self._cancel_requested = True

    def _on_progress(self, done: int, total: int) -> None:
        if self._bar is None:
            return
        if self._bar.total != total:
            self._bar.total = total
        self._bar.n = done
        self._bar.refresh()

    def _notify(self, exc: BaseException) -> None:
        if isinstance(exc, Cancelled):
            notifications.show_info(f"{self.label}: cancelled")
        else:
            notifications.show_error(f"{self.label}: {exc}")

    def _on_error(self, exc: BaseException) -> None:
        logger.error("%s failed", self.label, exc_info=exc)
        notifications.show_error(f"{self.label}: unexpected {type(exc).__name__}: {exc}")

    def _on_finished(self) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None
        self.worker = None
        for callback in self.finished:
            callback()
