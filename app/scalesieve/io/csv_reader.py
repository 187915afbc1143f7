"""Read numeric text tables (CSV, TSV, TXT, DAT) into a :class:`Recording`.

What is accepted (see docs/reference.md, "CSV/TSV/TXT input"):

- delimiter comma, semicolon, tab, runs of whitespace (or ``|``), and a
  decimal comma, found together from the first rows;
- lines starting with ``#`` are comments (and ``#`` ends a data row early);
- an optional header row naming the columns, optionally followed by a row of
  units (``ms;µm/m;µm/m``), which is joined to the names as ``name [unit]``;
- a first column whose header names time (``time``, ``t``, ``time [ms]``,
  ``t (s)``, ``[s]``, ``time_ms``, ``time_us``, ``t / ms``...) is the time axis,
  in seconds unless its unit says otherwise; the rate comes from it and its
  steps must be uniform;
- UTF-8 (with or without BOM), UTF-16 with BOM, otherwise Latin-1; LF, CRLF
  or CR line ends; a trailing delimiter on every row.

Every problem raises :class:`~scalesieve.errors.ScalesieveError` with the
path as given and, where it points at one, the 1-based line number.
"""

from __future__ import annotations

import io
import math
import os
import re
import warnings
from dataclasses import dataclass, field
from datetime import timezone

import numpy as np

from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.io import time_column as tc
# cells, dialects and text decoding: text_dialect (names importable from here as before)
from scalesieve.io.text_dialect import (  # noqa: F401
    GAP_TOKENS, Dialect, _NOT_A_NUMBER, _SAMPLE_CHARS, _data_part, _is_comment_or_blank, _is_numeric,
    _lines, cell_value, decode_text, detect_dialect, looks_like_text, split_cells)
from scalesieve.io.gaps import check_fill_method, fill_linear
# check_rate and check_channel live in input_check (every reader uses them); still importable here
from scalesieve.io.input_check import (MAX_ABS_SAMPLE, check_channel, check_rate,  # noqa: F401
                                       check_readable, first_too_large, os_error_message)

#: Largest relative spread of time steps, (max - min) / median, still called uniform.
UNIFORM_STEP_TOLERANCE = tc.UNIFORM_STEP_TOLERANCE


#: Seconds per unit of a time column.
TIME_UNITS = {
    "s": 1.0, "sec": 1.0, "secs": 1.0, "second": 1.0, "seconds": 1.0,
    "ms": 1e-3, "msec": 1e-3, "millisecond": 1e-3, "milliseconds": 1e-3,
    "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "usec": 1e-6, "microsecond": 1e-6,
    "microseconds": 1e-6,
    "ns": 1e-9, "nsec": 1e-9,
    "min": 60.0, "h": 3600.0,
}
# Unit suffixes distinctive enough to mark a time column on any name (``accel_ms``
# would be odd, ``pressure_s`` is plausible for something else).
_DISTINCT_SUFFIX_UNITS = ("ms", "msec", "us", "µs", "μs", "usec", "ns")
_TIME_WORDS = frozenset({"time", "t", "timestamp", "elapsed", "zeit", "temps", "tiempo",
                         "datetime", "date_time", "date time", "date/time", "clock"})
_PLAIN_UNIT_HEADERS = frozenset({"seconds", "sec", "secs", "ms", "msec", "us", "µs", "μs",
                                 "usec"})

_BRACKET_RE = re.compile(r"^(.*?)\s*[\[(]\s*([^\])]*?)\s*[\])]$")
_SLASH_RE = re.compile(r"^(.*?)\s*/\s*(\S+)$")
_UNDERSCORE_RE = re.compile(r"^(.+?)_([a-zµμ]+)$")
_SPACE_RE = re.compile(r"^(.+?) ([a-zµμ]+)$")

_SAMPLE_LINES = 200          # rows looked at to find the dialect and the header


@dataclass
class TextLayout:
    """What the top of a text table says about the rest of it."""

    dialect: Dialect
    columns: int                         # cells per data row
    names: list[str] | None              # column names from the header, else None
    header_lines: list[int]              # 1-based lines holding the header (and units)
    data_offset: int                     # character offset of the first data row
    data_line: int                       # its 1-based line number
    time_scale: float | None             # seconds per unit of column 0, when it is time
    time_unit: str | None
    encoding: str
    sample_rows: list[tuple[int, str]] = field(default_factory=list)
    # "number" (in time_unit), "iso" (ISO 8601 date-times) or "clock" (hh:mm:ss)
    time_kind: str | None = None
    time_origin: object = None           # datetime of the first row, for "iso"
    clock_form: object = None            # time_column.ClockForm, for "iso"

    def time_converter(self):
        """Cell -> seconds for column 0 when it holds timestamps or clock times, else None."""
        if self.time_kind == "iso":
            return tc.iso_converter(self.time_origin)
        if self.time_kind == "clock":
            return tc.clock_seconds
        return None


