"""How many threads the kurtosis table and the envelope spectrum share their work among.

PyWavelets' filtering, NumPy's sums and SciPy's FFTs run without holding
Python's lock, so a few threads work at once.  By default every core is
used, at most ``MOST``; the environment variable ``SCALESIEVE_THREADS``
(or a command's ``--threads N``) sets the number, 1 keeps all the work in
the calling thread.  No figure depends on it: the work is cut the same way
whatever the count, and each sum is added in the same order.
"""

from __future__ import annotations

import os

#: the environment variable that sets the number of threads
ENV = "SCALESIEVE_THREADS"
#: at most this many by default (the work is memory-bound beyond a few cores)
MOST = 4


def count(asked: int | None = None) -> int:
    """Threads to use: ``asked`` if given, else ``$SCALESIEVE_THREADS``, else the cores (<= MOST).

    Raises ``ValueError`` naming the bad value when either is not a whole number >= 1.
    """
    if asked is not None:
        if isinstance(asked, bool) or not isinstance(asked, int) or asked < 1:
            raise ValueError(f"threads {asked!r} must be a whole number, 1 or more")
        return asked
    text = os.environ.get(ENV, "").strip()
    if text:
        try:
            value = int(text)
        except ValueError:
            value = 0
        if value < 1:
            raise ValueError(f"{ENV}={text!r} must be a whole number, 1 or more")
        return value
    return max(1, min(MOST, os.cpu_count() or 1))
