"""Python's cycle collector runs in the window's thread only, while the window lives.

CPython collects reference cycles in whichever thread happens to allocate
when a generation's count passes its threshold.  The panes of a closed
window, plot items and their menus form such cycles; when a worker thread
(a band envelope, a restore check, a transform) is the one that collects
them, Qt destructors run in that thread while the window's thread uses the
same objects.  Measured with PySide6 6.12.0 on CPython 3.11: the GUI tests
run in order died with SIGSEGV in two runs of three, and under gdb hung
with the window's thread deleting a widget handed over by the collector and
the worker deleting a QObject, each waiting for the other's lock.

So :func:`collect_in_window_thread` turns automatic collection off while
the application lives, and a timer in the window's thread collects what is
due (:func:`collect_due`, the interpreter's own thresholds) every
``INTERVAL_MS``.  When the application is about to quit, automatic
collection comes back.  Plain reference counting (most of what is freed) is
not affected.  Importing this module needs no Qt.
"""

from __future__ import annotations

import gc

#: how often the window's thread looks for due collections (ms)
INTERVAL_MS = 250
_timer = None


def collect_due() -> int | None:
    """Collect the oldest generation whose count passed its threshold, as CPython would.

    The generation collected, or None when nothing was due.  Cheap when nothing is.
    """
    counts, limits = gc.get_count(), gc.get_threshold()
    due = [g for g in range(3) if limits[g] and counts[g] > limits[g]]
    if not due:
        return None
    gen = due[-1]
    gc.collect(gen)
    return gen


def active() -> bool:
    """The window's thread collects (automatic collection is off)."""
    return _timer is not None


def collect_in_window_thread(app) -> None:
    """Move cycle collection to ``app``'s thread for as long as it runs (idempotent).

    Call from the window's thread, after the application exists.
    """
    global _timer
    if _timer is not None:
        return
    from PySide6.QtCore import QTimer

    timer = QTimer(app)
    timer.setInterval(INTERVAL_MS)
    timer.timeout.connect(collect_due)
    timer.start()
    app.aboutToQuit.connect(stop)
    _timer = timer
    gc.disable()


def stop() -> None:
    """Back to automatic collection (the application quits)."""
    global _timer
    timer, _timer = _timer, None
    if timer is not None:
        try:
            timer.stop()
        except RuntimeError:       # the application went first
            pass
    gc.enable()
    gc.collect()
