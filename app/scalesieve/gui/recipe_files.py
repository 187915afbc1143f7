"""The window's recipe files: open, apply, save, and the batch command for a saved recipe."""

from __future__ import annotations

import os

from PySide6.QtWidgets import QFileDialog

from scalesieve import api
from scalesieve.errors import ScalesieveError
from scalesieve.gui import window_settings as ws
from scalesieve.gui.error_dialog import show_error


class RecipeFiles:
    """What the main window does with recipe files (a part of ``MainWindow``).

    Uses the window's ``adapter``, ``settings``, ``statusBar()`` and its
    ``workSaved`` signal.
    """

    def _ask_recipe(self, title: str) -> str:
        p, _ = QFileDialog.getOpenFileName(self, title, ws.last_folder(self.settings),
                                           "Recipes (*.json);;All files (*)")
        return p

    def _read_recipe(self, path: str):
        """The recipe file at ``path``, or None after showing why it cannot be read."""
        from scalesieve.recipe import load as load_recipe

        try:
            return load_recipe(path)
        except ScalesieveError as exc:
            show_error(self, exc.one_line())
            return None

    def open_recipe(self, path: str) -> None:
        """Replace transform and edits by a recipe file."""
        r = self._read_recipe(path)
        if r is not None:
            self.adapter.put_recipe(r.transform, r.edits)

    def apply_recipe(self, path: str) -> None:
        """Add a recipe file's edits after the current ones (transform kept)."""
        r = self._read_recipe(path)
        if r is not None:
            self.adapter.set_edits(tuple(self.adapter.edits) + tuple(r.edits))

    def open_recipe_dialog(self) -> None:
        p = self._ask_recipe("Open recipe")
        if p:
            self.open_recipe(p)

    def apply_recipe_dialog(self) -> None:
        p = self._ask_recipe("Apply recipe")
        if p:
            self.apply_recipe(p)

    def save_recipe(self, path: str, force: bool = False) -> bool:
        m = self.adapter.model
        if m is None:
            return False
        try:
            api.save_recipe(m, path, force=force)
        except ScalesieveError as exc:
            show_error(self, exc.one_line())
            return False
        self.statusBar().showMessage(f"recipe saved to {path}", 5000)
        self.workSaved.emit(m.recipe().to_json())
        return True

    def _save_recipe_asking(self, title: str) -> str:
        """Ask where, save the recipe there; the path saved to, or "" when not saved."""
        base = os.path.splitext(self.adapter.source_name() or "recipe")[0]
        start = os.path.join(ws.last_folder(self.settings), f"{base}-recipe.json")
        p, _ = QFileDialog.getSaveFileName(self, title, start, "Recipes (*.json)")
        if not p:
            return ""
        if not p.lower().endswith(".json"):
            p += ".json"
        # The dialog has asked before replacing an existing file.
        return p if self.save_recipe(p, force=os.path.exists(p)) else ""

    def save_recipe_dialog(self) -> None:
        self._save_recipe_asking("Save recipe")

    def show_batch_command(self, recipe_path: str):
        """The dialog with the batch command line for a saved recipe (returned, shown)."""
        from scalesieve.gui.batch_dialog import BatchCommandDialog, command_for

        source = self.adapter.source_path or os.path.join(ws.last_folder(self.settings),
                                                            "recording.wav")
        dlg = BatchCommandDialog(command_for(recipe_path, source), recipe_path, self)
        self._batch_dialog = dlg
        dlg.show()
        return dlg

    def batch_dialog(self) -> None:
        """Save the recipe, then show the command that replays it on many recordings."""
        p = self._save_recipe_asking("Save recipe for a batch")
        if p:
            self.show_batch_command(p)
