"""Errors as dialogs: the command line's one-line message, never a traceback.

Bad input (a :class:`ScalesieveError`) shows exactly the line the command
line prints after ``scalesieve: error:``.  Anything else is a bug: the user
sees one line and the path of a log holding the details.  (Exceptions that
escape a slot go to ``failure_dialog``'s hook, installed by ``app``.)
"""

from __future__ import annotations

import datetime
import os
import sys
import traceback

from scalesieve import __version__
from scalesieve.errors import ScalesieveError


def write_failure_log(exc: BaseException, details: str | None = None) -> str:
    """Write the details of an unexpected failure; return '; details in PATH' (or '')."""
    try:
        try:
            from platformdirs import user_log_dir

            folder = user_log_dir("scalesieve", appauthor=False)
        except Exception:  # platformdirs missing or broken: a temporary folder will do
            import tempfile

            folder = os.path.join(tempfile.gettempdir(), "scalesieve-logs")
        os.makedirs(folder, exist_ok=True)
        stamp = datetime.datetime.now().strftime("%Y%m%d-%H%M%S")
        path = os.path.join(folder, f"window-failure-{stamp}-{os.getpid()}.log")
        text = details or "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(f"scalesieve {__version__} (window)\nargv: {sys.argv!r}\n\n{text}")
        return f"; details in {path}"
    except OSError:
        return ""


def message_for(exc: BaseException) -> str:
    """The one line a user sees for ``exc``."""
    if isinstance(exc, ScalesieveError):
        return exc.one_line()
    if isinstance(exc, MemoryError):
        return "not enough memory for this recording; try one channel or a shorter file"
    return f"unexpected failure: {type(exc).__name__}: {exc}{write_failure_log(exc)}"


def show_error(parent, message: str, title: str = "Scalesieve") -> None:
    """A modal dialog with one line of text (offscreen runs only log it)."""
    from PySide6.QtCore import Qt
    from PySide6.QtWidgets import QApplication, QMessageBox

    app = QApplication.instance()
    if app is not None and app.property("scalesieve_quiet_errors"):
        # Snapshots and tests cannot click a dialog away; they read the line instead
        # (a snapshot ends with it as the command line's error).
        app.setProperty("scalesieve_last_error", message)
        return
    box = QMessageBox(QMessageBox.Icon.Warning, title, message, QMessageBox.StandardButton.Ok,
                      parent)
    box.setTextFormat(Qt.TextFormat.PlainText)
    box.exec()
