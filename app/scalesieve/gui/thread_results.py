"""Results of Python worker threads handed to the window's thread without racing deletion.

A Python thread that emits a signal of an object the window owns races that object's
deletion: the window's thread may be deleting it (a window closed and deleted, a pane
gone) while the emit runs, and the process dies in the emit (SIGSEGV; measured: an
object deleted as its background run finished crashed two runs in three of 3000).
Threads :func:`post` here instead: the signal belongs to one object that lives as long
as the program, and in the window's thread the result goes to its receiver only if the
receiver still exists.
"""

from __future__ import annotations

import threading

import shiboken6
from PySide6.QtCore import QCoreApplication, QObject, Qt, Signal

_lock = threading.Lock()
_relay = None


class _Relay(QObject):
    carry = Signal(object, object)      # bound method, arguments

    def __init__(self):
        super().__init__()
        self.carry.connect(self._deliver, Qt.ConnectionType.QueuedConnection)

    def _deliver(self, method, args) -> None:
        owner = getattr(method, "__self__", None)
        if owner is not None and not shiboken6.isValid(owner):
            return                        # deleted meanwhile: nobody waits for this
        method(*args)


def relay() -> _Relay:
    """The one relay, living in the application's thread (made on first use)."""
    global _relay
    with _lock:
        if _relay is None:
            r = _Relay()
            app = QCoreApplication.instance()
            if app is not None:
                r.moveToThread(app.thread())
            _relay = r
        return _relay


def post(method, *args) -> None:
    """Call ``method(*args)`` in the window's thread, unless ``method``'s Qt object has
    been deleted by then; safe from any thread."""
    relay().carry.emit(method, args)
