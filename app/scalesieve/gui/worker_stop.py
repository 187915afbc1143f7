"""The window's worker threads stopped and waited for, however the window goes away.

A QThread destroyed while it runs aborts the process ("QThread: Destroyed while thread
... is still running"): a main window with a recording loaded, collected or deleted
without being closed, took the interpreter down at exit.  A :class:`WorkerStop` holds
the model adapter's threads but not the adapter, so it can run when the adapter is
being deleted or collected and at the end of the interpreter, as well as at close.
"""

from __future__ import annotations

import threading
import weakref


class WorkerStop:
    """Stops a QThread (its event loop) and the band thread in flight, and waits for them.

    ``stopped`` turns true at the first call: the job in flight reads it as a cancel and
    ends at its next step.
    """

    def __init__(self, thread):
        self.thread = thread
        self.bands = None       # the EnvelopeThread in flight, if any
        self.stopped = False

    def watch(self, owner) -> "WorkerStop":
        """Stop when the Qt object ``owner`` is deleted or collected, or at interpreter exit."""
        owner.destroyed.connect(lambda: self.stop())
        weakref.finalize(owner, self.stop)
        return self

    def stop(self, wait_ms: int = -1) -> bool:
        """Stop both threads and wait for them (``wait_ms`` each at most; -1: as long as it
        takes); True when both have ended."""
        self.stopped = True
        bands, self.bands = self.bands, None
        if bands is not None:
            bands.stop()
        ended = True
        t = self.thread
        if t is not None:
            t.quit()
            # (the collector may run this in the thread itself, which cannot wait for itself)
            if not t.isCurrentThread() and (t.wait() if wait_ms < 0 else t.wait(wait_ms)):
                self.thread = None
            else:
                ended = False
        if bands is not None:
            if bands is not threading.current_thread():
                bands.join(None if wait_ms < 0 else wait_ms / 1000)
            if bands.is_alive():
                self.bands, ended = bands, False
        return ended
