"""Show the ``scalesieve batch`` command line that replays the saved recipe."""

from __future__ import annotations

from PySide6.QtGui import QGuiApplication
from PySide6.QtWidgets import (QDialog, QDialogButtonBox, QLabel, QPlainTextEdit, QPushButton,
                               QVBoxLayout)


def command_for(recipe_path: str, recording_path: str, workers: int | None = None) -> str:
    from scalesieve import batch_command as bc

    return bc.batch_command_line(recipe_path, bc.inputs_hint_for(recording_path),
                                 bc.outdir_for(recording_path), workers=workers)


class BatchCommandDialog(QDialog):
    """A read-only command line with a Copy button."""

    def __init__(self, command: str, recipe_path: str, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Replay this recipe on many recordings")
        lay = QVBoxLayout(self)
        intro = QLabel(
            f"Recipe saved to <b>{recipe_path}</b>. This command applies it to every "
            "recording of the same type in the folder and writes the cleaned files, with "
            "a batch-report.json, into the folder named after -o. Edit the inputs and the "
            "folder as needed.")
        intro.setTextFormat(intro.textFormat().RichText)
        intro.setWordWrap(True)
        lay.addWidget(intro)
        self.text = QPlainTextEdit(command)
        self.text.setReadOnly(True)
        self.text.setMinimumWidth(640)
        self.text.setFixedHeight(self.text.fontMetrics().lineSpacing() * 4 + 12)
        lay.addWidget(self.text)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        self.copy = QPushButton("Copy")
        buttons.addButton(self.copy, QDialogButtonBox.ButtonRole.ActionRole)
        self.copy.clicked.connect(self.copy_command)
        buttons.rejected.connect(self.reject)
        buttons.accepted.connect(self.accept)
        lay.addWidget(buttons)

    def copy_command(self) -> None:
        QGuiApplication.clipboard().setText(self.text.toPlainText())
