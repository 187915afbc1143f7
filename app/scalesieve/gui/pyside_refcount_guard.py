"""Guard against PySide6 dropping references to ``None``, ``True`` and ``False``.

Affected, as measured by :func:`leaking`: PySide6 6.12.0 on CPython 3.11
(the versions this project pins and tests with).  CPython 3.12 and later are
not affected (these objects are immortal there), and a PySide6 without the
leak is left alone.  Called once from application start-up
(``scalesieve.gui.app.make_application``), never at import.

PySide6 6.12 on Python 3.11 gives away one reference to ``None`` for many
calls of a method that returns nothing (``setRect``, ``setPos``...), and
one reference to ``True`` or ``False`` each time a bool travels through a
signal (a checkbox toggled, an action triggered).  After some thousands of
them the interpreter frees the object and aborts ("none_dealloc" /
"bool_dealloc: ... bug likely caused by a refcount error in a C
extension").  Python 3.12 made these objects immortal; on 3.11 we give the
affected ones a reference count that no session can use up.  Each leak is
measured first, so a fixed PySide6 is left alone.
"""

from __future__ import annotations

import ctypes
import sys

#: references added to an object the toolkit leaks
BALLAST = 1 << 40
_applied: set = set()


def _bool_leaks() -> bool:
    from PySide6.QtCore import QObject, Signal

    class _Probe(QObject):
        flag = Signal(bool)

    probe = _Probe()
    before = sys.getrefcount(True)
    for _ in range(8):
        probe.flag.emit(True)
    return sys.getrefcount(True) < before


def _none_leaks() -> bool:
    from PySide6.QtCore import QObject

    probe = QObject()
    before = sys.getrefcount(None)
    for _ in range(8):
        probe.setObjectName("probe")
    return sys.getrefcount(None) < before


def leaking() -> list:
    """The singletons this PySide6 drops references to."""
    out = []
    if _bool_leaks():
        out += [True, False]
    if _none_leaks():
        out.append(None)
    return out


def guard_leaked_singletons() -> list:
    """Give every leaked singleton a reference count it cannot run out of.

    Returns the objects given one now (empty when nothing leaks, on Python
    3.12 and later, or when already done).
    """
    if sys.version_info >= (3, 12):
        return []          # immortal objects: nothing to do
    done = []
    for obj in leaking():
        if id(obj) in _applied:
            continue
        # ob_refcnt is the first field of every object in a release build of CPython.
        ctypes.c_ssize_t.from_address(id(obj)).value += BALLAST
        _applied.add(id(obj))
        done.append(obj)
    return done
