"""File › Kept edits: the sessions kept aside, each openable as a recipe, saved or removed.

Kept sessions are edits that were never saved as a recipe or exported: left
at a normal close, kept for later at a restore prompt, or set aside when a
restore could not apply them all (``scalesieve.autosave``).  The menu lists
them newest first, with the recording they were made on; each one can be put
in the Recipe list (what fits the open recording; the rest is named), saved
as a recipe file, or removed.  Untouched ones go after
``autosave.KEPT_DAYS`` days.
"""

from __future__ import annotations

import datetime
import os

from PySide6.QtWidgets import QFileDialog, QMenu

from scalesieve import autosave
from scalesieve.errors import ScalesieveError

#: at most this many kept sessions in the menu (the newest)
LISTED = 20


def _when(iso: str) -> str:
    try:
        return datetime.datetime.fromisoformat(iso).astimezone().strftime("%Y-%m-%d %H:%M")
    except (TypeError, ValueError):
        return "an unknown time"


def entry_label(session: dict) -> str:
    """``pump.wav — 3 edits — 2026-12-02 14:05``."""
    name = os.path.basename(session.get("path") or "") or "(unknown recording)"
    n = int(session.get("edits") or 0)
    return f"{name} — {n} edit{'s' if n != 1 else ''} — {_when(session.get('saved', ''))}"


def kept_list() -> list[dict]:
    """The kept sessions, newest first."""
    return [s for s in autosave.list_sessions() if s["kept"]]


class KeptEditsMenu(QMenu):
    """The submenu under File; filled each time it opens (the folder may have changed)."""

    def __init__(self, window):
        super().__init__("&Kept edits", window)
        self.setObjectName("keptEditsMenu")
        self.window = window
        self.setToolTipsVisible(True)
        self.aboutToShow.connect(self.refill)
        self.refill()

    def refill(self) -> None:
        self.clear()
        sessions = kept_list()
        if not sessions:
            none = self.addAction("(no kept edits)")
            none.setEnabled(False)
        for s in sessions[:LISTED]:
            sub = self.addMenu(entry_label(s))
            sub.setToolTip(s.get("path") or "")
            sub.addAction("Put in the Recipe list",
                          lambda _=False, f=s["file"]: self.open_as_recipe(f))
            sub.addAction("Save as recipe file…",
                          lambda _=False, f=s["file"]: self.save_as_recipe(f))
            sub.addSeparator()
            sub.addAction("Remove", lambda _=False, f=s["file"]: self.remove(f))
        if len(sessions) > LISTED:
            more = self.addAction(f"… and {len(sessions) - LISTED} older")
            more.setEnabled(False)
        self.addSeparator()
        note = self.addAction(f"(kept {autosave.KEPT_DAYS} days after they were last saved)")
        note.setEnabled(False)

    def _problem(self, exc: ScalesieveError) -> None:
        from scalesieve.gui.error_dialog import show_error

        show_error(self.window, exc.one_line(), "Kept edits")

    def open_as_recipe(self, file: str) -> tuple:
        """Put a kept session's edits in the Recipe list; returns ``(applied, refused)``."""
        try:
            recipe, _ = autosave.read_kept(file)
        except ScalesieveError as exc:
            self._problem(exc)
            return (), []
        keeper = getattr(self.window, "session_keeper", None)
        if keeper is not None:
            return keeper.put_back(recipe, None, kept_file=file)
        if self.window.adapter.model is None:
            return (), []
        self.window.adapter.put_recipe(recipe.transform, recipe.edits)
        return tuple(recipe.edits), []

    def save_as_recipe(self, file: str, path: str | None = None) -> str:
        """Write a kept session's recipe as a recipe file; returns where ("" when not)."""
        from scalesieve import api

        try:
            recipe, data = autosave.read_kept(file)
        except ScalesieveError as exc:
            self._problem(exc)
            return ""
        asked = path is None
        if asked:
            given = (data.get("recording") or {}).get("given_path") or "recording"
            start = os.path.join(os.path.dirname(given) or os.getcwd(),
                                 os.path.splitext(os.path.basename(given))[0] + "-recipe.json")
            path, _ = QFileDialog.getSaveFileName(self.window, "Save kept edits as a recipe",
                                                  start, "Recipes (*.json)")
            if not path:
                return ""
        try:
            # The dialog has asked before replacing an existing file; a path given is not replaced.
            api.save_recipe(recipe, path, force=asked and os.path.exists(path))
        except ScalesieveError as exc:
            self._problem(exc)
            return ""
        return path

    def remove(self, file: str, ask: bool = True) -> bool:
        """Remove a kept session, after asking (these edits exist nowhere else)."""
        if ask:
            from PySide6.QtWidgets import QMessageBox

            ans = QMessageBox.question(self.window, "Kept edits",
                                       "Remove these kept edits? They are not saved anywhere "
                                       "else.")
            if ans != QMessageBox.StandardButton.Yes:
                return False
        try:
            autosave.delete_kept(file)
        except ScalesieveError as exc:
            self._problem(exc)
            return False
        return True
