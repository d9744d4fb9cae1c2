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


#: Which parts of the package each part may import (the package root, for the version, always).
#: Layers import downwards only: foundation <- kernels <- io/plots/figures <- jobs <- docks and
#: commands <- cli; nothing but cli imports commands; kernels and io import no front-end.
ALLOWED = {
    "_shared": {"_shared"},
    "kernels": {"_shared", "kernels"},
    "io": {"_shared", "io"},
    "demo": {"_shared", "demo"},
    "plots": {"_shared", "kernels", "plots"},
    "figures": {"_shared", "kernels", "figures"},
    "samples": {"_shared", "demo", "samples"},
    "jobs": {"_shared", "kernels", "io", "plots", "figures", "jobs"},
    "widgets": {"_shared", "kernels", "io", "plots", "figures", "jobs", "widgets"},
    "commands": {"_shared", "io", "plots", "figures", "jobs", "demo", "samples", "commands"},
    "cli": {"_shared", "commands", "cli"},
}


def _area(module: str) -> str:
    """The part of the package a dotted module name belongs to ("" for the package root)."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else ""


def _imported_modules(path: Path) -> list[str]:
    """Every module of viewer_plugin that *path* imports, at any depth (inside functions too)."""
    package = ".".join(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if path.name == "__init__.py":
        package = package.rsplit(".", 1)[0] + ".__init__"
    found = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            found += [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level == 0:
                found.append(node.module or "")
            else:
                base = package.split(".")[: -node.level]
                found.append(".".join(base + ([node.module] if node.module else [])))
    return [name for name in found if name == "viewer_plugin" or name.startswith("viewer_plugin.")]


def test_import_edges_point_downwards():
    """Each module imports only the parts its layer may use (imports inside functions included)."""
    offenders = []
    for path in PACKAGE.rglob("*.py"):
        area = _area(".".join(path.relative_to(PACKAGE.parent).with_suffix("").parts))
        if area in ("", "__init__", "__main__"):
            continue
        for module in _imported_modules(path):
            target = _area(module)
            if target not in ("", "__init__") and target not in ALLOWED[area]:
                offenders.append(f"{path.relative_to(PACKAGE)} imports {module}")
    assert offenders == []


def test_import_check_sees_imports_inside_functions():
    """The edge check reads imports inside function bodies (a lazy import is still an edge)."""
    modules = _imported_modules(PACKAGE / "commands" / "project.py")
    assert any(name.startswith("viewer_plugin.jobs") for name in modules)
    assert _area("viewer_plugin.widgets._dock") == "widgets"
