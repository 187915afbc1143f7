"""Time columns of text tables: ISO 8601 timestamps, elapsed clock time, steps and gaps.

A time column holds numbers in a unit its header names (see
``csv_reader.time_unit_of``), ISO 8601 date-times (``2026-03-01T08:00:00.000``,
a space instead of ``T``, fractional seconds, an optional ``Z`` or ``+01:00``),
or elapsed clock time ``hh:mm:ss.fff``. Each becomes seconds from the first
row, so the rate check is the same for all of them; a timestamp column also
gives the recording's own clock (``start_time``).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import datetime, timedelta

import numpy as np

from scalesieve.errors import ScalesieveError

#: Largest relative spread of time steps, (max - min) / median, still called uniform.
UNIFORM_STEP_TOLERANCE = 1e-3

#: A step this many typical steps long or more is a jump of the clock, not jitter.
JUMP_FACTOR = 1.5

#: At most this many samples are made up to fill the jumps of one file.
MOST_FILLED = 50_000_000

_ISO_RE = re.compile(
    r"^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})(?::(\d{2})(?:[.,](\d+))?)?"
    r"(Z|[+-]\d{2}(?::?\d{2})?)?$")
_CLOCK_RE = re.compile(r"^(\d+):([0-5]\d):([0-5]\d(?:[.,]\d+)?)$")


def cell_kind(cell: str) -> str | None:
    """``"iso"`` for an ISO 8601 date-time, ``"clock"`` for ``hh:mm:ss(.fff)``, else ``None``."""
    c = cell.strip()
    if len(c) < 7 or not c[:1].isdigit():
        return None
    if _ISO_RE.match(c):
        return "iso"
    if _CLOCK_RE.match(c):
        return "clock"
    return None


def split_date_time(cells: list[str]) -> list[str]:
    """Whitespace-separated rows split ``2026-03-01 08:00:00`` in two; join it again."""
    if (len(cells) >= 2 and len(cells[0]) == 10 and cells[0][4:5] == "-"
            and cell_kind(f"{cells[0]} {cells[1]}") == "iso"):
        return [f"{cells[0]} {cells[1]}"] + cells[2:]
    return cells


@dataclass
class ClockForm:
    """How a timestamp column writes its clock, so output can continue it alike."""

    sep: str = "T"            # between date and time
    digits: int = 3           # fractional digits of the seconds
    offset: str | None = None  # "Z", "+01:00" or None (local time, no offset)

    def to_json(self) -> dict:
        return {"sep": self.sep, "digits": self.digits, "offset": self.offset}


def clock_form_of(cell: str) -> ClockForm:
    m = _ISO_RE.match(cell.strip())
    if m is None:  # pragma: no cover - callers classify first
        return ClockForm()
    offset = m.group(8)
    if offset and offset != "Z" and ":" not in offset:
        offset = offset[:3] + ":" + (offset[3:] or "00")
    return ClockForm(sep=cell.strip()[10], digits=len(m.group(7) or ""), offset=offset)


def parse_iso(cell: str) -> datetime:
    """One ISO 8601 date-time; ``ValueError`` naming the cell when it is none."""
    c = cell.strip()
    if cell_kind(c) != "iso":
        raise ValueError(f"{c!r} is not an ISO 8601 date and time")
    return datetime.fromisoformat(c.replace(",", "."))


def clock_seconds(cell: str) -> float:
    """Seconds of an elapsed clock time ``hh:mm:ss.fff``."""
    m = _CLOCK_RE.match(cell.strip())
    if m is None:
        raise ValueError(f"{cell.strip()!r} is not a clock time hh:mm:ss")
    return int(m.group(1)) * 3600.0 + int(m.group(2)) * 60.0 + float(m.group(3).replace(",", "."))


def iso_converter(origin: datetime):
    """A cell -> seconds since ``origin`` converter for numpy's loadtxt and row parsing."""
    aware = origin.tzinfo is not None

    def convert(cell: str) -> float:
        t = parse_iso(cell)
        if (t.tzinfo is not None) != aware:
            raise ValueError(f"{cell.strip()!r} mixes timestamps with and without a UTC "
                             "offset")
        return (t - origin) / timedelta(seconds=1)

    return convert


def unwrap_midnight(t: np.ndarray) -> np.ndarray:
    """Time-of-day clocks start again at 00:00:00 after midnight: carry the day on."""
    steps = np.diff(t)
    wraps = (steps < 0) & (steps + 86400.0 > 0) & (np.abs(steps + 86400.0) < 3600.0)
    if not wraps.any():
        return t
    out = t.copy()
    out[1:] += 86400.0 * np.cumsum(wraps)
    return out


