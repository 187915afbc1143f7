"""The package's layout rules (DEVELOPERS.md): which part may import which, and module size."""

import ast
import glob
import os

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
PKG = os.path.join(ROOT, "app", "scalesieve")


def _imports(path):
    tree = ast.parse(open(path, encoding="utf-8").read())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name
        elif isinstance(node, ast.ImportFrom) and node.module:
            if node.module == "scalesieve":
                for a in node.names:
                    yield f"scalesieve.{a.name}"
            yield node.module


def _files(part):
    return glob.glob(os.path.join(PKG, part, "**", "*.py"), recursive=True)


def _offending(part, forbidden):
    bad = []
    for path in _files(part):
        for name in _imports(path):
            if any(name == f or name.startswith(f + ".") for f in forbidden):
                bad.append(f"{os.path.relpath(path, PKG)}: {name}")
    return bad


def test_core_imports_no_io_model_gui_or_qt():
    assert _offending("core", ("scalesieve.io", "scalesieve.model", "scalesieve.gui",
                               "scalesieve.views", "PySide6", "pyqtgraph", "shiboken6")) == []


def test_views_import_no_qt_and_no_gui():
    assert _offending("views", ("PySide6", "pyqtgraph", "shiboken6", "scalesieve.gui")) == []


def test_gui_never_imports_the_commands():
    assert _offending("gui", ("scalesieve.commands", "scalesieve.cli")) == []


def test_commands_reach_the_gui_through_one_entry_call():
    uses = [u for u in _offending("commands", ("scalesieve.gui",))]
    assert uses == ["commands/window.py: scalesieve.gui.app"]
