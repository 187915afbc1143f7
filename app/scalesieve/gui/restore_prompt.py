"""Ask whether to bring back the edits kept from a session that did not end normally.

Shown when a recording is opened and :func:`scalesieve.autosave.pending_restore`
finds saved edits for it.  It says how many edits there are and when they were
saved, lists the first few, and warns when the recording changed on disk
since they were made (detected by its SHA-256).  Three answers: restore them,
discard them, or keep them for later (open without them; the window then
calls ``autosave.keep_aside`` so new edits do not overwrite them, and lists
them under File › Kept edits).
"""

from __future__ import annotations

import datetime
import os

from PySide6.QtCore import Qt, Slot
from PySide6.QtWidgets import (QDialog, QDialogButtonBox, QLabel, QListWidget, QVBoxLayout,
                               QWidget)

from scalesieve.views.edit_words import db_text, edit_text

RESTORE = "restore"
DISCARD = "discard"
LATER = "later"
_LISTED = 12


def _local_time(iso: str) -> str:
    try:
        t = datetime.datetime.fromisoformat(iso)
    except (TypeError, ValueError):
        return iso or "an unknown time"
    return t.astimezone().strftime("%Y-%m-%d %H:%M")


class _BandNames:
    """Band names of a recipe's own transform, as the model would name them."""

    def __init__(self, level: int):
        self.level = level

    def band_name(self, key) -> str:
        from scalesieve.core.transforms import band_name

        return band_name(key, self.level)


def edit_lines(info) -> list[str]:
    """One line per saved edit, in the window's words (gains in dB, "mute").

    From the parsed recipe (as the Recipe list shows it), else from the raw JSON.
    """
    if info.recipe is not None:
        spec = info.recipe.transform
        names = (_BandNames(int(spec.level))
                 if spec is not None and spec.level and spec.kind != "packet" else None)
        return [edit_text(e, names) for e in info.recipe.edits]
    lines = []
    for e in info.recipe_json.get("edits") or []:
        if isinstance(e, dict):
            gain = e.get("gain")
            how = (f" {db_text(float(gain))}" if isinstance(gain, (int, float))
                   and not isinstance(gain, bool) else "")
            lines.append(f"{e.get('op', '?')}{how} on {e.get('levels', e.get('bands', '?'))}")
        else:
            lines.append(repr(e)[:60])
    return lines


#: wide enough for an edit's line and the three answers side by side (fits 1280 px)
MIN_WIDTH = 560


class RestorePrompt(QDialog):
    """The question, with the saved edits listed and any change of the recording."""

    def __init__(self, info, parent: QWidget | None = None):
        super().__init__(parent)
        self.setObjectName("restorePrompt")
        self.setWindowTitle("Restore unsaved edits?")
        self.info = info
        self.choice = LATER
        name = os.path.basename(info.path)
        n = info.edit_count
        layout = QVBoxLayout(self)
        self.question = QLabel(
            f"Scalesieve kept {n} edit{'s' if n != 1 else ''} to {name} from "
            f"{_local_time(info.saved)} that were not saved to a recipe or exported "
            "(the program did not close normally). Restore them?")
        self.question.setObjectName("restoreQuestion")
        self.question.setWordWrap(True)
        self.question.setTextFormat(Qt.TextFormat.PlainText)
        layout.addWidget(self.question)

        self.warning = QLabel()
        self.warning.setObjectName("restoreWarning")
        self.warning.setWordWrap(True)
        self.warning.setTextFormat(Qt.TextFormat.PlainText)
        if info.changed:
            self.warning.setText(
                f"Warning: the recording changed on disk since these edits were made "
                f"({info.change_reason}). They may not fit it any more: check them before "
                "exporting.")
        self.warning.setVisible(info.changed)
        layout.addWidget(self.warning)

        self.problem = QLabel(info.problem or "")
        self.problem.setObjectName("restoreProblem")
        self.problem.setWordWrap(True)
        self.problem.setTextFormat(Qt.TextFormat.PlainText)
        self.problem.setVisible(bool(info.problem))
        layout.addWidget(self.problem)

        self.edits = QListWidget()
        self.edits.setObjectName("restoreEdits")
        lines = edit_lines(info)
        self.edits.addItems(lines[:_LISTED])
        if len(lines) > _LISTED:
            self.edits.addItem(f"… and {len(lines) - _LISTED} more")
        # each edit whole: a long one wraps onto a second line instead of running off
        self.edits.setWordWrap(True)
        self.edits.setTextElideMode(Qt.TextElideMode.ElideNone)
        self.edits.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        for i in range(self.edits.count()):
            self.edits.item(i).setToolTip(self.edits.item(i).text())
        self.edits.setMaximumHeight(160)
        layout.addWidget(self.edits)
        self.setMinimumWidth(MIN_WIDTH)

        box = QDialogButtonBox()
        self.restore_button = box.addButton("Restore edits",
                                            QDialogButtonBox.ButtonRole.AcceptRole)
        self.discard_button = box.addButton("Discard them",
                                            QDialogButtonBox.ButtonRole.DestructiveRole)
        self.later_button = box.addButton("Keep them for later",
                                          QDialogButtonBox.ButtonRole.RejectRole)
        self.restore_button.setObjectName("restoreButton")
        self.discard_button.setObjectName("discardButton")
        self.later_button.setObjectName("laterButton")
        self.later_button.setToolTip("open the recording without them; they wait under "
                                     "File › Kept edits")
        # A recipe that no longer reads cannot be restored; keeping it costs nothing.
        self.restore_button.setEnabled(info.recipe is not None)
        (self.restore_button if info.recipe is not None else self.later_button).setDefault(True)
        self.restore_button.clicked.connect(lambda: self._choose(RESTORE))
        self.discard_button.clicked.connect(lambda: self._choose(DISCARD))
        self.later_button.clicked.connect(lambda: self._choose(LATER))
        layout.addWidget(box)

    @Slot()
    def _choose(self, choice: str) -> None:
        self.choice = choice
        if choice == RESTORE:
            self.accept()
        else:
            self.reject()

    def reject(self) -> None:  # Esc and the close button keep the edits for later
        if self.choice not in (DISCARD,):
            self.choice = LATER
        super().reject()


def ask_restore(info, parent: QWidget | None = None) -> str:
    """Show the prompt modally; return ``"restore"``, ``"discard"`` or ``"later"``.

    ``"later"``: open without the edits and call ``autosave.keep_aside(path)``.
    """
    prompt = RestorePrompt(info, parent)
    prompt.exec()
    return prompt.choice
