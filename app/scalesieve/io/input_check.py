"""Check that an input file exists and can be read, with one plain message if not."""

from __future__ import annotations

import errno
import math
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

    One blocked pass, so checking a long recording costs one read of it and no
    full-size temporary: a block whose least and greatest values lie within
    ±MAX holds none of the three (a NaN makes both NaN, and NaN fails every
    comparison); only a block that fails is looked through value by value.
    """
    limit = min(MAX_ABS_SAMPLE, float(np.finfo(values.dtype).max))
    for start in range(0, values.shape[0], block):
        part = values[start:start + block]
        if part.size and -limit <= part.min() and part.max() <= limit:
            continue
        ok = np.abs(part) <= limit
        if not ok.all():
            r, c = np.argwhere(~ok)[0]
            return start + int(r), int(c)
    return None


def check_rate(rate, source: str | None = None) -> float | None:
    """``rate`` as a positive finite float (or ``None``), else a ScalesieveError.

    The message names both spellings: ``--rate`` on the command line, ``rate=`` in the API.
    """
    if rate is None:
        return None
    try:
        r = float(rate)
    except (TypeError, ValueError):
        raise ScalesieveError(f"the rate (--rate, rate=) must be a number of Hz, got {rate!r}",
                              source=source) from None
    if not math.isfinite(r) or r <= 0:
        raise ScalesieveError(f"the rate (--rate, rate=) must be a positive number of Hz, got {rate!r}",
                              source=source)
    return r


def check_channel(channel, count: int, source: str | None = None,
                  names: list[str] | None = None) -> int | None:
    """Validate a 0-based channel index (or, given ``names``, a channel's name).

    The message names both spellings: ``--channel`` on the command line, ``channel=`` in the API.
    """
    if channel is None:
        return None
    if isinstance(channel, str) and not channel.strip().isdigit():
        wanted = channel.strip()
        if names is not None:
            for rule in (lambda n: n == wanted, lambda n: n.lower() == wanted.lower(),
                         lambda n: n.split(" [")[0].lower() == wanted.lower()):
                hits = [k for k, n in enumerate(names) if rule(n)]
                if len(hits) == 1:
                    return hits[0]
        listed = ", ".join(repr(n) for n in (names or [])[:12])
        raise ScalesieveError(
            f"channel {wanted!r} (--channel, channel=) names no channel; the file's channels are {listed}"
            if names else f"the channel (--channel, channel=) must be a 0-based channel number or a "
            f"channel's name, "
            f"got {channel!r}", source=source)
    if isinstance(channel, bool):
        raise ScalesieveError(f"the channel (--channel, channel=) must be a 0-based channel number, got {channel!r}",
                              source=source)
    try:
        k = int(channel) if isinstance(channel, str) else channel.__index__()
    except (TypeError, ValueError, AttributeError):
        raise ScalesieveError(f"the channel (--channel, channel=) must be a 0-based channel number, got {channel!r}",
                              source=source) from None
    if not 0 <= k < count:
        plural = "channel" if count == 1 else "channels"
        raise ScalesieveError(
            f"channel {k} does not exist; the file has {count} {plural} "
            f"(0-based: 0 to {count - 1})", source=source)
    return k
