"""Keep the window's edits safe: save them after each edit, offer them back after a crash.

The recipe and a little view state go to the user data folder
(``scalesieve.autosave``) after every change of the recipe.  When a recording
is opened that has saved edits, the user is asked whether to restore them,
and told when the recording changed on disk since they were made.

A restore applies what fits the recording as it is now and says which edits
could not be applied, and why; the saved session is never overwritten before
its edits are back in the Recipe list: when some do not fit, or the restore
does not take, the whole session is kept aside first (File > Kept edits).  A
normal close, or opening another recording, ends the session
(``autosave.finish_session``): saved or exported edits are forgotten, others
kept aside, so the next start does not mistake it for a crash.
"""

from __future__ import annotations

import os

from PySide6.QtCore import QEvent, QObject, QTimer

from scalesieve import autosave
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import check_against
from scalesieve.gui.event_guard import reported

#: a change of view alone is saved this long after it settles
SAVE_DELAY_MS = 250


def split_fitting(edits, level: int, recording) -> tuple[tuple, list[str]]:
    """``(edits that fit the recording at this depth, one line per edit that does not)``."""
    fitting, refused = [], []
    for i, e in enumerate(edits, 1):
        try:
            check_against((e,), level, recording.duration_s, recording.channels)
        except ScalesieveError as exc:
            # checked alone, an edit is "edit 1": give it back its place in the recipe
            refused.append(exc.message.replace("edit 1 ", f"edit {i} ", 1))
            continue
        fitting.append(e)
    return tuple(fitting), refused


