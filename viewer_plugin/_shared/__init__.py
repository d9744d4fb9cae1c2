"""The shared foundation of stackdepth: every other part may import it; it imports none of them.

* :mod:`.validation` -- the one input-validation helper (``ParameterError``, ``check_*``);
* :mod:`.progress` -- progress callbacks, ``Cancelled`` and sub-range mapping;
* :mod:`.atomic` -- atomic file writes (temporary file, then rename);
* :mod:`.jsonio` -- JSON for reports and sidecars (inf/NaN stored as null);
* :mod:`.stack` -- :class:`Stack`, an image with its axes, voxel size and metadata.
"""
