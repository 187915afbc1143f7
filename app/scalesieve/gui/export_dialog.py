"""Export the cleaned or removed signal: what, format, sample format, where."""

from __future__ import annotations

import os

from PySide6.QtWidgets import (QComboBox, QDialog, QDialogButtonBox, QFileDialog, QFormLayout,
                               QHBoxLayout, QLabel, QLineEdit, QPushButton, QVBoxLayout)

FORMATS = (("wav", "WAV"), ("flac", "FLAC"), ("csv", "CSV (time_s + one column per channel)"))
#: sample formats offered per container (None: keep the input's, as `clean` does)
SUBTYPES = {
    "wav": ((None, "as the input (or 32-bit float)"), ("PCM_16", "16-bit integer"),
            ("PCM_24", "24-bit integer"), ("PCM_32", "32-bit integer"),
            ("FLOAT", "32-bit float"), ("DOUBLE", "64-bit float")),
    "flac": ((None, "as the input (or 24-bit)"), ("PCM_16", "16-bit integer"),
             ("PCM_24", "24-bit integer")),
    "csv": ((None, "full float precision"),),
}


def default_name(source: str, what: str, ext: str) -> str:
    base = os.path.splitext(os.path.basename(source))[0] if source else "recording"
    return f"{base}-{what}.{ext}"


MIN_WIDTH = 560


class ExportDialog(QDialog):
    """Returns ``path``, ``what`` ('cleaned' or 'removed') and ``subtype`` after Accept."""

    def __init__(self, source: str, folder: str, what: str = "cleaned", parent=None):
        super().__init__(parent)
        self.setWindowTitle("Export signal")
        self.source = source
        self.folder = folder
        lay = QVBoxLayout(self)
        form = QFormLayout()
        self.what = QComboBox()
        self.what.addItem("cleaned signal (after the recipe)", "cleaned")
        self.what.addItem("removed part (original minus cleaned)", "removed")
        self.what.setCurrentIndex(0 if what == "cleaned" else 1)
        self.format = QComboBox()
        for ext, label in FORMATS:
            self.format.addItem(label, ext)
        src_ext = os.path.splitext(source)[1].lower().lstrip(".")
        if src_ext in ("flac", "csv"):
            self.format.setCurrentIndex([f for f, _ in FORMATS].index(src_ext))
        self.subtype = QComboBox()
        self.path = QLineEdit()
        self.path.textChanged.connect(self.path.setToolTip)     # the whole path, always
        browse = QPushButton("Choose…")
        row = QHBoxLayout()
        row.addWidget(self.path, 1)
        row.addWidget(browse)
        form.addRow("Export", self.what)
        form.addRow("Format", self.format)
        form.addRow("Samples", self.subtype)
        form.addRow("File", row)
        lay.addLayout(form)
        note = QLabel("Integer formats clip beyond full scale; the number of clipped samples "
                      "is reported. The input file is never written.")
        note.setWordWrap(True)
        note.setObjectName("hint")
        lay.addWidget(note)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                        | QDialogButtonBox.StandardButton.Cancel)
        self.buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Export")
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        lay.addWidget(self.buttons)
        self.format.currentIndexChanged.connect(self._format_changed)
        self.what.currentIndexChanged.connect(self._suggest)
        browse.clicked.connect(self._browse)
        self._format_changed()
        # room for a folder and the file's name in the path field, not its last letters only
        self.setMinimumWidth(MIN_WIDTH)

    def _format_changed(self, *_):
        ext = self.format.currentData()
        self.subtype.clear()
        for sub, label in SUBTYPES[ext]:
            self.subtype.addItem(label, sub)
        self._suggest()

    def _suggest(self, *_):
        ext = self.format.currentData()
        self.path.setText(os.path.join(self.folder, default_name(self.source,
                                                                  self.what.currentData(), ext)))

    def _browse(self):
        ext = self.format.currentData()
        p, _ = QFileDialog.getSaveFileName(self, "Export to", self.path.text(),
                                           f"{ext.upper()} files (*.{ext})")
        if p:
            if not p.lower().endswith("." + ext):
                p += "." + ext
            self.path.setText(p)

    def values(self) -> tuple[str, str, str | None]:
        return self.path.text().strip(), self.what.currentData(), self.subtype.currentData()
