"""The package's shape: kernels, io and the CLI import no GUI code; the manifest is valid."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "viewer_plugin"
GUI_MODULES = ("napari", "qtpy", "magicgui", "PyQt5", "PyQt6", "PySide2", "PySide6", "vispy")

BLOCKER = """
import sys
class Block:
    def find_spec(self, name, path=None, target=None):
        if name.split('.')[0] in {blocked!r}:
            raise ImportError('blocked GUI import: ' + name)
sys.meta_path.insert(0, Block())
import viewer_plugin.kernels, viewer_plugin.io, viewer_plugin.demo, viewer_plugin.cli
import viewer_plugin.kernels.projection, viewer_plugin.kernels.attenuation, viewer_plugin.kernels.bleaching
from viewer_plugin.cli import build_parser
build_parser()
print('ok')
"""


def test_headless_modules_import_with_gui_blocked():
    """kernels/, io/, demo and cli import even when napari, Qt and magicgui cannot."""
    code = BLOCKER.format(blocked=set(GUI_MODULES))
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr
    assert result.stdout.strip().endswith("ok")


@pytest.mark.parametrize("folder", ["kernels", "io"])
def test_no_gui_imports_anywhere_in(folder):
    """No module in kernels/ or io/ names a GUI package in an import statement (even lazily)."""
    offenders = []
    for path in (PACKAGE / folder).rglob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names = [node.module]
            offenders += [f"{path.name}: {n}" for n in names if n.split(".")[0] in GUI_MODULES]
    assert offenders == []


def test_manifest_validates_with_imports():
    """The npe2 manifest is valid and every command's python_name imports (npe2 validate --imports)."""
    npe2 = pytest.importorskip("npe2")
    manifest = npe2.PluginManifest.from_distribution("stackdepth")
    manifest.validate_imports()
    assert manifest.name == "stackdepth"
    assert all(c.id.startswith("stackdepth.") for c in manifest.contributions.commands)
    widgets = [w.display_name for w in manifest.contributions.widgets]
    assert widgets == ["Depth colour projection", "Peak depth map", "Occlusion projection",
                       "Depth attenuation", "Bleaching check"]
    assert len(manifest.contributions.sample_data) >= 3
    assert manifest.contributions.readers and manifest.contributions.writers


def test_npe2_validate_command():
    """The same check as a user would run it: `npe2 validate stackdepth --imports`."""
    pytest.importorskip("npe2")
    result = subprocess.run([sys.executable, "-m", "npe2", "validate", "stackdepth", "--imports"],
                            capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, result.stdout + result.stderr


def _relative_imports(path: Path) -> list[tuple[int, str]]:
    """(level, module) of every relative import statement in *path*."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level > 0:
            found.append((node.level, node.module or ""))
    return found


FEATURES = ("projection", "attenuation", "bleaching")


@pytest.mark.parametrize("folder", ["primitives", *FEATURES])
def test_kernel_subpackages_import_only_primitives(folder):
    """kernels/primitives imports no feature subpackage, and no feature imports another one:
    what two features share lives in primitives."""
    others = {"primitives": FEATURES}.get(folder, tuple(f for f in FEATURES if f != folder))
    offenders = []
    for path in (PACKAGE / "kernels" / folder).rglob("*.py"):
        for level, module in _relative_imports(path):
            if level == 2 and module.split(".")[0] in others:
                offenders.append(f"{path.name}: ..{module}")
            if level == 2 and module == "":
                offenders.append(f"{path.name}: from .. import")
    assert offenders == []