def time_unit_of(name: str) -> tuple[float, str] | None:
    """``(seconds per unit, unit)`` when a column header names time, else ``None``.

    Raises
    ------
    ValueError
        When the name says time but carries a unit that is not a time unit.
    """
    n = name.strip().lower()
    if not n:
        return None
    if n in _TIME_WORDS:
        return 1.0, "s"
    if n in _PLAIN_UNIT_HEADERS:
        return TIME_UNITS[n], n
    m = _BRACKET_RE.match(n)
    if m:
        base, unit = m.group(1).strip(), m.group(2).strip()
        if unit in TIME_UNITS:
            return TIME_UNITS[unit], unit
        if base in _TIME_WORDS:
            raise ValueError(f"time column {_quoted(name)} has unit {_quoted(unit)}; "
                             f"use one of s, ms, us, ns, min, h")
        return None
    m = _SLASH_RE.match(n)
    if m and m.group(1).strip() in _TIME_WORDS:
        unit = m.group(2)
        if unit in TIME_UNITS:
            return TIME_UNITS[unit], unit
        raise ValueError(f"time column {_quoted(name)} has unit {_quoted(unit)}; "
                         f"use one of s, ms, us, ns, min, h")
    m = _UNDERSCORE_RE.match(n)
    if m:
        base, unit = m.group(1).strip(), m.group(2)
        if unit in _DISTINCT_SUFFIX_UNITS or (unit in TIME_UNITS and base in _TIME_WORDS):
            return TIME_UNITS[unit], unit
    m = _SPACE_RE.match(n)
    if m and m.group(1).strip() in _TIME_WORDS and m.group(2) in TIME_UNITS:
        return TIME_UNITS[m.group(2)], m.group(2)
    return None


def _merge_unit_tokens(tokens: list[str], k: int) -> list[str]:
    """Whitespace headers split ``time [s]`` in two; join unit tokens to their name."""
    out: list[str] = []
    for tok in tokens:
        if out and len(tokens) > k and tok[:1] in "[(":
            out[-1] = f"{out[-1]} {tok}"
        else:
            out.append(tok)
    return out


def _unique(names: list[str]) -> list[str]:
    seen: dict[str, int] = {}
    out = []
    for name in names:
        if name in seen:
            seen[name] += 1
            candidate = f"{name}_{seen[name]}"
            while candidate in seen:
                seen[name] += 1
                candidate = f"{name}_{seen[name]}"
            out.append(candidate)
            seen[candidate] = 1
        else:
            seen[name] = 1
            out.append(name)
    return out


