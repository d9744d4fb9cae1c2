"""Run the real ``stackdepth`` console entry point and check its one-line errors."""

from __future__ import annotations

import subprocess
import sys


def run_cli(*args: object) -> subprocess.CompletedProcess:
    """Run ``python -m viewer_plugin.cli ARGS`` in a fresh interpreter, as a user would."""
    return subprocess.run([sys.executable, "-m", "viewer_plugin.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


def assert_one_line_error(result: subprocess.CompletedProcess, *fragments: str) -> None:
    """Exit status 2, exactly one stderr line starting ``stackdepth: error:``, no traceback."""
    assert result.returncode == 2, result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("stackdepth: error:")
    assert "Traceback" not in result.stderr
    for fragment in fragments:
        assert fragment in lines[0], lines[0]
