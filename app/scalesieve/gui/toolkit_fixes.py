"""Work-arounds for defects of the GUI toolkit that would crash the window.

PySide6 6.12 on Python 3.11 gives away one reference to ``True`` or
``False`` each time a bool travels through a signal (a checkbox toggled, an
action triggered, any ``Signal(bool)``).  After a few hundred of them the
interpreter frees ``True`` and aborts ("bool_dealloc: deallocating True or
False").  Python 3.12 made the two objects immortal; on 3.11 we give them a
reference count that no session can use up.  The leak is measured first, so
a fixed PySide6 is left alone.
"""

from __future__ import annotations

import ctypes
import sys

_applied = False
#: references added to True and False when the toolkit leaks them
BALLAST = 1 << 40


def bool_signal_leaks() -> bool:
    """Does emitting a bool through a signal drop a reference to it?"""
    from PySide6.QtCore import QObject, Signal

    class _Probe(QObject):
        flag = Signal(bool)

    probe = _Probe()
    before = sys.getrefcount(True)
    for _ in range(8):
        probe.flag.emit(True)
    return sys.getrefcount(True) < before


def apply() -> bool:
    """Apply the fixes this toolkit needs; True when one was applied."""
    global _applied
    if _applied or sys.version_info >= (3, 12) or not bool_signal_leaks():
        return False
    for obj in (True, False):
        # ob_refcnt is the first field of every object in a release build of CPython.
        ctypes.c_ssize_t.from_address(id(obj)).value += BALLAST
    _applied = True
    return True
