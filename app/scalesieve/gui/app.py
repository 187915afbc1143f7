"""Start the window: the Qt application, looks, settings, and the ``--snapshot`` run."""

from __future__ import annotations

import os
import sys
import tempfile

#: the size --snapshot draws the window at (docs/reference.md)
SNAPSHOT_SIZE = (1600, 1000)


#: Qt messages that say nothing to a user (the offscreen platform cannot size windows)
QUIET_QT_MESSAGES = ("This plugin does not support propagateSizeHints()",)


def _qt_message(mode, context, message) -> None:
    if message in QUIET_QT_MESSAGES:
        return
    print(f"qt: {message}", file=sys.stderr)


NO_DISPLAY_HINT = ("--snapshot OUT.png and the subcommands (bands, clean, events, batch, ...) "
                   "work without a display")


def display_problem() -> str | None:
    """Why Qt could not open a window here (None when it can, as far as can be told).

    Qt itself aborts the process when its platform plugin cannot start; this
    looks first: a display to talk to, and the X11 plugin's libraries (loading
    the plugin's shared object names the first missing one).
    """
    platform = os.environ.get("QT_QPA_PLATFORM", "")
    if platform and not platform.startswith("xcb"):
        return None                    # offscreen, wayland, ...: Qt's own business
    if not sys.platform.startswith("linux"):
        return None
    if not platform and os.environ.get("WAYLAND_DISPLAY"):
        return None                    # Qt will use the Wayland plugin
    if not os.environ.get("DISPLAY"):
        return f"no display to open the window on (DISPLAY is not set); {NO_DISPLAY_HINT}"
    import ctypes

    import PySide6

    plugin = os.path.join(os.path.dirname(PySide6.__file__), "Qt", "plugins", "platforms",
                          "libqxcb.so")
    if not os.path.exists(plugin):
        return None
    try:
        ctypes.CDLL(plugin)
    except OSError as exc:
        missing = str(exc).split(":")[0].strip() or str(exc)
        return (f"the window needs the system library {missing} (Qt's X11 plugin cannot "
                f"load without it: install the package that provides it); "
                f"{NO_DISPLAY_HINT}")
    return _xcb_cursor_problem()


def _xcb_cursor_problem() -> str | None:
    """Qt 6.5 and later open libxcb-cursor only when the X11 plugin starts, and abort
    without it: the plugin's own libraries above do not name it."""
    import ctypes.util

    from PySide6 import QtCore

    major, minor = (int(v) for v in QtCore.qVersion().split(".")[:2])
    if (major, minor) < (6, 5) or ctypes.util.find_library("xcb-cursor"):
        return None
    return ("the window needs the system library libxcb-cursor.so.0 (Qt's X11 plugin "
            "cannot start without it: install the package that provides it, e.g. "
            f"libxcb-cursor0); {NO_DISPLAY_HINT}")


def make_application(argv: list[str] | None = None):
    """The one QApplication, with our names, style sheet and plotting defaults."""
    import pyqtgraph as pg
    from PySide6.QtWidgets import QApplication

    from scalesieve.freed_memory import keep_freed_memory
    from scalesieve.gui.pyside_refcount_guard import guard_leaked_singletons
    from scalesieve.gui.resource_files import colour, icon, style_sheet
    from scalesieve.gui.window_thread_gc import collect_in_window_thread

    guard_leaked_singletons()   # before the first signal: see the module for the versions
    app = QApplication.instance()
    if app is None:
        keep_freed_memory()     # an edit's temporaries are reused, not fresh pages each time
        app = QApplication(argv or [sys.argv[0] if sys.argv else "scalesieve"])
    collect_in_window_thread(app)   # never in a worker thread: see the module
    app.setOrganizationName("Scalesieve")
    app.setApplicationName("Scalesieve")
    pg.setConfigOptions(antialias=False, imageAxisOrder="row-major",
                        background=colour("plot", "background"),
                        foreground=colour("plot", "foreground"))
    sheet = style_sheet()
    if app.styleSheet() != sheet:
        # Setting it again would re-polish every widget there is.
        app.setStyleSheet(sheet)
    app.setWindowIcon(icon("app"))
    return app


def run_window(recording, transform, edits=(), *, snapshot: str | None = None,
               force: bool = False, size: tuple[int, int] = SNAPSHOT_SIZE,
               impacts: bool = False, band: str | None = None, bearing: str | None = None,
               shaft: float | None = None) -> int:
    """Open the window on ``recording`` (read and checked by the command already).

    ``transform`` and ``edits`` as the model takes them; ``snapshot``: draw
    offscreen at ``size``, write this PNG (replacing it only with ``force``)
    and return; ``impacts``, ``band``, ``bearing``, ``shaft``: the Impacts
    dock open, on this band, with this bearing's lines.
    """
    from scalesieve.errors import ScalesieveError

    if not snapshot:
        problem = display_problem()
        if problem:
            raise ScalesieveError(problem)
    if snapshot:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import qInstallMessageHandler

    qInstallMessageHandler(_qt_message)
    app = make_application()
    from scalesieve.gui import window_settings as ws

    tmp = None
    if snapshot:
        # A snapshot neither reads nor changes the user's settings (a throwaway
        # file, removed again at the end).
        app.setProperty("scalesieve_quiet_errors", True)
        app.setProperty("scalesieve_snapshot", True)
        tmp = tempfile.TemporaryDirectory(prefix="scalesieve-snap-")
        settings = ws.open_settings(os.path.join(tmp.name, "settings.ini"))
    else:
        settings = ws.open_settings()
    try:
        return _run(app, settings,
                    window_args=(recording, transform, tuple(edits), snapshot, force, size),
                    impacts=(impacts, band, bearing, shaft))
    finally:
        del settings
        if tmp is not None:
            tmp.cleanup()