class SessionKeeper(QObject):
    """Connects a main window's model adapter to ``scalesieve.autosave``.

    ``ask`` shows the restore prompt and returns ``"restore"``, ``"discard"``
    or ``"later"`` (tests pass their own).  ``tell`` shows a notice
    (``tell(text)``; by default the window's one-line dialog).
    """

    def __init__(self, window, ask=None, parent=None, tell=None):
        super().__init__(parent or window)
        self.window = window
        self.adapter = window.adapter
        if ask is None:
            from scalesieve.gui.restore_prompt import ask_restore as ask
        self._ask = ask
        self._tell = tell
        self._source: str | None = None
        self._restoring = False
        self._captured: dict | None = None   # the recipe as last saved or exported
        self._hold: tuple | None = None      # edits a restore puts in place (session kept till then)
        self._refingerprint = False          # restored onto a changed file: take its new hash
        self._opened: autosave.Fingerprint | None = None  # the recording as opened (hashed aside)
        self._checking: str | None = None    # the recording whose saved edits are being looked for
        self._owed_save = False              # an edit came while they were: saved after the answer
        from scalesieve.gui.background_run import BackgroundRun

        self._look = BackgroundRun("restore check", self)
        self._look.finished.connect(self._looked)
        self.last_problem: str | None = None
        self.last_report: str | None = None  # what the last restore could not apply
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(SAVE_DELAY_MS)
        self._timer.timeout.connect(self.save_now)
        self.adapter.modelReplaced.connect(self._model_replaced)
        self.adapter.recipeChanged.connect(self._recipe_changed)
        saved = getattr(window, "workSaved", None)
        if saved is not None:
            saved.connect(self._work_saved)
        window.installEventFilter(self)
        window.session_keeper = self
        try:
            autosave.prune_kept()
        except (OSError, ScalesieveError):
            pass     # pruning is housekeeping: never in the way of opening the window

    # ------------------------------------------------------------------

    def _path(self) -> str | None:
        rec = self.adapter.recording
        src = getattr(rec, "source", "") if rec is not None else ""
        return src if src and os.path.isfile(src) else None

    @reported(fallback=False, once=True)
    def eventFilter(self, obj, event):  # noqa: N802 - Qt API
        if obj is self.window and event.type() == QEvent.Type.Close:
            self.finish()
        return False

    def finish(self) -> None:
        """The window closes normally: end the session (see the module docstring)."""
        self._timer.stop()
        if self._source is None:
            return
        if self._hold is None:
            self.save_now()
        self._end(self._source)
        self._source = None

    def _end(self, path: str) -> None:
        try:
            if self._hold is not None:
                # The restore never took: what the session holds is kept, as it was.
                autosave.keep_aside(path)
            else:
                autosave.finish_session(path, self._captured)
        except ScalesieveError as exc:
            self.last_problem = exc.one_line()
        self._hold = None
        self._captured = None

    def _model_replaced(self) -> None:
        path = self._path()
        if path is None or path == self._source:
            if path is not None:
                self.save_now()      # a new transform: keep it with the edits
            return
        # Every edit of the previous recording was saved as it was made.
        self._timer.stop()
        if self._source is not None:
            self._end(self._source)
        self._source = path
        self._captured = None
        self._opened = None
        self.check_restore(path)

    @property
    def checking(self) -> bool:
        """Saved edits of the open recording are still being looked for."""
        return self._checking is not None

    def check_restore(self, path: str) -> None:
        """Look for saved edits of ``path`` in a worker thread; offer them when found.

        Comparing them with the recording hashes it (up to ``FULL_HASH_BYTES``
        whole), which must not hold up the window; the offer comes when the
        hash is done.  Until then nothing is saved for ``path``, so an edit
        made meanwhile cannot overwrite the saved edits before they are offered.
        """
        self._checking = path
        self._look.request(path, lambda check: _look_for_saved_edits(path))

    def hash_aside(self, path: str) -> None:
        """Fingerprint ``path`` in the worker thread; what was to be saved is saved after."""
        self._checking = path
        self._owed_save = True
        self._look.request(path, lambda check: _fingerprint_aside(path))

    def _looked(self, path, result, problem) -> None:
        if path != self._checking:
            return                   # another recording was opened meanwhile
        self._checking = None
        if path != self._source:
            return
        if problem is not None:
            self.last_problem = problem
            self._refingerprint = False
        else:
            info, opened, trouble = result
            self._opened = opened
            if trouble is not None:
                self.last_problem = trouble
                # saved with the fingerprint the session has (no second try on the
                # window's thread)
                self._refingerprint = False
            elif info is not None:
                self._answer(path, info)
        if self._owed_save:
            self._owed_save = False
            self.save_now()

    def _notify(self, text: str) -> None:
        self.last_report = text
        if self._tell is not None:
            self._tell(text)
            return
        from scalesieve.gui.error_dialog import show_error

        show_error(self.window, text, "Restore edits")

    def offer_restore(self, path: str) -> str | None:
        """Ask about saved edits of ``path``; apply what fits on "restore"."""
        try:
            info = autosave.pending_restore(path)
        except ScalesieveError as exc:
            self.last_problem = exc.one_line()
            return None
        if info is None:
            return None
        return self._answer(path, info)

    def _answer(self, path: str, info) -> str:
        choice = self._ask(info, self.window)
        if choice == "restore" and info.recipe is not None:
            self.put_back(info.recipe, path, info.edit_count, changed=info.changed)
        elif choice == "discard":
            autosave.clear_session(path)
        else:
            autosave.keep_aside(path)
        return choice

    def put_back(self, recipe, path: str | None, count: int | None = None,
                 changed: bool = False, kept_file: str | None = None) -> tuple[tuple, list]:
        """Put saved edits in the Recipe list: those that fit; say which do not, and why.

        ``path`` is the recording whose pending session they come from (it is
        kept aside first when not all fit); ``kept_file`` a kept session they
        come from (which stays where it is).
        """
        m = self.adapter.model
        rec = self.adapter.recording
        if m is None or rec is None:
            return (), []
        spec = recipe.transform
        try:
            level = spec.resolved(rec.n).level if spec is not None else m.level
        except ValueError:
            level = m.level
        fitting, refused = split_fitting(recipe.edits, level, rec)
        count = len(recipe.edits) if count is None else count
        where = None
        if refused and path is not None and kept_file is None:
            try:
                kept = autosave.keep_aside(path)
            except ScalesieveError as exc:
                self.last_problem = exc.one_line()
                kept = None
            where = ("all of them stay under File › Kept edits" if kept else
                     "the saved session could not be kept aside")
        elif kept_file is not None:
            where = "all of them stay under File › Kept edits"
        self._hold = None if refused or path is None else fitting
        self._refingerprint = changed
        self._restoring = True
        try:
            self.adapter.put_recipe(spec, fitting)
        finally:
            self._restoring = False
        if not self.adapter.busy:
            self.save_now()     # in place already (no new transform): the session follows
        if refused:
            n = len(refused)
            shown = "; ".join(refused[:5]) + (f"; and {n - 5} more" if n > 5 else "")
            self._notify(f"{len(fitting)} of {count} edits applied; "
                         f"{n} could not be: {shown}. {where[0].upper() + where[1:]}.")
        return fitting, refused

    def _work_saved(self, recipe_json=None) -> None:
        """The recipe was saved or the signal exported: the edits are no longer only here."""
        path = self._source
        model = self.adapter.model
        if path is None or model is None or self._hold is not None:
            return
        self._timer.stop()
        self._captured = recipe_json if isinstance(recipe_json, dict) \
            else model.recipe().to_json()
        try:
            autosave.clear_session(path)
        except ScalesieveError as exc:
            self.last_problem = exc.one_line()

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
        if self._checking == path:
            self._owed_save = True   # the saved edits are not offered yet: keep them whole
            return None
        fingerprint = self._opened
        if self._hold is not None:
            if self.adapter.busy:
                return None          # the restore is still being put in place
            if tuple(model.edits) != self._hold:
                # It did not take: the saved edits stay whole, kept aside and listed.
                self._hold = None
                try:
                    autosave.keep_aside(path)
                except ScalesieveError as exc:
                    self.last_problem = exc.one_line()
                self._notify("the saved edits could not be put back; they stay under "
                             "File › Kept edits")
                return None
            self._hold = None
        if self._refingerprint:
            if self._opened is None:
                # The user chose these edits for the file as it is now, and it has not
                # been hashed yet (its size changed, so comparing did not need to): the
                # worker hashes it, and the save follows when that is done.
                self.hash_aside(path)
                return None
            self._refingerprint = False
            fingerprint = self._opened
        recipe_json = model.recipe().to_json()
        try:
            if self._captured is not None and autosave.same_recipe(recipe_json,
                                                                   self._captured):
                autosave.clear_session(path)     # nothing here that is not saved already
                return None
            return autosave.save_session(path, recipe_json, self.view_state(),
                                         fingerprint=fingerprint)
        except ScalesieveError as exc:
            # Saving must never stop the work; the status bar says why it failed.
            self.last_problem = exc.one_line()
            try:
                self.window.statusBar().showMessage(f"edits not kept: {exc.one_line()}", 8000)
            except RuntimeError:
                pass
            return None


def _look_for_saved_edits(path: str):
    """``(restore info or None, the recording's fingerprint or None, problem or None)``.

    Runs in a worker thread.  When there is nothing to offer, the recording
    is fingerprinted here, so the first save of its edits need not hash it
    on the window's thread.
    """
    try:
        info = autosave.pending_restore(path)
        opened = info.current if info is not None else autosave.fingerprint(path)
    except ScalesieveError as exc:
        return None, None, exc.one_line()
    if info is not None and opened is None and info.changed:
        # A changed size is told without hashing; a restore onto the file as it is now
        # takes its new fingerprint, made here rather than on the window's thread.
        try:
            opened = autosave.fingerprint(path)
        except ScalesieveError:
            opened = None               # gone or unreadable: the offer still comes
    return info, opened, None


def _fingerprint_aside(path: str):
    """``(None, the recording's fingerprint or None, problem or None)``, in a worker thread."""
    try:
        return None, autosave.fingerprint(path), None
    except ScalesieveError as exc:
        return None, None, exc.one_line()
