"""The process keeps freed working arrays for reuse (glibc's allocator).

Work on a long recording makes temporaries of a few to a few tens of
megabytes: a window edit's, and every block of the transforms, thresholds
and figures the commands run.  By default glibc hands each back to the
system when it is freed, so the next one is fresh pages that the kernel
must find and zero (and, on a virtual machine, the host may first have to
back): on 100 M samples that was about half of a region edit's time, and a
``clean`` of 10 M samples took about 90 000 page faults where it takes
about 24 000 with these settings.  Blocks up to 32 MiB (glibc's ceiling for
this setting) then come from the heap, and up to 256 MiB of free memory at
its top is kept, so they are reused.  Larger arrays (whole signals) are
still given back when freed.  With another C library this does nothing.

The window (``gui.app.make_application``) and the command line
(``cli.main``, for every subcommand) ask for it: processes of our own.  The
Python API leaves the caller's process as it is.
"""

from __future__ import annotations

import ctypes
import sys

#: glibc's mallopt parameters
M_TRIM_THRESHOLD = -1
M_MMAP_THRESHOLD = -3
#: blocks up to this size come from the heap and are reused once freed
MMAP_THRESHOLD = 32 << 20
#: free memory kept at the top of the heap before it is given back
TRIM_THRESHOLD = 256 << 20


def keep_freed_memory() -> bool:
    """Ask the C library to keep freed blocks for reuse; True when it took the settings."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt     # the process's own C library
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    return bool(mallopt(M_MMAP_THRESHOLD, MMAP_THRESHOLD)
                and mallopt(M_TRIM_THRESHOLD, TRIM_THRESHOLD))
