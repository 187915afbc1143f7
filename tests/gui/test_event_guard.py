"""Exceptions inside the window's Qt event handlers: one clear report, never a crash.

An exception escaping a Python override of a Qt virtual method goes to PySide6, which
prints "Error calling Python override of ..." and carries on; with PySide6 6.12 on
CPython 3.11 that leaves a reference count wrong and the interpreter can die with a
segmentation fault when it next collects garbage (measured: a widget whose paintEvent or
resizeEvent raised during ``app.exec()`` ended in SIGSEGV in ``gc.collect()``).  Each
override is wrapped by ``gui.event_guard`` so that PySide6 never sees the exception.

The faults are put in by patching what a handler calls, in a separate process so that a
crash shows as its exit status.  CONTRACT.md: exit 1 is an unexpected failure, with a
short message and a log.
"""

from __future__ import annotations

import os
import subprocess
import sys

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")

FAULTY_PAINT = """
import sys
from scalesieve.gui.row_headers import ShareBar

def broken(self, *args, **kwargs):
    raise ValueError("a painting fault put in by the test")

ShareBar.text = broken            # ShareBar.paintEvent calls it for every band's bar
from scalesieve.cli import main
sys.exit(main(sys.argv[1:]))
"""


def _run(code: str, tmp_path, *args: str) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", SCALESIEVE_LOG_DIR=str(tmp_path / "logs"),
               SCALESIEVE_DATA_DIR=str(tmp_path / "data"))
    return subprocess.run([sys.executable, "-X", "faulthandler", "-c", code, *args],
                          capture_output=True, text=True, timeout=300, env=env)


def test_a_paint_fault_is_one_line_one_log_and_a_clean_exit(tmp_path):
    png = tmp_path / "look.png"
    done = _run(FAULTY_PAINT, tmp_path, PUMP, "--snapshot", str(png),
                "--snapshot-size", "640x480")
    assert done.returncode == 1, (done.returncode, done.stderr)   # not -11 (SIGSEGV)
    assert "Python override" not in done.stderr                    # PySide6 never saw it
    err = [ln for ln in done.stderr.splitlines() if ln]
    assert len(err) == 1, err
    assert err[0].startswith("scalesieve: unexpected failure: the window failed while drawing "
                             "the snapshot (ValueError: a painting fault put in by the test); "
                             "no PNG was written; details in ")
    # every band's bar failed on every repaint: one report, not one per bar and frame
    logs = os.listdir(tmp_path / "logs")
    assert len(logs) == 1, logs
    assert "a painting fault" in (tmp_path / "logs" / logs[0]).read_text()
    assert not png.exists()


# ------------------------------------------------------------------ in this process

import ast  # noqa: E402
import glob  # noqa: E402

import pytest  # noqa: E402


@pytest.fixture
def heard(monkeypatch):
    """What reaches ``sys.excepthook`` (the failure reporter's place), with a fresh record
    of faults already reported."""
    from scalesieve.gui import event_guard

    got = []
    monkeypatch.setattr(sys, "excepthook", lambda *info: got.append(info))
    monkeypatch.setattr(event_guard, "_seen", {})
    return got


def test_nothing_raised_is_nothing_changed(heard):
    from scalesieve.gui.event_guard import reported

    class Pane:
        @reported(fallback=False, once=True)
        def eventFilter(self, obj, ev, *, extra=0):     # noqa: N802 - Qt's name
            """The doc."""
            return (obj, ev, extra)

    p = Pane()
    assert p.eventFilter("o", "e", extra=3) == ("o", "e", 3)
    assert Pane.eventFilter.__name__ == "eventFilter" and Pane.eventFilter.__doc__ == "The doc."
    assert heard == []


def test_a_fault_goes_to_the_hook_and_the_fallback_to_qt(heard):
    from scalesieve.gui.event_guard import reported

    class Table:
        @reported(fallback=0)
        def rowCount(self, parent=None):                # noqa: N802 - Qt's name
            raise KeyError("rows")

    assert Table().rowCount() == 0
    assert Table().rowCount() == 0                      # reported each time (not once)
    assert [h[0] for h in heard] == [KeyError, KeyError]


