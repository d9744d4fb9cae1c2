"""Benchmarks are collected only when this folder is named on the command line.

``pyproject.toml`` ignores this folder in the default run. Run with::

    pytest tests/benchmarks -s

(or ``python tests/benchmarks/bench_projections.py``). Files named
``bench_*.py`` are collected here as test modules.
"""

from __future__ import annotations

import pytest


def pytest_collect_file(file_path, parent):
    if file_path.suffix == ".py" and file_path.name.startswith("bench_"):
        return pytest.Module.from_parent(parent, path=file_path)
    return None
