"""Keep what C libraries print on stderr off the user's terminal.

libsndfile's MPEG decoder (libmpg123) writes notes such as "Illegal
Audio-MPEG-Header" straight to file descriptor 2 while it probes a damaged
file; the contract allows one line on stderr, ours.  Around such calls the
descriptor points at a temporary file, whose text is dropped (the reader
raises its own plain error instead).
"""

from __future__ import annotations

import contextlib
import os
import sys
import tempfile
import threading
from collections.abc import Iterator

_lock = threading.Lock()
_depth = 0
_saved_fd: int | None = None
_sink = None


@contextlib.contextmanager
def quiet_native_stderr() -> Iterator[None]:
    """Send descriptor 2 to a scratch file for the duration; nests and is thread-safe.

    Python's own ``sys.stderr`` is flushed first, so nothing written before is lost.
    """
    global _depth, _saved_fd, _sink
    with _lock:
        if _depth == 0:
            try:
                sys.stderr.flush()
            except (AttributeError, OSError, ValueError):
                pass
            try:
                _sink = tempfile.TemporaryFile()
                _saved_fd = os.dup(2)
                os.dup2(_sink.fileno(), 2)
            except OSError:
                # No descriptor 2 to borrow (a windowed program): nothing to hide.
                if _sink is not None:
                    _sink.close()
                _sink, _saved_fd = None, None
        _depth += 1
    try:
        yield
    finally:
        with _lock:
            _depth -= 1
            if _depth == 0 and _saved_fd is not None:
                os.dup2(_saved_fd, 2)
                os.close(_saved_fd)
                _sink.close()
                _sink, _saved_fd = None, None
