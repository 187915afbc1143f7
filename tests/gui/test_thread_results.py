"""Background runs whose owner is deleted as they finish: dropped, never a crash.

A Python thread emitted a signal of its owner (``BackgroundRun._done``) while the window's
thread deleted that owner, and the process died in the emit (measured before the fix: the
loop below ended in SIGSEGV in 5 runs of 6).  The result now travels through
``gui.thread_results.post``, whose signal belongs to an object that lives as long as the
program.  The loop runs in a separate process so that a crash shows as its exit status.
"""

from __future__ import annotations

import os
import subprocess
import sys
import threading

RACE = """
import sys, threading
import shiboken6
from PySide6.QtCore import QCoreApplication
from PySide6.QtWidgets import QApplication, QWidget
from scalesieve.gui.pyside_refcount_guard import guard_leaked_singletons

guard_leaked_singletons()
app = QApplication([])
from scalesieve.gui.background_run import BackgroundRun

got = []
for i in range(int(sys.argv[1])):
    owner = QWidget()
    run = BackgroundRun("race", owner)
    run.finished.connect(lambda key, result, problem: got.append(key))
    go = threading.Event()
    run.request(i, lambda check: go.wait())
    go.set()                       # the run ends ...
    shiboken6.delete(owner)        # ... while its owner is deleted
    del run, owner
kept = QWidget()
run = BackgroundRun("kept", kept)
run.finished.connect(lambda key, result, problem: got.append(key))
run.request("last", lambda check: 42)
for _ in range(2000):
    QCoreApplication.processEvents()
    if "last" in got:
        break
    threading.Event().wait(0.005)
print("delivered:", got, file=sys.stderr)
"""


def test_owners_deleted_as_their_runs_end_do_not_crash_the_process(tmp_path):
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    done = subprocess.run([sys.executable, "-X", "faulthandler", "-c", RACE, "3000"],
                          capture_output=True, text=True, timeout=300, env=env)
    assert done.returncode == 0, (done.returncode, done.stderr[-3000:])   # not -11 (SIGSEGV)
    # the deleted owners heard nothing; the one still there heard its result
    assert "delivered: ['last']" in done.stderr, done.stderr[-3000:]


def test_a_post_runs_in_the_window_thread_and_skips_a_deleted_receiver(qtbot):
    import shiboken6
    from PySide6.QtCore import QObject

    from scalesieve.gui.thread_results import post

    class Receiver(QObject):
        def __init__(self):
            super().__init__()
            self.heard = []

        def take(self, *args):
            self.heard.append((args, threading.current_thread() is threading.main_thread()))

    alive, gone = Receiver(), Receiver()
    worker = threading.Thread(target=lambda: (post(alive.take, 1, "a"), post(gone.take, 2)))
    worker.start()
    worker.join()
    shiboken6.delete(gone)
    qtbot.waitUntil(lambda: bool(alive.heard), timeout=5000)
    qtbot.wait(20)
    assert alive.heard == [((1, "a"), True)]          # once, in the window's thread
    assert gone.heard == []
