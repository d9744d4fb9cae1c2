"""Compile the projection kernels once per process, in a background thread."""

from __future__ import annotations

import logging
import threading

logger = logging.getLogger(__name__)

_LOCK = threading.Lock()
_STARTED: list[bool] = []


def start_warm_up() -> None:
    """Compile (or load from numba's cache) the projection kernels, once, off the GUI thread."""
    with _LOCK:
        if _STARTED:
            return
        _STARTED.append(True)

    def run() -> None:
        from ..kernels.projection import warm_up

        try:
            warm_up()
        except Exception:  # noqa: BLE001 - a failed warm-up only costs time later
            logger.debug("projection kernels warm-up failed", exc_info=True)

    threading.Thread(target=run, name="stackdepth-warm-up", daemon=True).start()
