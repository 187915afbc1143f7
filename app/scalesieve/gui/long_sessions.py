"""The long-recording window's saved edits: offered back after a crash, kept edits put back.

As in the window for recordings in memory (``session_keeper``): the edits are
saved after each change (``autosave``); when a recording is opened whose
session did not end normally, the restore prompt (``restore_prompt``) asks
whether to restore, discard or keep them for later, and until it is
answered nothing is saved over them.  A restore applies the edits that fit
the recording (the others are named, and the whole session is first kept
aside, so nothing is lost); a session made under another transform reopens
the recording under that transform.  File › Kept edits (``kept_sessions``)
puts a kept session's edits in place the same way; the kept file stays.
"""

from __future__ import annotations

from types import SimpleNamespace

from PySide6.QtCore import QObject

from scalesieve import autosave
from scalesieve.errors import ScalesieveError


class LongSessions(QObject):
    """Connects a ``LongWindow`` to ``scalesieve.autosave``; ``ask`` shows the prompt
    (tests pass their own), ``tell`` shows a notice (default: the one-line dialog)."""

    def __init__(self, window, ask=None, tell=None):
        super().__init__(window)
        self.window = window
        if ask is None:
            from scalesieve.gui.restore_prompt import ask_restore as ask
        self._ask, self._tell = ask, tell
        self.waiting = None              # a RestoreInfo the prompt is about, until answered
        self.last_choice: str | None = None
        self.last_report: str | None = None
        window.session_keeper = self     # what File › Kept edits calls

    def found(self, info) -> None:
        """The worker found saved edits of the recording being opened: ask (the summary goes
        on being built meanwhile; nothing is saved over them until the answer)."""
        self.waiting = info
        try:
            choice = self._ask(info, self.window)
        finally:
            self.waiting = None
        self.last_choice = choice
        w = self.window
        try:
            if choice == "restore" and info.recipe is not None:
                self.put_back(info.recipe, info.path)
            elif choice == "discard":
                autosave.clear_session(info.path)
            else:
                autosave.keep_aside(info.path)
        except ScalesieveError as exc:
            self._notify(exc.one_line())
        finally:
            # restored before the recording is open: held until the edits are in place
            if w.pending_edits is None:
                w.worker.hold_saves = False
                w.worker.save_soon(w.edits())

    def put_back(self, recipe, path: str | None, kept_file: str | None = None) -> tuple:
        """Put saved edits in place: those that fit; say which do not, and why (the pending
        session of ``path`` is kept aside first when not all fit).  ``(fitting, refused)``."""
        from scalesieve.gui.session_keeper import split_fitting

        w = self.window
        lr = w.lr
        if lr is None:
            w.pending_edits = (recipe, path, kept_file)   # applied once the recording is open
            return (), []
        spec = recipe.transform or lr.spec
        try:
            spec = spec.resolved(lr.n)
        except ValueError:
            spec = lr.spec
        shape = SimpleNamespace(duration_s=lr.n / lr.rate, channels=lr.channels)
        fitting, refused = split_fitting(recipe.edits, spec.level, shape)
        if refused and path is not None and kept_file is None:
            try:
                autosave.keep_aside(path)
                where = "all of them stay under File › Kept edits"
            except ScalesieveError as exc:
                where = f"the saved session could not be kept aside ({exc.one_line()})"
        else:
            where = "all of them stay under File › Kept edits"
        if spec != lr.spec:
            w.reopen(spec, fitting)
        else:
            w.put_edits(fitting)
        if refused:
            n = len(refused)
            shown = "; ".join(refused[:5]) + (f"; and {n - 5} more" if n > 5 else "")
            self._notify(f"{len(fitting)} of {len(recipe.edits)} edits applied; {n} could not "
                         f"be: {shown}. {where[0].upper() + where[1:]}.")
        return fitting, refused

    def _notify(self, text: str) -> None:
        self.last_report = text
        if self._tell is not None:
            self._tell(text)
            return
        from scalesieve.gui.error_dialog import show_error

        show_error(self.window, text, "Restore edits")
