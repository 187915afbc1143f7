"""The model package: its parts, what it re-exports, and the layering rules.

Layering and size rules come from the project's own design (DEVELOPERS.md:
core <- io <- model <- gui | cli | api; issue 13: no module in the model over
700 lines, no cache hung on an object through ``__dict__``).
"""

from __future__ import annotations

import ast
import os

import numpy as np
import pytest

from scalesieve.core.blocked import axpy, blocks
from scalesieve.core.metrics import removed_energy, removed_figures
from scalesieve.model.history import EditHistory
from scalesieve.recipe import Edit

APP = os.path.join(os.path.dirname(__file__), os.pardir, "app", "scalesieve")


def _modules(folder):
    for name in sorted(os.listdir(os.path.join(APP, folder))):
        if name.endswith(".py"):
            yield os.path.join(APP, folder, name)


def _imports(path):
    tree = ast.parse(open(path, encoding="utf-8").read())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            yield from (a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            yield node.module


def test_core_imports_neither_io_model_gui_nor_qt():
    bad = [(os.path.basename(p), m) for p in _modules("core") for m in _imports(p)
           if m.split(".")[0] in ("PySide6", "pyqtgraph")
           or m.startswith(("scalesieve.io", "scalesieve.model", "scalesieve.gui"))]
    assert bad == []


def test_model_modules_are_small_and_keep_no_hidden_caches():
    for p in _modules("model"):
        text = open(p, encoding="utf-8").read()
        assert text.count("\n") <= 700, p
        assert "__dict__" not in text, p
        assert not any(m.startswith(("scalesieve.gui", "PySide6")) for m in _imports(p)), p


def test_names_importable_before_the_split_still_are():
    from scalesieve import model

    for name in ("DecompositionModel", "Change", "FLUSH_STEP", "LOCAL_SHARE", "COMPONENT_CACHE",
                 "COMPONENT_BYTES", "THRESHOLDS_KEPT", "Edit", "Recipe", "Recording",
                 "ScalesieveError", "check_against"):
        assert hasattr(model, name), name


def test_history_undo_redo_and_a_new_step_dropping_redo():
    a, b, c = (Edit("gain", levels=(j,), gain=0.0) for j in (1, 2, 3))
    h = EditHistory()
    assert h.current == () and not h.can_undo and not h.can_redo
    assert h.record((a,)) and h.record((a, b))
    assert not h.record((a, b))                  # the same list is no new step
    assert h.undo() and h.current == (a,) and h.can_redo
    assert h.record((a, c))                      # a new step after undo: redo is gone
    assert not h.can_redo and h.current == (a, c)
    assert h.undo() and h.undo() and h.current == () and not h.undo()
    h.replace_current((b,))
    assert h.current == (b,) and h.redo() and h.current == (a,)


@pytest.mark.parametrize("n,size", [(0, 4), (1, 4), (10, 3), (12, 4)])
def test_blocks_cover_the_range_once(n, size):
    covered = [i for b0, b1 in blocks(n, size) for i in range(b0, b1)]
    assert covered == list(range(n))


def test_axpy_equals_numpy():
    # Reference: NumPy's y + a * x, element for element (the same two roundings).
    rng = np.random.default_rng(3)
    x, y = rng.standard_normal(300_001), rng.standard_normal(300_001)
    want = y + 0.37 * x
    axpy(0.37, x, y, block=1 << 12)
    assert np.array_equal(y, want)


def test_removed_energy_is_the_sum_of_squares_of_the_difference():
    # Reference: NumPy's sum((x - c)**2), equal up to summation order (round-off).
    rng = np.random.default_rng(4)
    x = rng.standard_normal((700_001, 2))
    c = x[:, 0] * 0.9
    want = float(np.sum((x[:, 0] - c) ** 2))
    got = removed_energy(x[:, 0], c, block=1 << 14)            # a strided column too
    assert got == pytest.approx(want, rel=1e-12)
    assert got == removed_figures(x[:, 0], c, block=1 << 14)[0]   # the same blocked sum
