"""About: versions of everything the numbers depend on, and the usual cautions."""

from __future__ import annotations

import platform

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDialog, QDialogButtonBox, QLabel, QVBoxLayout

from scalesieve import __version__

CAUTIONS = (
    "Hearing: recordings with clicks, knocks or impacts can be far louder than their "
    "background. Keep the volume low when you start playback, especially on headphones.",
    "Physiological traces: Scalesieve is for research and teaching. It is not a medical "
    "device; its results are not a diagnosis and must not guide clinical decisions.",
    "Machines and structures: what a recording seems to show is no verdict on a machine. "
    "Decisions follow the applicable standards and are made by qualified people.",
    "Live electrical measurements (mains, drives) are made only by qualified people.",
)


def versions() -> list[tuple[str, str]]:
    """(name, version) of Scalesieve and the libraries it runs on."""
    out = [("Scalesieve", __version__), ("Python", platform.python_version())]
    for name, mod in (("NumPy", "numpy"), ("PyWavelets", "pywt"), ("soundfile", "soundfile"),
                      ("PySide6", "PySide6"), ("pyqtgraph", "pyqtgraph")):
        try:
            m = __import__(mod)
            out.append((name, str(getattr(m, "__version__", "?"))))
        except Exception:  # a library that does not load has no version to show
            out.append((name, "not available"))
    try:
        from PySide6.QtCore import qVersion

        out.append(("Qt", qVersion()))
    except Exception:  # PySide6 without QtCore cannot happen here; keep the dialog alive
        pass
    try:
        import sounddevice

        out.append(("sounddevice", sounddevice.__version__))
    except Exception:  # optional
        out.append(("sounddevice", "not installed (playback off)"))
    return out


class AboutDialog(QDialog):
    def __init__(self, parent=None):
        super().__init__(parent)
        self.setWindowTitle("About Scalesieve")
        self.setMinimumWidth(520)
        lay = QVBoxLayout(self)
        head = QLabel(f"<h2>Scalesieve {__version__}</h2>"
                      "<p>See a recording at each time scale and clean it, with an exact "
                      "record of what was removed.</p>")
        head.setWordWrap(True)
        lay.addWidget(head)
        rows = "".join(f"<tr><td>{n}</td><td>&nbsp;&nbsp;{v}</td></tr>" for n, v in versions())
        table = QLabel(f"<table>{rows}</table>")
        table.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        lay.addWidget(table)
        caution = QLabel("<b>Cautions</b><ul>" + "".join(f"<li>{c}</li>" for c in CAUTIONS)
                         + "</ul>")
        caution.setWordWrap(True)
        lay.addWidget(caution)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.reject)
        buttons.accepted.connect(self.accept)
        lay.addWidget(buttons)