def scan_layout(text: str, source: str, encoding: str = "utf-8") -> TextLayout:
    """Find dialect, header, units row and time column from the top of ``text``."""
    rows: list[tuple[int, int, str]] = []
    for lineno, offset, line in _lines(text):
        if _is_comment_or_blank(line):
            continue
        # Spaces go, a trailing tab stays: it may end an empty last header cell.
        rows.append((lineno, offset, line.rstrip("\r\n").strip(" ")))
        if len(rows) >= _SAMPLE_LINES or offset > _SAMPLE_CHARS:
            break
    if not rows:
        raise ScalesieveError("holds no data rows (only comments or blank lines)", source=source)
    # Data rows are read without their '#' comment; the first row may be a header.
    sample = [rows[0][2]] + [_data_part(r[2]) for r in rows[1:]]
    sample = [s for s in sample if s]
    dialect, k = detect_dialect(sample)

    first_cells = split_cells(rows[0][2], dialect)
    header = any(not _is_numeric(c, dialect.decimal) and not tc.cell_kind(c)
                 for c in first_cells)
    names: list[str] | None = None
    header_lines: list[int] = []
    data_index = 0
    if header:
        header_lines.append(rows[0][0])
        data_index = 1
        cells = first_cells
        if dialect.delimiter is None and len(cells) != k:
            cells = _merge_unit_tokens(cells, k)
        if len(cells) != k:
            raise ScalesieveError(
                f"the header names {len(cells)} columns but the rows have {k} cells "
                f"({dialect.describe()}-separated)", source=source, line=rows[0][0])
        names = cells
        if len(rows) > 1:
            unit_cells = split_cells(rows[1][2], dialect)
            if (len(unit_cells) == k and any(unit_cells)
                    and all(c == "" or not _is_numeric(c, dialect.decimal)
                            for c in unit_cells)
                    and all(len(c) <= 20 for c in unit_cells)):
                # A second header row of units, as many loggers write.
                header_lines.append(rows[1][0])
                data_index = 2
                names = [f"{n} [{u}]" if u else n for n, u in zip(names, unit_cells)]
    if data_index >= len(rows):
        if header:
            raise ScalesieveError("has a header but no data rows", source=source)
        raise ScalesieveError("holds no data rows", source=source)  # pragma: no cover

    time_scale = time_unit = None
    if names is not None:
        try:
            found = time_unit_of(names[0])
        except ValueError as exc:
            raise ScalesieveError(str(exc), source=source, line=header_lines[0]) from None
        if found is not None:
            time_scale, time_unit = found
    lineno, offset, first_row = rows[data_index]
    time_kind = origin = form = None
    first_cells = split_cells(_data_part(first_row), dialect)
    kind = tc.cell_kind(first_cells[0]) if first_cells else None
    if kind == "iso" or (kind == "clock" and (names is None or time_scale is not None)):
        # Timestamps mark a time column whatever its header says; clock times need
        # a time header or none at all.
        time_kind, time_scale, time_unit = kind, 1.0, kind
        if kind == "iso":
            origin = tc.parse_iso(first_cells[0])
            form = tc.clock_form_of(first_cells[0])
    elif time_scale is not None:
        time_kind = "number"
    return TextLayout(dialect, k, names, header_lines, offset, lineno, time_scale, time_unit,
                      encoding, [(r[0], r[2]) for r in rows[data_index:]], time_kind,
                      origin, form)


# ----------------------------------------------------------------------- parsing

def _parse_bulk(body: str, layout: TextLayout) -> np.ndarray | None:
    """All data rows with numpy's C parser; ``None`` when it objects (then go row by row)."""
    d = layout.dialect
    if d.trailing:
        body = re.sub(re.escape(d.delimiter) + r"[ \t]*$", "", body, flags=re.M)
    if d.decimal == ",":
        body = body.replace(",", ".")
    convert = layout.time_converter()
    if convert is not None and d.delimiter is None:
        return None  # a date and time split by whitespace: row by row joins them
    if layout.time_kind == "iso":
        values = _parse_bulk_iso(body, layout)
        if values is not None:
            return values
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            values = np.loadtxt(io.StringIO(body), delimiter=d.delimiter, comments="#",
                                quotechar='"', dtype=np.float64, ndmin=2,
                                converters=None if convert is None else {0: convert})
    except (ValueError, IndexError, TypeError):
        return None
    if values.shape[1] != layout.columns and values.shape[0] > 0:
        return None
    return values


def _parse_bulk_iso(body: str, layout: TextLayout) -> np.ndarray | None:
    """Timestamps parsed by numpy's datetime64 (in C), numbers by loadtxt; None to fall back.

    numpy takes ``T`` or a space and turns an offset into UTC, which keeps elapsed time
    right across an offset change; a mix of stamps with and without offsets, a comma
    before the fraction or anything odd falls back to the exact row-by-row reader.
    """
    d = layout.dialect
    k = layout.columns
    origin = layout.time_origin
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            stamps = np.loadtxt(io.StringIO(body), delimiter=d.delimiter, comments="#",
                                quotechar='"', dtype=str, usecols=0, ndmin=1)
            if stamps.size == 0 or (np.char.find(stamps, ",") >= 0).any():
                return None
            aware = ((np.char.find(stamps, "+", 19) >= 0) | (np.char.find(stamps, "Z") >= 0)
                     | (np.char.find(stamps, "-", 19) >= 0))
            if aware.any() != aware.all() or bool(aware[0]) != (origin.tzinfo is not None):
                return None
            when = stamps.astype("datetime64[ns]")
            rest = np.loadtxt(io.StringIO(body), delimiter=d.delimiter, comments="#",
                              quotechar='"', dtype=np.float64, ndmin=2,
                              usecols=range(1, k)) if k > 1 else np.empty((stamps.size, 0))
    except (ValueError, IndexError, TypeError, OverflowError):
        return None
    if rest.shape[0] != stamps.size or np.isnat(when).any():
        return None
    first = origin.astimezone(timezone.utc).replace(tzinfo=None) if origin.tzinfo else origin
    values = np.empty((stamps.size, k), dtype=np.float64)
    values[:, 0] = (when - np.datetime64(first, "ns")).astype(np.int64) / 1e9
    values[:, 1:] = rest
    return values


