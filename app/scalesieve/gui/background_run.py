"""One piece of a pane's work at a time in a worker thread; the latest request wins.

Used by the Impulse map and Envelope spectrum panes, the Band lanes' default
lanes and the restore check of kept edits: each asks for its figures and gets
them back in the window's thread, never holding the window up.
"""

from __future__ import annotations

import threading
from typing import Callable

from PySide6.QtCore import QObject, Signal

from scalesieve.gui.thread_priority import lower_this_thread
from scalesieve.gui.thread_results import post


class Outdated(Exception):
    """A newer request made the work in flight pointless."""


class BackgroundRun(QObject):
    """Runs one piece of a pane's work at a time in a thread; latest request wins.

    ``request(key, fn)`` runs ``fn(check)`` off the window's thread; ``check()``
    raises ``Outdated`` once a newer request has come, so a run nobody waits
    for stops at its next step.  While one runs, only the latest request
    waits (the ones in between are dropped), as the model adapter does for
    transforms.  ``finished(key, result, problem)`` comes in the window's
    thread for the latest request only; ``problem`` is one line or None.
    """

    finished = Signal(object, object, object)

    def __init__(self, name: str, parent=None):
        super().__init__(parent)
        self.name = name
        self._token = 0
        self._running: int | None = None
        self._pending: tuple | None = None

    @property
    def busy(self) -> bool:
        """A run is in flight or waiting."""
        return self._running is not None or self._pending is not None

    def request(self, key, fn: Callable) -> None:
        self._token += 1
        job = (self._token, key, fn)
        if self._running is not None:
            self._pending = job            # an older waiting request is dropped
        else:
            self._start(job)

    def _start(self, job: tuple) -> None:
        self._running = job[0]
        threading.Thread(target=self._work, args=job, name=f"scalesieve-{self.name}",
                         daemon=True).start()

    def _work(self, token: int, key, fn: Callable) -> None:
        lower_this_thread()                # the window's thread paints first

        def check() -> None:
            if token != self._token:
                raise Outdated()

        result, problem = None, None
        try:
            result = fn(check)
        except Outdated:
            problem = "outdated"
        except ValueError as exc:          # the core's one-line reasons (e.g. too short)
            problem = str(exc)
        except MemoryError:
            problem = "not enough memory for this on the whole recording"
        except Exception as exc:  # a bug: the pane says so in one line, the window goes on
            problem = f"{self.name} failed: {type(exc).__name__}: {exc}"
        # not a signal of this object, which the window may be deleting meanwhile
        post(self._on_done, token, key, result, problem)

    def _on_done(self, token: int, key, result, problem) -> None:
        self._running = None
        pending, self._pending = self._pending, None
        if pending is not None:
            self._start(pending)           # this result is out of date: dropped
            return
        if token == self._token:
            self.finished.emit(key, result, problem)
