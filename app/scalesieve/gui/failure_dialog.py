"""Unexpected errors in the window: a short message, the details a click away, and a log.

:func:`install_excepthook` routes every exception that escapes a Qt slot,
event handler or worker thread to a :class:`FailureDialog`: one short line
for the user, a "Show details" section with the traceback, and the path of a
log file (in platformdirs' ``user_log_dir("scalesieve")``, or
``$SCALESIEVE_LOG_DIR``) that holds the same details.  The program keeps
running: the exception ends only the slot it escaped from.

A burst of failures (a paint handler that raises on every repaint) opens one
dialog, which counts the rest; each is still logged.  Bad input that escapes
(:class:`~scalesieve.errors.ScalesieveError`) gets the same dialog with its
one-line message and no log, as it is not a bug.
"""

from __future__ import annotations

import sys
import threading
from collections.abc import Callable

from PySide6.QtCore import QObject, Qt, Signal, Slot
from PySide6.QtGui import QGuiApplication
from PySide6.QtWidgets import (QApplication, QDialog, QDialogButtonBox, QHBoxLayout, QLabel,
                               QPlainTextEdit, QPushButton, QVBoxLayout, QWidget)

from scalesieve.errors import ScalesieveError
# one writer of failure logs, whose names stay importable here
from scalesieve.failure_log import (KEEP_LOGS, LOG_DIR_ENV, details_text,  # noqa: F401
                                    log_dir, write_log)

_MESSAGE_CHARS = 200


def short_message(exc: BaseException) -> str:
    """The one line a user reads first."""
    if isinstance(exc, ScalesieveError):
        return exc.one_line()
    if isinstance(exc, MemoryError):
        return ("Not enough memory for that. Try one channel or a shorter recording; "
                "your edits are kept.")
    text = " ".join(str(exc).split()) or type(exc).__name__
    if len(text) > _MESSAGE_CHARS:
        text = text[:_MESSAGE_CHARS - 1] + "…"
    return (f"Something went wrong ({type(exc).__name__}: {text}). "
            "The program is still running and your edits are kept.")


class FailureDialog(QDialog):
    """A short message, a details section shown on request, and where the log is."""

    def __init__(self, message: str, details: str = "", log_path: str | None = None,
                 parent: QWidget | None = None, *, unexpected: bool = True):
        super().__init__(parent)
        self.setObjectName("failureDialog")
        self.setWindowTitle("Scalesieve: something went wrong" if unexpected
                            else "Scalesieve")
        self.setModal(False)
        self._repeats = 0
        layout = QVBoxLayout(self)
        self.message_label = QLabel(message)
        self.message_label.setObjectName("failureMessage")
        self.message_label.setTextFormat(Qt.TextFormat.PlainText)
        self.message_label.setWordWrap(True)
        layout.addWidget(self.message_label)

        self.repeat_label = QLabel("")
        self.repeat_label.setObjectName("failureRepeats")
        self.repeat_label.setVisible(False)
        layout.addWidget(self.repeat_label)

        self.log_label = QLabel()
        self.log_label.setObjectName("failureLogPath")
        self.log_label.setTextFormat(Qt.TextFormat.PlainText)
        self.log_label.setWordWrap(True)
        self.log_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        if log_path:
            self.log_label.setText(f"Details saved to {log_path}")
        elif unexpected:
            self.log_label.setText("The details could not be saved to a log file; "
                                   "copy them from below.")
        self.log_label.setVisible(bool(self.log_label.text()))
        layout.addWidget(self.log_label)

        self.details_edit = QPlainTextEdit(details)
        self.details_edit.setObjectName("failureDetails")
        self.details_edit.setReadOnly(True)
        self.details_edit.setLineWrapMode(QPlainTextEdit.LineWrapMode.NoWrap)
        self.details_edit.setMinimumHeight(180)
        self.details_edit.setVisible(False)

        row = QHBoxLayout()
        self.details_button = QPushButton("Show details")
        self.details_button.setObjectName("detailsToggle")
        self.details_button.setCheckable(True)
        self.details_button.toggled.connect(self._show_details)
        self.details_button.setEnabled(bool(details))
        self.copy_button = QPushButton("Copy details")
        self.copy_button.setObjectName("copyDetails")
        self.copy_button.clicked.connect(self.copy_details)
        self.copy_button.setEnabled(bool(details))
        row.addWidget(self.details_button)
        row.addWidget(self.copy_button)
        row.addStretch(1)
        layout.addLayout(row)
        layout.addWidget(self.details_edit)

        buttons = QDialogButtonBox()
        self.continue_button = buttons.addButton("Continue",
                                                 QDialogButtonBox.ButtonRole.AcceptRole)
        self.continue_button.setObjectName("continueButton")
        self.continue_button.setDefault(True)
        buttons.accepted.connect(self.accept)
        layout.addWidget(buttons)

    @Slot(bool)
    def _show_details(self, shown: bool) -> None:
        self.details_edit.setVisible(shown)
        self.details_button.setText("Hide details" if shown else "Show details")
        self.adjustSize()

    @Slot()
    def copy_details(self) -> None:
        QGuiApplication.clipboard().setText(self.details_edit.toPlainText())

    def add_repeat(self, details: str = "") -> None:
        """Another failure happened while this dialog was open."""
        self._repeats += 1
        n = self._repeats
        self.repeat_label.setText(f"{n} more error{'s' if n != 1 else ''} happened since; "
                                  "each is in its own log.")
        self.repeat_label.setVisible(True)
        if details:
            self.details_edit.appendPlainText("\n" + "-" * 60 + "\n" + details)
            self.details_button.setEnabled(True)
            self.copy_button.setEnabled(True)

    @property
    def repeats(self) -> int:
        return self._repeats


