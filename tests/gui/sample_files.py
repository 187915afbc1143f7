"""Where the demo recordings are, and opening one in a window under test."""

import os

SAMPLES = os.path.join(os.path.dirname(__file__), "..", "..", "sample_signals")


def sample(name: str) -> str:
    return os.path.normpath(os.path.join(SAMPLES, name))


def open_sample(window, name: str, timeout: float = 60.0):
    """Open a demo recording (audio directly, text with the reader's own settings)."""
    window.open_path(sample(name), ask_text_settings=False)
    problem = window.adapter.wait_idle(timeout)
    assert problem is None, problem
    return window.adapter.model