@dataclass
class TimeAxis:
    """What a time column says: the rate, and the jumps filled (row index, samples added)."""

    rate: float
    gaps: list[tuple[int, int]]


def describe_time(t: float, origin: datetime | None) -> str:
    if origin is None:
        return f"{t:.9g} s"
    at = origin + timedelta(seconds=float(t))
    return at.isoformat(timespec="milliseconds" if at.microsecond % 1000 == 0 else "auto")


def _duration(s: float) -> str:
    a = abs(s)
    if a >= 3600:
        return f"{s / 3600:.6g} h"
    if a >= 60:
        return f"{s / 60:.6g} min"
    return f"{s:.6g} s"


def not_increasing(t_before: float, t_here: float, line: int, source: str,
                   origin: datetime | None) -> ScalesieveError:
    """The error for a time value not above the one before it (on ``line``)."""
    step = t_here - t_before
    back = "does not increase" if step == 0 else \
        f"does not increase (it goes back by {_duration(-float(step))})"
    return ScalesieveError(
        f"time {back} ({describe_time(t_before, origin)}, then "
        f"{describe_time(t_here, origin)})", source=source, line=line)


def not_uniform(spread: float, step: float, typical: float, line: int,
                source: str) -> ScalesieveError:
    """The error for steps whose spread passes the limit; ``step`` the farthest off."""
    return ScalesieveError(
        f"time steps are not uniform (relative spread {spread:.3g}, limit "
        f"{UNIFORM_STEP_TOLERANCE:g}): a step of {step:.9g} s where most are "
        f"{typical:.9g} s; resample the data, or give --rate to treat the rows as "
        "evenly spaced", source=source, line=line)


def clock_jump(t_before: float, t_here: float, typical: float, line: int, source: str,
               origin: datetime | None) -> ScalesieveError:
    """The error for a jump of the clock (without ``--fill-gaps``)."""
    return ScalesieveError(
        f"time steps are not uniform: the clock jumps by "
        f"{_duration(float(t_here - t_before))} (from "
        f"{describe_time(t_before, origin)} to {describe_time(t_here, origin)}) where "
        f"steps are {typical:.9g} s; use --fill-gaps linear to fill the gap, or "
        "split the file there", source=source, line=line)


def tidy_rate(rate: float, jumps: bool) -> float:
    """Drop float noise from unit scaling (1e5 rather than 100000.00000000001)."""
    if abs(rate - round(rate)) <= 1e-9 * rate:
        return float(round(rate))
    if jumps and abs(rate - round(rate)) <= 1e-6 * rate:
        return float(round(rate))
    return rate


def analyse_steps(t: np.ndarray, line_of, source: str, *, origin: datetime | None = None,
                  fill: str | None = None) -> TimeAxis:
    """Rate from a time axis in seconds; an error when it is not evenly spaced.

    A clock that jumps forward (a logger paused, a daylight-saving change) is
    an error naming the line and the jump, unless ``fill`` is ``"linear"``:
    then each jump becomes a gap of whole steps that the caller fills.
    (``stream.text_source`` makes the same checks over a table read in blocks.)
    """
    if t.size < 2:
        raise too_few_rows(source)
    steps = np.diff(t)
    bad = np.flatnonzero(~(steps > 0))
    if bad.size:
        i = int(bad[0]) + 1
        raise not_increasing(t[i - 1], t[i], line_of(i), source, origin)
    typical = float(np.median(steps))
    jumps = np.flatnonzero(steps >= JUMP_FACTOR * typical)
    regular = steps if not jumps.size else np.delete(steps, jumps)
    spread = float(regular.max() - regular.min()) / typical
    if not spread < UNIFORM_STEP_TOLERANCE:
        dev = np.abs(steps - typical)
        dev[jumps] = -1.0
        i = int(np.argmax(dev)) + 1
        raise not_uniform(spread, steps[i - 1], typical, line_of(i), source)
    gaps: list[tuple[int, int]] = []
    if jumps.size:
        i = int(jumps[0]) + 1
        if fill is None:
            raise clock_jump(t[i - 1], t[i], typical, line_of(i), source, origin)
        step = regular_step(float(t[0]), float(t[-1]), steps[jumps], regular.size)
        gaps = [(int(j) + 1, int(round(steps[j] / step)) - 1) for j in jumps]
        check_filled(gaps, source, lambda: line_of(i))
        rate = 1.0 / step
    else:
        # The whole span is far more precise than any single printed step.
        rate = float((t.size - 1) / (t[-1] - t[0]))
    return TimeAxis(tidy_rate(rate, bool(jumps.size)), gaps)