class FailureReporter(QObject):
    """Receives escaped exceptions from any thread and shows them in the GUI thread."""

    _report = Signal(str, str, str, bool)  # message, details, log path, unexpected

    def __init__(self, app: QApplication, parent=None):
        super().__init__()
        self.moveToThread(app.thread())
        self._app = app
        self._parent = parent
        self.dialog: FailureDialog | None = None
        self.count = 0
        self.last_log_path: str | None = None
        self.last_message: str | None = None
        #: unexpected failures (bugs, not bad input) heard of, and the last as ``Type: text``
        self.unexpected = 0
        self.last_error: str | None = None
        self._previous_hook = None
        self._previous_thread_hook = None
        self._handling = threading.local()
        self._report.connect(self._show, Qt.ConnectionType.QueuedConnection)

    # -------------------------------------------------------------- hooks

    def install(self) -> "FailureReporter":
        self._previous_hook = sys.excepthook
        self._previous_thread_hook = threading.excepthook
        sys.excepthook = self.excepthook
        threading.excepthook = self._thread_hook
        return self

    def uninstall(self) -> None:
        if sys.excepthook == self.excepthook and self._previous_hook is not None:
            sys.excepthook = self._previous_hook
        if threading.excepthook == self._thread_hook and self._previous_thread_hook is not None:
            threading.excepthook = self._previous_thread_hook

    def _thread_hook(self, args) -> None:
        if args.exc_type is SystemExit:
            return
        self.excepthook(args.exc_type, args.exc_value, args.exc_traceback)

    def excepthook(self, etype, value, tb) -> None:
        """Log the exception and show it; never raises (it runs inside Qt's event loop)."""
        if issubclass(etype, (KeyboardInterrupt, SystemExit)):
            (self._previous_hook or sys.__excepthook__)(etype, value, tb)
            return
        if getattr(self._handling, "busy", False):
            # The reporter itself failed: one line on stderr, no loop.
            print(f"scalesieve: error while reporting an error: {etype.__name__}: {value}",
                  file=sys.stderr)
            return
        self._handling.busy = True
        try:
            if value is None:
                value = etype()
            unexpected = not isinstance(value, ScalesieveError)
            message = short_message(value)
            details = details_text(etype, value, tb) if unexpected else ""
            log = write_log(details) if unexpected else None
            self.count += 1
            self.last_log_path = log or self.last_log_path
            self.last_message = message
            if unexpected:
                self.unexpected += 1
                self.last_error = f"{etype.__name__}: {' '.join(str(value).split())}"[:300]
            # Queued: shown by the GUI thread whichever thread failed, after the
            # failing slot has unwound.
            self._report.emit(message, details, log or "", unexpected)
        except Exception as exc:  # a failing reporter must not take the window down
            print(f"scalesieve: error while reporting an error: {exc}", file=sys.stderr)
        finally:
            self._handling.busy = False

    # ------------------------------------------------------------- showing

    def _parent_widget(self) -> QWidget | None:
        p = self._parent
        if callable(p) and not isinstance(p, QWidget):
            try:
                p = p()
            except Exception:
                p = None
        return p if isinstance(p, QWidget) else None

    @Slot(str, str, str, bool)
    def _show(self, message: str, details: str, log: str, unexpected: bool) -> None:
        try:
            if unexpected and self._app.property("scalesieve_snapshot"):
                return      # the snapshot's own end says it, in one line (gui.app._finish)
            if self._app.property("scalesieve_quiet_errors"):
                # Offscreen snapshots cannot click a dialog away: one line instead.
                self._app.setProperty("scalesieve_last_error", message)
                where = f"; details in {log}" if log else ""
                print(f"scalesieve: error: {message}{where}", file=sys.stderr)
                return
            if self.dialog is not None and self.dialog.isVisible():
                self.dialog.add_repeat(details)
                return
            self.dialog = FailureDialog(message, details, log or None, self._parent_widget(),
                                        unexpected=unexpected)
            self.dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose, False)
            # open(), not exec(): the event loop, and with it the program, runs on.
            self.dialog.open()
        except Exception as exc:
            print(f"scalesieve: {message} (the error dialog failed too: {exc})",
                  file=sys.stderr)


def install_excepthook(app: QApplication,
                       parent: QWidget | Callable[[], QWidget | None] | None = None
                       ) -> FailureReporter:
    """Route exceptions escaping the Qt event loop (and worker threads) to a dialog and a log.

    Parameters
    ----------
    app : QApplication
    parent : QWidget or callable returning one, optional
        The dialog's parent: the main window, or a function that returns it
        (so the hook can be installed before the window exists).

    Returns
    -------
    FailureReporter
        Keep a reference (it is the hook's owner); ``uninstall()`` restores
        the previous hooks; ``count``, ``last_log_path`` and ``dialog`` tell
        what was reported.
    """
    reporter = FailureReporter(app, parent)
    return reporter.install()
