"""Qt event handlers that hand their own exceptions to the failure reporter.

An exception escaping a Python override of a Qt virtual method (``paintEvent``,
``resizeEvent``, an event filter, a table model's ``data``...) goes to PySide6, which
prints it and carries on; with PySide6 6.12 on CPython 3.11 that path leaves a reference
count wrong, and the interpreter crashes when it next collects garbage (a ``--snapshot``
run ended in a segmentation fault at exit).  pyqtgraph's own mouse dispatch
(``mouseClickEvent``, ``mouseDragEvent``, ``hoverEvent``) prints a traceback instead.
A handler wrapped here catches the exception and gives it to ``sys.excepthook``
(``gui.failure_dialog``'s reporter: a dialog and a log, or for a snapshot one line and
exit 1) itself, so neither ever sees it, and returns ``fallback`` to Qt.

Handlers that run for every frame, cell or mouse move (``once=True``) report each fault
once: the same exception type raised at the same line of the same handler is counted
afterwards, not reported again, so a paint that fails draws nothing more that frame and
the window shows one message, not one per frame.
"""

from __future__ import annotations

import functools
import sys
import traceback

#: faults of ``once`` handlers already reported: (handler, type, file, line) -> repeats since
_seen: dict[tuple, int] = {}


def reported(handler=None, *, fallback=None, once: bool = False):
    """Wrap a Qt handler so that its exceptions go to ``sys.excepthook``, not to Qt.

    Used bare (``@reported``) or with options (``@reported(fallback=False, once=True)``).

    Parameters
    ----------
    fallback : object
        What the handler returns to Qt when it failed (an event filter: ``False``, not
        consumed; a row count: ``0``); ``None`` for handlers that return nothing.
    once : bool
        Report each fault once (paint, hover, wheel, a model's ``data``): repeats of it
        are only counted (:func:`repeats`).
    """
    if handler is None:
        return functools.partial(reported, fallback=fallback, once=once)

    @functools.wraps(handler)
    def guarded(*args, **kwargs):
        try:
            return handler(*args, **kwargs)
        except Exception:   # noqa: BLE001 - every bug is reported, none reaches PySide6
            _report(handler, once)
            return fallback

    return guarded


def _report(handler, once: bool) -> None:
    etype, value, tb = sys.exc_info()
    try:
        if once:
            key = _fault_key(handler, etype, tb)
            if key in _seen:
                _seen[key] += 1
                return
            _seen[key] = 0
        sys.excepthook(etype, value, tb)
    except Exception as exc:  # noqa: BLE001 - a failing hook must not reach Qt either
        print(f"scalesieve: error while reporting an error: {exc}", file=sys.stderr)
    finally:
        # The handler's locals go now (a QPainter among them ends its painting here, not
        # when the exception is collected after Qt has finished the frame).
        traceback.clear_frames(tb)


def _fault_key(handler, etype, tb) -> tuple:
    while tb.tb_next is not None:
        tb = tb.tb_next
    return (handler.__module__, handler.__qualname__, etype,
            tb.tb_frame.f_code.co_filename, tb.tb_lineno)


def repeats(handler=None) -> int:
    """How many faults of ``once`` handlers (of ``handler`` alone, if given) were counted,
    not reported."""
    if handler is not None:
        handler = getattr(handler, "__wrapped__", handler)
        name = (handler.__module__, handler.__qualname__)
        return sum(n for key, n in _seen.items() if key[:2] == name)
    return sum(_seen.values())
