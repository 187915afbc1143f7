"""Keep the window's edits safe: save them after each edit, offer them back after a crash.

The recipe and a little view state go to the user data folder
(``scalesieve.autosave``) after every change of the recipe.  When a recording
is opened that has saved edits, the user is asked whether to restore them,
and told when the recording changed on disk since they were made.
"""

from __future__ import annotations

import os

from PySide6.QtCore import QObject, QTimer

from scalesieve import autosave
from scalesieve.errors import ScalesieveError

#: a change of view alone is saved this long after it settles
SAVE_DELAY_MS = 250


class SessionKeeper(QObject):
    """Connects a main window's model adapter to ``scalesieve.autosave``.

    ``ask`` shows the restore prompt and returns ``"restore"``, ``"discard"``
    or ``"later"`` (tests pass their own).
    """

    def __init__(self, window, ask=None, parent=None):
        super().__init__(parent or window)
        self.window = window
        self.adapter = window.adapter
        if ask is None:
            from scalesieve.gui.restore_prompt import ask_restore as ask
        self._ask = ask
        self._source: str | None = None
        self._restoring = False
        self.last_problem: str | None = None
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(SAVE_DELAY_MS)
        self._timer.timeout.connect(self.save_now)
        self.adapter.modelReplaced.connect(self._model_replaced)
        self.adapter.recipeChanged.connect(self._recipe_changed)

    # ------------------------------------------------------------------

    def _path(self) -> str | None:
        rec = self.adapter.recording
        src = getattr(rec, "source", "") if rec is not None else ""
        return src if src and os.path.isfile(src) else None

    def _model_replaced(self) -> None:
        path = self._path()
        if path is None or path == self._source:
            if path is not None:
                self.save_now()      # a new transform: keep it with the edits
            return
        # Every edit of the previous recording was saved as it was made.
        self._timer.stop()
        self._source = path
        self.offer_restore(path)

    def offer_restore(self, path: str) -> str | None:
        """Ask about saved edits of ``path``; apply them on "restore"."""
        try:
            info = autosave.pending_restore(path)
        except ScalesieveError as exc:
            self.last_problem = exc.one_line()
            return None
        if info is None:
            return None
        choice = self._ask(info, self.window)
        if choice == "restore" and info.recipe is not None:
            self._restoring = True
            try:
                self.adapter.put_recipe(info.recipe.transform, info.recipe.edits)
            finally:
                self._restoring = False
            if info.changed:
                # The user chose these edits for the file as it is now.
                try:
                    autosave.save_session(path, info.recipe_json, info.view_state,
                                          fingerprint=autosave.fingerprint(path))
                except ScalesieveError as exc:
                    self.last_problem = exc.one_line()
        elif choice == "discard":
            autosave.clear_session(path)
        else:
            autosave.keep_aside(path)
        return choice

    def _recipe_changed(self, *_):
        # Saved at once (about a millisecond): an edit is never only in memory.
        if not self._restoring:
            self.save_now()

    def _schedule(self) -> None:
        if self._path() is not None:
            self._timer.start()

    def view_state(self) -> dict:
        w = self.window
        state = {"channel": int(getattr(w, "channel", 0))}
        axis = getattr(w, "time_axis", None)
        if axis is not None:
            state["time_range_s"] = [float(axis.t0), float(axis.t1)]
        return state

    def save_now(self) -> str | None:
        """Save the current recipe and view now; returns the session file."""
        self._timer.stop()
        path = self._path()
        model = self.adapter.model
        if path is None or model is None or path != self._source:
            return None
        try:
            return autosave.save_session(path, model.recipe().to_json(), self.view_state())
        except ScalesieveError as exc:
            # Saving must never stop the work; the status bar says why it failed.
            self.last_problem = exc.one_line()
            try:
                self.window.statusBar().showMessage(f"edits not kept: {exc.one_line()}", 8000)
            except RuntimeError:
                pass
            return None
