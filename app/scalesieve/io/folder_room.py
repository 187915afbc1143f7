"""How much room a folder's filesystem has, and a folder that can hold no files at all.

Every free-space check (audio writing, a text table's temporary rows, a batch's output
folder) asks here, so a filesystem that reports no size (``/proc``, ``/sys``) reads the
same everywhere: the folder cannot hold files, not "the disk is full".
"""

from __future__ import annotations

import os
import shutil

from scalesieve.errors import ScalesieveError


def free_bytes(folder: str | os.PathLike, *, source: str | None = None,
               hint: str = "choose another folder") -> int | None:
    """Bytes free in ``folder``'s filesystem; None when the system cannot say.

    Raises
    ------
    ScalesieveError
        When the filesystem reports a size of 0: a pseudo-filesystem such as
        ``/proc`` holds no files, whatever its "free" figure.  The message
        names the folder and ends with ``hint``; ``source`` is what the
        error is about (default the folder).
    """
    folder = os.path.abspath(os.fspath(folder))
    try:
        usage = shutil.disk_usage(folder)
    except OSError:
        return None
    if usage.total == 0:
        raise ScalesieveError(
            f"the folder {folder} cannot hold files (its filesystem reports no size, as "
            f"system folders like /proc do); {hint}", source=source or folder)
    return int(usage.free)
