"""Fixtures for driving the real window offscreen."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402

# What application start-up does first (make_application); widgets made by
# pytest-qt's own application need it too.
from scalesieve.gui.pyside_refcount_guard import guard_leaked_singletons  # noqa: E402

guard_leaked_singletons()


@pytest.fixture(autouse=True, scope="session")
def _collect_in_window_thread(qapp):
    """Cycle collection in the window's thread, as make_application sets it up."""
    from scalesieve.gui.window_thread_gc import collect_in_window_thread, stop

    collect_in_window_thread(qapp)
    yield
    stop()


@pytest.fixture
def window(qtbot, qapp, tmp_path):
    """A main window with its own settings file; error dialogs are recorded, not shown."""
    from scalesieve.gui import window_settings as ws
    from scalesieve.gui.app import make_application
    from scalesieve.gui.main_window import MainWindow

    app = make_application()
    app.setProperty("scalesieve_quiet_errors", True)
    app.setProperty("scalesieve_last_error", "")
    w = MainWindow(ws.open_settings(str(tmp_path / "settings.ini")))
    qtbot.addWidget(w)
    w.resize(1600, 1000)
    w.show()
    yield w
    w.close()                 # stops the worker thread
    w.deleteLater()
    app.processEvents()
    # Other tests share this application: leave it as it was.
    app.setProperty("scalesieve_quiet_errors", None)
    app.setProperty("scalesieve_last_error", None)
