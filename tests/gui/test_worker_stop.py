"""The window's worker threads end with the window, however it goes away.

A QThread destroyed while it runs makes Qt abort the process ("QThread: Destroyed while
thread 'scalesieve-worker' is still running", then SIGABRT): a main window with a
recording loaded that was never closed did so at interpreter exit, and so did one deleted
without being closed.  ``gui.worker_stop.WorkerStop`` stops and waits for the model
adapter's threads at close, at deletion, at collection and at exit.  The whole-process
cases run in a separate process so that an abort shows as its exit status.
"""

from __future__ import annotations

import gc
import os
import subprocess
import sys
import threading
import weakref

import pytest

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")

UNCLOSED = """
import os, sys, tempfile
import shiboken6
from scalesieve.gui import window_settings as ws
from scalesieve.gui.app import make_application
from scalesieve.gui.main_window import MainWindow

app = make_application()
app.setProperty("scalesieve_quiet_errors", True)
w = MainWindow(ws.open_settings(os.path.join(tempfile.mkdtemp(), "s.ini")))
w.show()
w.open_path(sys.argv[1], ask_text_settings=False)
if sys.argv[2] == "idle":
    assert w.adapter.wait_idle(120) is None
else:
    app.processEvents()            # the recording is still being read and decomposed
thread = w.adapter._thread
if sys.argv[3] == "deleted":
    shiboken6.delete(w)            # gone without closeEvent
    print("running after delete:", thread.isRunning(), file=sys.stderr)
del thread
app.processEvents()
"""


@pytest.mark.parametrize("state", ["idle", "busy"])
@pytest.mark.parametrize("end", ["exit", "deleted"])
def test_an_unclosed_window_ends_without_an_abort(tmp_path, state, end):
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", SCALESIEVE_LOG_DIR=str(tmp_path / "logs"),
               SCALESIEVE_DATA_DIR=str(tmp_path / "data"))
    done = subprocess.run([sys.executable, "-X", "faulthandler", "-c", UNCLOSED, PUMP, state, end],
                          capture_output=True, text=True, timeout=300, env=env)
    assert done.returncode == 0, (done.returncode, done.stderr)    # not -6 (SIGABRT)
    assert "Destroyed while thread" not in done.stderr
    if end == "deleted":
        # the deletion itself stopped the worker, not only the end of the interpreter
        assert "running after delete: False" in done.stderr


def _band_threads():
    return [t for t in threading.enumerate() if t.name == "scalesieve-band-envelopes"]


def test_close_stops_and_joins_both_threads(window):
    window.open_path(PUMP, ask_text_settings=False)
    window.adapter.wait_idle(60, bands=False)
    adapter = window.adapter
    thread = adapter._thread
    window.close()
    assert not thread.isRunning()
    assert adapter._stop.stopped and adapter._stop.bands is None
    assert _band_threads() == []


def test_a_collected_adapter_stops_its_thread(qapp):
    from scalesieve.gui.model_adapter import ModelAdapter

    adapter = ModelAdapter()
    thread = adapter._thread
    stop = adapter._stop
    assert thread.isRunning() and not stop.stopped
    gone = weakref.ref(adapter)
    del adapter
    gc.collect()
    assert gone() is None
    assert stop.stopped and not thread.isRunning()


def test_a_deleted_adapter_stops_its_thread(qapp):
    import shiboken6

    from scalesieve.gui.model_adapter import ModelAdapter

    adapter = ModelAdapter()
    thread = adapter._thread
    shiboken6.delete(adapter)          # as a child of a window deleted unclosed
    assert adapter._stop.stopped and not thread.isRunning()


def test_the_stop_cancels_a_job_in_flight_and_waits_for_it(qapp):
    """A job that checks its cancel between steps ends at the next one, and the stop waits."""
    from PySide6.QtCore import QObject, QThread, Signal, Slot

    from scalesieve.gui.worker_stop import WorkerStop

    thread = QThread()
    stop = WorkerStop(thread)
    steps = []
    started = threading.Event()

    class Job(QObject):
        go = Signal()

        @Slot()
        def run(self):
            started.set()
            while not stop.stopped:
                steps.append(1)
                QThread.msleep(5)
            steps.append("ended")

    job = Job()
    job.moveToThread(thread)
    thread.start()
    job.go.connect(job.run)
    job.go.emit()
    assert started.wait(10)
    assert stop.stop() is True
    assert steps[-1] == "ended" and not thread.isRunning() and stop.thread is None
    assert stop.stop() is True         # a second call (deletion after close) does nothing