def run_long_window(path: str, transform, edits=(), *, channel=None,
                    snapshot: str | None = None, force: bool = False,
                    size: tuple[int, int] = SNAPSHOT_SIZE) -> int:
    """Open the long-recording window on the audio file ``path`` (see gui/long_window.py)."""
    from scalesieve.errors import ScalesieveError
    from scalesieve.gui.failure_dialog import install_excepthook
    from scalesieve.gui.long_window import LongWindow

    if not snapshot:
        problem = display_problem()
        if problem:
            raise ScalesieveError(problem)
    else:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import qInstallMessageHandler

    qInstallMessageHandler(_qt_message)
    app = make_application()
    if snapshot:
        app.setProperty("scalesieve_quiet_errors", True)
        app.setProperty("scalesieve_snapshot", True)
    window = LongWindow(keep_sessions=not snapshot)
    reporter = install_excepthook(app, lambda: window)
    window.resize(*size)
    window.show()
    window.open_long(path, transform, edits, channel)
    # the cleaned trace of the whole view too
    return _finish(app, window, reporter, snapshot, force,
                   lambda: window.wait_idle(sweep=True))


def _run(app, settings, window_args, impacts) -> int:
    from scalesieve.gui.failure_dialog import install_excepthook
    from scalesieve.gui.main_window import MainWindow

    rec, spec, edits, snapshot, force, size = window_args
    window = MainWindow(settings)
    settings = None
    # A bug in a slot or the worker: a dialog and a log, never a traceback on screen.
    reporter = install_excepthook(app, lambda: window)
    if snapshot:
        window.resize(*size)
    if not snapshot:
        # Edits are kept after each change and offered back after a crash.
        from scalesieve.gui.session_keeper import SessionKeeper

        window.session_keeper = SessionKeeper(window)
    window.show()
    _impacts_options(window, *impacts)
    window.open_recording(rec, spec, edits)

    def settle():
        problem = window.adapter.wait_idle()
        if not problem:
            window.resize(*size)
        return problem

    return _finish(app, window, reporter, snapshot, force, settle)


class SnapshotFailed(RuntimeError):
    """The window failed while it drew a ``--snapshot``; ``log_path``: the reporter's log."""

    def __init__(self, message: str, log_path: str | None = None):
        super().__init__(message)
        self.log_path = log_path


def _finish(app, window, reporter, snapshot, force, settle) -> int:
    """Either save the snapshot once ``settle()`` reports no problem, or run the window.

    A snapshot during which the window failed (an exception in an event handler or a
    slot, which the reporter logged) writes no PNG and raises :class:`SnapshotFailed`;
    once the model is at rest the window is disposed of while Qt runs, however it ends.
    """
    from scalesieve.errors import ScalesieveError

    if not snapshot:
        code = int(app.exec())
        reporter.uninstall()
        _dispose(app, window)
        return code
    problem = settle()
    if problem:
        # the model did not come to rest: closed (its worker stopped), not deleted
        window.close()
        reporter.uninstall()
        app.setProperty("scalesieve_snapshot", None)
        raise ScalesieveError(problem)
    try:
        app.processEvents()                  # what the last resize left to do
        _refuse_after_failure(reporter, "no PNG was written")
        window.snapshot(snapshot, force=force)
        app.processEvents()
        _refuse_after_failure(reporter, f"{snapshot} may be incomplete")
        return 0
    finally:
        # what the disposal still runs (a resize left pending, a timer) goes to the log too
        _dispose(app, window)
        reporter.uninstall()
        app.setProperty("scalesieve_snapshot", None)


def _refuse_after_failure(reporter, what: str) -> None:
    """Raise :class:`SnapshotFailed` when the reporter (installed for this run) heard of a bug."""
    if reporter.unexpected:
        raise SnapshotFailed(f"the window failed while drawing the snapshot "
                             f"({reporter.last_error}); {what}", reporter.last_log_path)


def _impacts_options(window, impacts: bool, band: str | None, bearing: str | None,
                     shaft: float | None) -> None:
    """``--impacts``, ``--band``, ``--bearing`` and ``--shaft``: the Impacts dock set up."""
    if not (impacts or bearing or band):
        return
    dock = window.impacts_dock
    if band:
        dock.envelope.band = band
    if bearing:
        dock.envelope.geometry.setText(bearing)
        dock.envelope.shaft.setValue(float(shaft))
    dock.show()


def _dispose(app, window) -> None:
    """Close and delete the window while Qt still runs, not at interpreter exit."""
    import shiboken6

    window.close()
    app.processEvents()
    if shiboken6.isValid(window):
        shiboken6.delete(window)
    app.processEvents()