def test_a_once_handler_reports_each_fault_once_and_counts_its_repeats(heard):
    from scalesieve.gui import event_guard
    from scalesieve.gui.event_guard import reported

    class Bar:
        @reported(once=True)
        def paintEvent(self, ev):                       # noqa: N802 - Qt's name
            if ev == "other":
                raise ValueError("another fault")
            raise ValueError("a fault")

    bar = Bar()
    for _ in range(50):                                 # fifty frames
        bar.paintEvent("frame")
    assert len(heard) == 1 and str(heard[0][1]) == "a fault"
    assert event_guard.repeats(Bar.paintEvent) == 49
    Bar().paintEvent("frame")                           # another bar, the same fault
    assert len(heard) == 1
    bar.paintEvent("other")                             # another fault: reported
    assert len(heard) == 2 and str(heard[1][1]) == "another fault"


def test_a_failing_hook_does_not_reach_qt(monkeypatch, capsys):
    from scalesieve.gui.event_guard import reported

    def broken_hook(*info):
        raise RuntimeError("the hook failed")

    monkeypatch.setattr(sys, "excepthook", broken_hook)

    @reported
    def handler(ev):
        raise ValueError(ev)

    assert handler("ev") is None
    assert "error while reporting an error: the hook failed" in capsys.readouterr().err


def test_a_failed_paint_ends_its_painter_and_the_next_frame_paints(qtbot, heard, monkeypatch):
    """QPainter begun, then a fault: the painter is ended before Qt ends the frame (else
    Qt warns "endPaint() called with active painter" and the device cannot be destroyed)."""
    from PySide6.QtCore import qInstallMessageHandler

    from scalesieve.gui.elided_label import ElidedLabel

    label = ElidedLabel("a band name long enough to be cut")
    qtbot.addWidget(label)
    label.resize(80, 20)
    said = []
    previous = qInstallMessageHandler(lambda mode, ctx, text: said.append(text))
    try:
        shown_text = ElidedLabel.shown_text
        monkeypatch.setattr(ElidedLabel, "shown_text", lambda self: 1 / 0)
        label.grab()
        label.grab()
        monkeypatch.setattr(ElidedLabel, "shown_text", shown_text)
        label.grab()                                   # paints as before
    finally:
        qInstallMessageHandler(previous)
    assert [h[0] for h in heard] == [ZeroDivisionError]     # two failed frames, one report
    assert not [t for t in said if "paint" in t.lower()], said


#: Qt and pyqtgraph virtual methods a class in the window may override (beside any
#: ``...Event`` and ``eventFilter``)
QT_VIRTUALS = {"event", "paint", "boundingRect", "shape", "data", "setData", "rowCount",
               "columnCount", "headerData", "flags", "index", "parent", "filterAcceptsRow",
               "lessThan", "sizeHint", "minimumSizeHint", "createEditor", "setEditorData",
               "setModelData", "updateEditorGeometry", "itemChange", "timerEvent"}


def _is_guard(decorator) -> bool:
    target = decorator.func if isinstance(decorator, ast.Call) else decorator
    return isinstance(target, ast.Name) and target.id == "reported"


def test_every_qt_override_of_the_window_is_guarded():
    missing = []
    for path in sorted(glob.glob(os.path.join(ROOT, "app", "scalesieve", "gui", "*.py"))):
        tree = ast.parse(open(path, encoding="utf-8").read())
        for cls in (n for n in ast.walk(tree) if isinstance(n, ast.ClassDef)):
            for f in cls.body:
                if not isinstance(f, ast.FunctionDef):
                    continue
                if (f.name.endswith("Event") or f.name == "eventFilter"
                        or f.name in QT_VIRTUALS):
                    if not any(_is_guard(d) for d in f.decorator_list):
                        missing.append(f"{os.path.basename(path)}: {cls.name}.{f.name}")
    assert missing == []
