"""Reads of a byte range that check the file's size first (no memory map, no bus error).

A memory map of a file another program shortens kills the process when a
page beyond the new end is touched; a plain read of a range the file no
longer holds just comes back short.  So the size is checked before a range is
read, and a read that comes back short anyway is one clear message.
"""

from __future__ import annotations

import os

import numpy as np

from scalesieve.errors import ScalesieveError


def read_range(fh, at: int, into: np.ndarray, frames: tuple[int, int], source: str) -> None:
    """Fill ``into`` (C-contiguous) with the file's bytes from offset ``at``.

    ``fh``: a file opened in binary mode; ``frames``: the frames the range holds,
    for the message when the file is shorter than the range's end.
    """
    count = into.nbytes
    need = at + count
    got = 0
    if os.fstat(fh.fileno()).st_size >= need:
        view = memoryview(into).cast("B")
        fh.seek(at)
        while got < count:
            n = fh.readinto(view[got:])
            if not n:
                break
            got += n
    if got < count:
        size = os.fstat(fh.fileno()).st_size
        raise ScalesieveError(f"the file became shorter while it was read (frames {frames[0]} "
                              f"to {frames[1]} need its first {need} bytes, it now holds "
                              f"{size})", source=source)
