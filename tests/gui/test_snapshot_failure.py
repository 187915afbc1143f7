"""A ``--snapshot`` during which the window fails: one line, exit 1, no PNG, no crash at exit.

An exception that escaped a Python ``resizeEvent`` went to PySide6 (6.12 on CPython 3.11),
which left a reference count wrong: the snapshot was written, nothing was said, and the
interpreter died with a segmentation fault collecting garbage at exit.  The handlers now
report their own exceptions (``gui.event_guard.reported``).  The fault is put in by
patching what a resize handler calls, in a separate process so that a crash shows as its
exit status.  CONTRACT.md: 1 is an unexpected failure, with a short message and a log.
"""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")

FAULTY = """
import sys
from scalesieve.gui.{module} import {cls}

def broken(self, *args, **kwargs):
    raise ValueError("a drawing fault put in by the test")

{cls}.{method} = broken
from scalesieve.cli import main
sys.exit(main(sys.argv[1:]))
"""


@pytest.mark.parametrize("module, cls, method", [
    ("overview_strip", "OverviewStrip", "redraw"),     # OverviewStrip.resizeEvent calls it
    ("window_toolbars", "WindowToolbars", "fit"),      # MainWindow.resizeEvent calls it
])
def test_a_fault_in_a_resize_handler_is_one_line_and_a_clean_exit(tmp_path, module, cls, method):
    png = tmp_path / "look.png"
    logs = tmp_path / "logs"
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", SCALESIEVE_LOG_DIR=str(logs),
               SCALESIEVE_DATA_DIR=str(tmp_path / "data"))
    code = FAULTY.format(module=module, cls=cls, method=method)
    done = subprocess.run([sys.executable, "-X", "faulthandler", "-c", code, PUMP,
                           "--snapshot", str(png), "--snapshot-size", "640x480"],
                          capture_output=True, text=True, timeout=300, env=env)
    assert done.returncode == 1, (done.returncode, done.stderr)   # not -11 (SIGSEGV)
    err = [ln for ln in done.stderr.splitlines() if ln]
    assert len(err) == 1, err
    assert err[0].startswith("scalesieve: unexpected failure: the window failed while drawing "
                             "the snapshot (ValueError: a drawing fault put in by the test); "
                             "no PNG was written; details in ")
    log = err[0].rsplit("details in ", 1)[1]
    assert os.path.dirname(log) == str(logs) and "a drawing fault" in open(log).read()
    assert not png.exists()


def test_a_reported_handler_hands_its_exception_to_the_hook(monkeypatch):
    from scalesieve.gui.event_guard import reported

    heard = []
    monkeypatch.setattr(sys, "excepthook", lambda *info: heard.append(info))

    class Pane:
        @reported
        def resizeEvent(self, ev):      # noqa: N802 - Qt's name
            raise KeyError(ev)

    assert Pane().resizeEvent("ev") is None            # nothing escapes to PySide6
    assert len(heard) == 1 and heard[0][0] is KeyError and heard[0][1].args == ("ev",)
