"""Errors as dialogs: the command line's one-line message, never a traceback.

Bad input (a :class:`ScalesieveError`) shows exactly the line the command
line prints after ``scalesieve: error:``.  Anything else is a bug: the user
sees one line and the path of a log holding the details.  (Exceptions that
escape a slot go to ``failure_dialog``'s hook, installed by ``app``.)
"""

from __future__ import annotations

from scalesieve.errors import ScalesieveError


def write_failure_log(exc: BaseException, details: str | None = None) -> str:
    """Log an unexpected failure (``scalesieve.failure_log``); '; details in PATH' or ''."""
    from scalesieve.failure_log import log_exception

    path = log_exception(exc, "window", details)
    return f"; details in {path}" if path else ""


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
