"""Check that an input file exists and can be read, with one plain message if not."""

from __future__ import annotations

import errno
import os
import stat

import numpy as np

from scalesieve.errors import ScalesieveError

#: Largest sample magnitude accepted.  Squares and sums of squares of bigger
#: values overflow float64 (energies, RMS, thresholds); no recorder writes
#: them, so such a value means a damaged file or a wrong column.
MAX_ABS_SAMPLE = 1e100


def os_error_message(exc: OSError) -> str:
    """A short, plain reason for an operating-system error while reading."""
    if isinstance(exc, FileNotFoundError):
        return "file not found"
    if isinstance(exc, IsADirectoryError):
        return "is a folder, not a file"
    if isinstance(exc, PermissionError):
        return "cannot read the file (permission denied)"
    if exc.errno == errno.EIO:
        return "cannot read the file (input/output error)"
    return f"cannot read the file ({exc.strerror or exc})"


def check_readable(path: str | os.PathLike[str]) -> tuple[str, int]:
    """Return ``(path as str, size in bytes)`` of a readable, non-empty file.

    Raises
    ------
    ScalesieveError
        Missing file, a folder, no permission, not a regular file, or empty.
    """
    source = os.fspath(path)
    if isinstance(source, bytes):  # pragma: no cover - bytes paths are not used
        source = os.fsdecode(source)
    if not source:
        raise ScalesieveError("no input file given")
    try:
        st = os.stat(source)
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None
    if os.path.isdir(source):
        raise ScalesieveError("is a folder, not a file", source=source)
    if not stat.S_ISREG(st.st_mode):
        raise ScalesieveError("is not a regular file", source=source)
    try:
        # Opening proves the permission; os.access can disagree (ACLs, root).
        with open(source, "rb") as fh:
            fh.read(1)
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None
    if st.st_size == 0:
        raise ScalesieveError("file is empty", source=source)
    return source, int(st.st_size)


def first_too_large(values: np.ndarray, block: int = 1 << 20) -> tuple[int, int] | None:
    """``(row, column)`` of the first value beyond ``MAX_ABS_SAMPLE``, or ``None``.

    Scanned in blocks so a long recording needs no full-size temporary.
    """
    if float(np.finfo(values.dtype).max) <= MAX_ABS_SAMPLE:
        return None  # float32 cannot hold such a value (and 1e100 does not fit in it)
    for start in range(0, values.shape[0], block):
        part = values[start:start + block]
        big = np.abs(part) > MAX_ABS_SAMPLE
        if big.any():
            r, c = np.argwhere(big)[0]
            return start + int(r), int(c)
    return None


def first_unusable(values: np.ndarray, block: int = 1 << 16) -> tuple[int, int] | None:
    """``(row, column)`` of the first NaN, infinite or too large value, or ``None``.

    One blocked pass (``not |x| <= MAX`` is true for all three), so checking a
    long recording costs one read of it and no full-size temporary.
    """
    limit = min(MAX_ABS_SAMPLE, float(np.finfo(values.dtype).max))
    for start in range(0, values.shape[0], block):
        part = values[start:start + block]
        ok = np.abs(part) <= limit
        if not ok.all():
            r, c = np.argwhere(~ok)[0]
            return start + int(r), int(c)
    return None
