"""Provenance: what made a result, recorded the same way for files, layers, figures and reports."""

from __future__ import annotations

import datetime as _dt
from typing import Any

from .. import __version__
from .stack import Selection

__all__ = ["provenance"]


def provenance(job: str, selection: Selection, **entries: Any) -> dict[str, Any]:
    """A record of one job's inputs and settings (JSON-able once through ``to_jsonable``).

    Parameters
    ----------
    job : str
        What was done, e.g. "projection", "attenuation", "bleaching".
    selection : Selection
        The picked stack (its source, channel and time point are recorded).
    **entries
        The job's own parameters and results (method, z-step, limits used, ...).

    Returns
    -------
    dict
        ``job``, ``stackdepth_version``, ``computed_utc``, ``source_file``
        (None for a layer or array), ``source_name``, ``channel``,
        ``channel_name``, ``time_point``, then *entries*.
    """
    stack = selection.stack
    record: dict[str, Any] = {
        "job": job,
        "stackdepth_version": __version__,
        "computed_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "source_file": str(stack.path) if stack.path is not None else None,
        "source_name": stack.name,
        "channel": selection.channel,
        "channel_name": selection.channel_name,
        "time_point": selection.time,
    }
    record.update(entries)
    return record
