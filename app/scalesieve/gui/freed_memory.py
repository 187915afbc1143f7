"""Where the window's allocator setting lived; it is ``scalesieve.freed_memory`` now."""

from scalesieve.freed_memory import (M_MMAP_THRESHOLD, M_TRIM_THRESHOLD,  # noqa: F401
                                     MMAP_THRESHOLD, TRIM_THRESHOLD, keep_freed_memory)