def regular_step(first: float, last: float, jump_steps, regular_count: int) -> float:
    """The mean of a clock's regular steps: its span less the jumps, over their count.

    The span is far more precise than adding up the printed steps, and the same
    number comes out whether the column is read whole or in blocks
    (``stream.text_source``): the jumps are added exactly (``math.fsum``).
    """
    return (last - first - math.fsum(float(v) for v in jump_steps)) / regular_count


def check_filled(gaps: list[tuple[int, int]], source: str, line) -> None:
    """Refuse jumps that would need more than ``MOST_FILLED`` made-up samples
    (``line()``: the line of the first jump, for the message)."""
    added = sum(m for _, m in gaps)
    if added > MOST_FILLED:
        raise ScalesieveError(
            f"the clock's jumps would need {added:,} filled samples (more than "
            f"{MOST_FILLED:,}); split the file at the jumps", source=source, line=line())


def jump_rows(a: np.ndarray, b: np.ndarray, missing: int, first: int = 1,
              stop: int | None = None) -> np.ndarray:
    """Rows ``first .. stop - 1`` (default all ``missing``) of the ``missing`` rows a jump
    leaves out between rows ``a`` and ``b``, made by linear interpolation."""
    stop = missing + 1 if stop is None else stop
    w = (np.arange(first, stop, dtype=np.float64) / (missing + 1))[:, None]
    return a[None, :] + w * (b - a)[None, :]


def too_few_rows(source: str) -> ScalesieveError:
    return ScalesieveError("a single row cannot give a rate from its time column; "
                           "give --rate", source=source)


def fill_jumps(values: np.ndarray, gaps: list[tuple[int, int]]) -> np.ndarray:
    """Rows with each jump's missing samples added by linear interpolation.

    ``gaps`` holds (row index after the jump, samples missing before it).
    """
    if not gaps:
        return values
    pieces = []
    prev = 0
    for row, missing in gaps:
        pieces.append(values[prev:row])
        if missing > 0:
            pieces.append(jump_rows(values[row - 1], values[row], missing))
        prev = row
    pieces.append(values[prev:])
    return np.concatenate(pieces, axis=0)


def gap_warnings(t: np.ndarray, gaps: list[tuple[int, int]], rate: float, line_of,
                 origin: datetime | None) -> list[str]:
    """One line per filled jump: where, how long, how many samples were made up."""
    out = []
    for row, missing in gaps:
        jump = float(t[row] - t[row - 1])
        grid = (missing + 1) / rate
        note = ""
        if abs(jump - grid) > 0.01 / rate:
            note = f"; the jump is not a whole number of steps, later samples shift by {jump - grid:+.3g} s"
        out.append(f"line {line_of(row)}: the clock jumps by {_duration(jump)} (from "
                   f"{describe_time(t[row - 1], origin)} to {describe_time(t[row], origin)}); "
                   f"filled {missing} samples by linear interpolation{note}")
    return out


def format_timestamps(start: datetime, rate: float, start_index: int, count: int,
                      form: ClockForm | None) -> list[str]:
    """ISO 8601 timestamps of samples ``start_index ...`` continuing ``start``'s clock.

    Written in the input's form (separator, offset); the fractional digits
    are the input's, or more when the step needs them.
    """
    form = form or ClockForm()
    digits = form.digits
    step = 1.0 / rate
    for d in (digits, 3, 6, 9):
        if d >= digits and abs(step * 10**d - round(step * 10**d)) < 1e-6:
            digits = d
            break
    else:
        digits = 9
    unit = {0: "s", 1: "ms", 2: "ms", 3: "ms", 4: "us", 5: "us", 6: "us"}.get(digits, "ns")
    local = start.replace(tzinfo=None) if start.tzinfo is not None else start
    base = np.datetime64(local, "ns")
    offs = np.rint((np.arange(start_index, start_index + count, dtype=np.float64)
                    * (1e9 / rate))).astype("timedelta64[ns]")
    text = np.datetime_as_string(base + offs, unit=unit)
    cut = {1: -2, 2: -1, 4: -2, 5: -1, 7: -2, 8: -1}.get(digits, None)
    suffix = ""
    if start.tzinfo is not None:
        suffix = "Z" if form.offset == "Z" else (start.isoformat()[-6:] if form.offset is None
                                                 else form.offset)
    out = []
    for s in text.tolist():
        if cut is not None:
            s = s[:cut]
        if form.sep != "T":
            s = s[:10] + form.sep + s[11:]
        out.append(s + suffix)
    return out
