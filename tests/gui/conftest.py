"""Fixtures for driving the real window offscreen."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402

SAMPLES = os.path.join(os.path.dirname(__file__), "..", "..", "sample_signals")


def sample(name: str) -> str:
    return os.path.normpath(os.path.join(SAMPLES, name))


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


def open_sample(window, name: str, timeout: float = 60.0):
    """Open a demo recording (audio directly, text with the reader's own settings)."""
    window.open_path(sample(name), ask_text_settings=False)
    problem = window.adapter.wait_idle(timeout)
    assert problem is None, problem
    return window.adapter.model