def _quoted(text: str, limit: int = 40) -> str:
    """``repr`` of a cell or a name, cut so a message stays one readable line."""
    return repr(text) if len(text) <= limit else repr(text[:limit - 1] + "…")


def _column_label(layout: TextLayout, j: int) -> str:
    if layout.names is not None and layout.names[j]:
        return f"column {j + 1} ({_quoted(layout.names[j])})"
    return f"column {j + 1}"


def _parse_rows(text: str, layout: TextLayout, source: str,
                start: tuple[int, int] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Row-by-row parse with exact messages; return ``(values, 1-based line numbers)``.

    ``start``: ``(offset, line number)`` of the first data row in ``text``, when
    ``text`` is a later stretch of the table (a table read in blocks); by default
    the layout's.
    """
    offset, first_line = (layout.data_offset, layout.data_line) if start is None else start
    d = layout.dialect
    k = layout.columns
    rows: list[list[float]] = []
    linenos: list[int] = []
    where = "the header" if layout.names is not None else f"line {layout.data_line}"
    convert = layout.time_converter()
    for lineno, _, line in _lines(text, offset, first_line):
        part = _data_part(line)
        if not part:
            continue
        cells = split_cells(part, d)
        if len(cells) != k:
            raise ScalesieveError(f"has {len(cells)} cells; expected {k} as in {where}",
                                  source=source, line=lineno)
        row = []
        for j, cell in enumerate(cells):
            if j == 0 and convert is not None:
                try:
                    row.append(convert(cell))
                except ValueError as exc:
                    raise ScalesieveError(f"{_column_label(layout, 0)}: time value {exc}",
                                          source=source, line=lineno) from None
                continue
            v = cell_value(cell, d.decimal)
            if v is _NOT_A_NUMBER:
                what = "time value" if (j == 0 and layout.time_scale is not None) else "cell"
                raise ScalesieveError(
                    f"{_column_label(layout, j)}: {what} {_quoted(cell)} is not a number",
                    source=source, line=lineno)
            row.append(v)
        rows.append(row)
        linenos.append(lineno)
    values = np.array(rows, dtype=np.float64).reshape(len(rows), k)
    return values, np.array(linenos, dtype=np.int64)


def _data_linenos(text: str, layout: TextLayout,
                  start: tuple[int, int] | None = None) -> np.ndarray:
    """1-based line numbers of the data rows, in order (for messages); ``start`` as
    for :func:`_parse_rows`."""
    offset, first_line = (layout.data_offset, layout.data_line) if start is None else start
    return np.array([lineno for lineno, _, line in _lines(text, offset, first_line)
                     if _data_part(line)], dtype=np.int64)


def parse_values(text: str, layout: TextLayout, source: str, *,
                 bulk: bool = True) -> tuple[np.ndarray, np.ndarray | None]:
    """Every data row as float64 ``(rows, columns)``, gaps as NaN.

    Returns the values and, when already known, the line number of each row
    (``None`` after the bulk parse; see :func:`_data_linenos`).
    """
    if bulk:
        values = _parse_bulk(text[layout.data_offset:], layout)
        if values is not None:
            return values, None
    return _parse_rows(text, layout, source)


# ------------------------------------------------------------------------ public

def read_text_file(path: str | os.PathLike[str]) -> tuple[str, str, str]:
    """Read and decode a text file; return ``(source, text, encoding)``."""
    source, _ = check_readable(path)
    try:
        with open(source, "rb") as fh:
            raw = fh.read()
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None
    except MemoryError:
        raise ScalesieveError("is too large to load into memory", source=source) from None
    text, encoding = decode_text(raw, source)
    return source, text, encoding


def _time_axis_rate(t: np.ndarray, line_of, source: str) -> float:
    """Rate from a time axis in seconds; error when it is not evenly spaced (or jumps)."""
    return tc.analyse_steps(t, line_of, source).rate


def read_text(path: str | os.PathLike[str], *, rate: float | None = None,
              channel: int | None = None, fill_gaps: str | None = None,
              dtype=np.float64, _bulk: bool = True, _text: str | None = None) -> Recording:
    """Read a numeric text table into a :class:`Recording`.

    Parameters
    ----------
    path : str or os.PathLike
        A CSV, TSV, TXT or DAT table (see the module docstring for the rules).
    rate : float, optional
        Sampling rate in Hz. Required without a time column; with one, it
        overrides the rate the time column gives (the time values are then not
        checked for even spacing).
    channel : int, optional
        0-based index among the data columns (the time column excluded);
        ``None`` keeps all.
    fill_gaps : {None, "linear"}
        Without it an empty or NaN cell is an error naming its line; with
        ``"linear"`` gaps are interpolated over the row index (ends take the
        nearest value), as ``numpy.interp`` does.
    dtype : numpy dtype, float64 or float32
        Sample type of the result (float32 halves the memory of long records).

    Returns
    -------
    Recording
        ``format`` and ``subtype`` are ``None``; ``meta["text"]`` holds the
        delimiter, decimal mark, encoding, header and time column found, and
        ``meta["time_start_s"]`` the first time value when there is a time column.

    Raises
    ------
    ScalesieveError
        For every problem, with ``source`` the path as given and ``line`` the
        1-based line in the file where the problem is (when there is one).
    """
    dtype = np.dtype(dtype)
    if dtype not in (np.float64, np.float32):
        raise ValueError(f"dtype must be float64 or float32, got {dtype}")
    source = os.fspath(path)
    try:
        fill_gaps = check_fill_method(fill_gaps)
    except ValueError as exc:
        raise ScalesieveError(str(exc), source=source) from None
    rate = check_rate(rate, source)
    if _text is None:
        source, text, encoding = read_text_file(path)
    else:
        text, encoding = _text, "utf-8"  # a spreadsheet's sheet, already text
    layout = scan_layout(text, source, encoding)
    try:
        values, linenos = parse_values(text, layout, source, bulk=_bulk)
    except MemoryError:
        raise ScalesieveError("is too large to load into memory", source=source) from None
    if values.shape[0] == 0:  # pragma: no cover - scan_layout found a data row
        raise ScalesieveError("holds no data rows", source=source)

    k = layout.columns
    has_time = layout.time_scale is not None
    if has_time and k < 2:
        raise ScalesieveError("holds only a time column and no channels", source=source)
    first_channel = 1 if has_time else 0
    if rate is not None and has_time:
        values = values[:, 1:]  # the given rate wins; the time values are not needed
        columns = list(range(1, k))
    else:
        columns = list(range(k))

    bad = ~np.isfinite(values)
    filled = 0
    if bad.any():
        if linenos is None:
            linenos = _data_linenos(text, layout)
        infinite = np.isinf(values)
        if infinite.any():
            r, c = np.argwhere(infinite)[0]
            raise ScalesieveError(f"{_column_label(layout, columns[c])}: value is infinite",
                                  source=source, line=int(linenos[r]))
        if fill_gaps is None:
            r, c = np.argwhere(bad)[0]
            raise ScalesieveError(
                f"{_column_label(layout, columns[c])} is empty or NaN; use --fill-gaps linear "
                "to fill gaps", source=source, line=int(linenos[r]))
        empty = np.flatnonzero(bad.all(axis=0))
        if empty.size:
            raise ScalesieveError(
                f"{_column_label(layout, columns[int(empty[0])])} holds no values to fill "
                "gaps from", source=source)
        filled = int(fill_linear(values).sum())

    big = first_too_large(values)
    if big is not None:
        r, c = big
        if linenos is None:
            linenos = _data_linenos(text, layout)
        raise ScalesieveError(
            f"{_column_label(layout, columns[c])}: value {float(values[r, c]):.6g} is too large "
            f"to analyse (beyond ±{MAX_ABS_SAMPLE:g})", source=source, line=int(linenos[r]))

    time_start = None
    start_time = layout.time_origin if layout.time_kind == "iso" else None
    notes: list[str] = []
    if rate is None:
        if not has_time:
            raise ScalesieveError(
                "has no time column, so the sampling rate is unknown: give --rate HZ (or "
                "name the first column time, t, or with a unit such as [s] or (ms))",
                source=source)
        t = values[:, 0] * layout.time_scale
        if layout.time_kind == "clock":
            t = tc.unwrap_midnight(t)

        def line_of(i: int) -> int:
            # Line numbers are found only when a message needs one.
            nonlocal linenos
            if linenos is None:
                linenos = _data_linenos(text, layout)
            return int(linenos[i])

        axis = tc.analyse_steps(t, line_of, source, origin=start_time, fill=fill_gaps)
        rate = axis.rate
        time_start = float(t[0])
        samples = values[:, 1:]
        if axis.gaps:
            notes = tc.gap_warnings(t, axis.gaps, rate, line_of, start_time)
            samples = tc.fill_jumps(samples, axis.gaps)
            filled += sum(m for _, m in axis.gaps) * samples.shape[1]
    else:
        samples = values

    if layout.names is not None:
        names = [n or f"ch{j}" for j, n in enumerate(layout.names[first_channel:])]
    else:
        names = [f"ch{j}" for j in range(samples.shape[1])]
    names = _unique(names)
    units = [_unit_of(n) for n in names]

    count = samples.shape[1]
    pick = check_channel(channel, count, source, names)
    if pick is not None:
        samples = samples[:, pick:pick + 1]
        names = [names[pick]]
        units = [units[pick]]
    samples = np.ascontiguousarray(samples, dtype=dtype)

    meta = {
        "text": {
            "delimiter": layout.dialect.describe(),
            "decimal": layout.dialect.decimal,
            "encoding": layout.encoding,
            "header": layout.names is not None,
            "columns": list(layout.names) if layout.names is not None else None,
            "time_column": (layout.names[0] if layout.names is not None else "column 1")
            if has_time else None,
            "time_unit": layout.time_unit,
            "time_kind": layout.time_kind,
        },
        "file_channels": count,
        "filled_gaps": filled,
        # Every value was checked above (finite, not too large): the model need not
        # scan them again (api.build_model reads this).
        "samples_checked": True,
    }
    if pick is not None:
        meta["channel_index"] = pick
    if time_start is not None:
        meta["time_start_s"] = time_start
    if start_time is not None:
        meta["clock"] = layout.clock_form.to_json()
    return Recording(samples, rate, names, source=source, format=None, subtype=None,
                     meta=meta, start_time=start_time, warnings=tuple(notes), units=units)


def _unit_of(name: str) -> str:
    """The unit a column header carries (``strain [µm/m]`` -> ``µm/m``), else ``""``."""
    m = _BRACKET_RE.match(name.strip())
    return m.group(2).strip() if m else ""


def probe_text(path: str | os.PathLike[str]) -> dict:
    """Cheap facts about a text table from its first rows, without parsing it all.

    ``frames`` is exact when the whole file fits in the sample, else an
    estimate from the file size and the mean length of the sampled rows.
    """
    source, size = check_readable(path)
    try:
        with open(source, "rb") as fh:
            raw = fh.read(_SAMPLE_CHARS * 2)
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None
    whole = len(raw) >= size
    if not whole:
        # Do not cut a row, nor a multi-byte character, in two.
        cut = raw.rfind(b"\n")
        if cut > 0:
            raw = raw[:cut + 1]
    text, encoding = decode_text(raw, source)
    layout = scan_layout(text, source, encoding)
    has_time = layout.time_scale is not None
    channels = layout.columns - (1 if has_time else 0)
    if whole:
        frames = int(_data_linenos(text, layout).size)
    else:
        sampled = text[layout.data_offset:]
        rows_seen = max(1, sum(1 for _, _, line in _lines(sampled) if _data_part(line)))
        bytes_per_row = len(sampled.encode(encoding if encoding != "utf-16" else "utf-16-le"))
        bytes_per_row /= rows_seen
        frames = int(round((size - layout.data_offset) / max(bytes_per_row, 1.0)))
    rate = None
    if has_time:
        t = []
        convert = layout.time_converter()
        for _, line in layout.sample_rows:
            part = _data_part(line)
            cells = split_cells(part, layout.dialect) if part else []
            if cells:
                if convert is not None:
                    try:
                        v = convert(cells[0])
                    except ValueError:
                        continue
                else:
                    v = cell_value(cells[0], layout.dialect.decimal)
                if v is not _NOT_A_NUMBER and math.isfinite(v):
                    t.append(v * layout.time_scale)
        if len(t) >= 2 and t[-1] > t[0]:
            rate = (len(t) - 1) / (t[-1] - t[0])
    return {
        "path": source,
        "kind": "text",
        "frames": frames,
        "frames_exact": whole,
        "rate": rate,
        "channels": channels,
        "channel_names": (layout.names[1 if has_time else 0:] if layout.names else
                          [f"ch{j}" for j in range(channels)]),
        "format": None,
        "subtype": None,
        "file_bytes": size,
        "estimated_bytes": int(frames) * max(channels, 1) * 8,
    }
