"""Background threads yield the processor to the window's own thread.

On a two-core machine a decomposition and the band envelopes keep both
cores busy; at the scheduler's default the window's thread then gets a
third of a core and every paint takes three times as long.  A higher
nice value for the background threads (Linux schedules threads one by
one) leaves the window's thread ahead whenever it has work.  Where the
system has no per-thread nice value this does nothing.
"""

from __future__ import annotations

import os
import threading

#: nice value of background threads (0 is the default, 19 the lowest priority)
BACKGROUND_NICE = 10


def lower_this_thread() -> None:
    """Give the calling thread a lower priority than the window's (best effort)."""
    setpriority = getattr(os, "setpriority", None)
    if setpriority is None or not hasattr(threading, "get_native_id"):
        return
    try:
        tid = threading.get_native_id()
        if os.getpriority(os.PRIO_PROCESS, tid) < BACKGROUND_NICE:
            setpriority(os.PRIO_PROCESS, tid, BACKGROUND_NICE)
    except OSError:
        pass            # not a per-thread setting here, or not allowed: leave it
