"""Qt event handlers that hand their own exceptions to the failure reporter.

An exception escaping a Python override of a Qt virtual method (``resizeEvent``) goes to
PySide6, which prints it and carries on; with PySide6 6.12 on CPython 3.11 that path
leaves a reference count wrong, and the interpreter crashes when it next collects garbage
(a ``--snapshot`` run ended in a segmentation fault at exit).  A handler wrapped here
catches the exception and gives it to ``sys.excepthook`` (``gui.failure_dialog``'s
reporter: a dialog and a log, or for a snapshot one line and exit 1) itself, so PySide6
never sees it.
"""

from __future__ import annotations

import functools
import sys


def reported(handler):
    """``handler(self, event)`` whose exceptions go to ``sys.excepthook``, not to PySide6."""

    @functools.wraps(handler)
    def guarded(self, event):
        try:
            return handler(self, event)
        except Exception:   # noqa: BLE001 - every bug is reported, none reaches PySide6
            sys.excepthook(*sys.exc_info())
            return None

    return guarded
