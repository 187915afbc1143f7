"""One kurtosis table for the panes that need it (the Impulse map, the envelope of ``best``).

Both panes work in threads of their own; when they ask for the table of the
same recording, channel, wavelet, mode and depth, the first asker makes it
and the other waits for it instead of making it a second time.  If the maker
is stopped (its pane no longer wants the table), a waiter makes it itself.
Only the last table is kept (with the best node's coefficients, which the
envelope pane reads): its recording is held weakly, never kept alive by it.
"""

from __future__ import annotations

import threading
import weakref

from scalesieve.core import impulsive_bands as ib

_lock = threading.Lock()
#: (weak reference to the recording, the rest of the key, done event, {"table": ...})
_last: list = []


def table(recording, key: tuple, x, rate: float, wavelet: str, mode: str, depth: int,
          check=None) -> dict:
    """``ib.table(x, rate, wavelet, mode, depth, keep_best=True)``, made once per key.

    ``key`` names what ``x`` is besides the recording (the channel); the
    returned dict is shared: read it, do not change it.
    """
    full = (key, rate, wavelet, mode, depth)
    while True:
        with _lock:
            mine = not (_last and _last[0]() is recording and _last[1] == full)
            if mine:
                entry = [weakref.ref(recording), full, threading.Event(), {}]
                _last[:] = entry
            else:
                entry = list(_last)
        done, holder = entry[2], entry[3]
        if mine:
            try:
                holder["table"] = ib.table(x, rate, wavelet, mode, depth, keep_best=True,
                                           check=check)
            except BaseException:
                with _lock:
                    if _last and _last[3] is holder:
                        _last.clear()
                raise
            finally:
                done.set()
            return holder["table"]
        while not done.wait(0.05):
            if check is not None:
                check()
        if "table" in holder:
            return holder["table"]
        # its maker was stopped: ask again (this thread may make it now)


def forget() -> None:
    """Let the kept table go (tests; a closed window)."""
    with _lock:
        _last.clear()
