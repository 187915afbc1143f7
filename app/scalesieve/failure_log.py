"""The one writer of failure logs: the details of an unexpected failure, kept for a report.

The command line, the window's error lines and its failure dialog all write
through here, with one set of rules:

- folder: ``$SCALESIEVE_LOG_DIR``, else platformdirs' ``user_log_dir("scalesieve")``,
  else (platformdirs missing or broken) ``scalesieve-logs`` in the temporary folder;
- name: ``<who>-failure-<date>-<time>-<microseconds>-<pid>.log`` (``who``: ``cli``
  or ``window``);
- content: versions, time, thread, command line, then the traceback;
- the newest ``KEEP_LOGS`` failure logs are kept, older ones removed.

No Qt here: the command line uses it too.
"""

from __future__ import annotations

import datetime
import os
import platform
import sys
import threading
import traceback

from scalesieve import __version__

#: Environment variable naming the log folder (tests, portable installs).
LOG_DIR_ENV = "SCALESIEVE_LOG_DIR"
#: Failure logs kept; older ones are removed when a new one is written.
KEEP_LOGS = 50
_MARK = "-failure-"


def log_dir() -> str:
    """``$SCALESIEVE_LOG_DIR`` or platformdirs' ``user_log_dir("scalesieve")``."""
    env = os.environ.get(LOG_DIR_ENV)
    if env:
        return env
    try:
        from platformdirs import user_log_dir

        return user_log_dir("scalesieve", appauthor=False)
    except Exception:  # platformdirs missing or broken: a temporary folder will do
        import tempfile

        return os.path.join(tempfile.gettempdir(), "scalesieve-logs")


def _head(who: str) -> str:
    qt = sys.modules.get("PySide6")
    qt = f"; PySide6 {getattr(qt, '__version__', '(version unknown)')}" if qt else ""
    return "\n".join([f"scalesieve {__version__} ({who})",
                      f"time: {datetime.datetime.now().isoformat(timespec='seconds')}",
                      f"python: {sys.version.split()[0]} on {platform.platform()}{qt}",
                      f"thread: {threading.current_thread().name}",
                      f"argv: {sys.argv!r}", "", ""])


def details_text(etype, value, tb, who: str = "window") -> str:
    """What goes into the log (and the window's details section): versions, then the traceback."""
    return _head(who) + "".join(traceback.format_exception(etype, value, tb))


def write_log(details: str, who: str = "window") -> str | None:
    """Write ``details`` to a new failure log; its path, or None if it cannot be written."""
    try:
        folder = log_dir()
        os.makedirs(folder, exist_ok=True)
        stamp = datetime.datetime.now().strftime("%Y%m%d-%H%M%S-%f")
        path = os.path.join(folder, f"{who}{_MARK}{stamp}-{os.getpid()}.log")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(details)
        _prune(folder)
        return path
    except OSError:
        return None


def log_exception(exc: BaseException, who: str, details: str | None = None) -> str | None:
    """Log ``exc`` (its traceback, or ``details`` already formatted); the path or None."""
    if details:
        return write_log(_head(who) + details, who)
    return write_log(details_text(type(exc), exc, exc.__traceback__, who), who)


def _prune(folder: str) -> None:
    logs = sorted((n for n in os.listdir(folder) if _MARK in n and n.endswith(".log")),
                  key=lambda n: n.split(_MARK, 1)[1])
    for name in logs[:-KEEP_LOGS]:
        try:
            os.unlink(os.path.join(folder, name))
        except OSError:
            pass
