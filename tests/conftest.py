"""Shared test configuration: napari settings in a temp folder, paths to open data."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pytest

# Keep napari's settings out of the home folder (set before napari is imported).
os.environ.setdefault("NAPARI_CONFIG", os.path.join(tempfile.mkdtemp(prefix="stackdepth-napari-"),
                                                    "settings.yaml"))

REPO = Path(__file__).resolve().parents[1]
#: Three small real open stacks (see their README for licences and attribution).
REALDATA = REPO.parent / "shared" / "realdata"


@pytest.fixture
def realdata() -> Path:
    """Folder of the open real stacks; skips the test when it is absent."""
    if not REALDATA.is_dir():
        pytest.skip(f"open real-data stacks not found at {REALDATA}")
    return REALDATA
