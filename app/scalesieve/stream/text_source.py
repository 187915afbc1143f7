"""A text table read in blocks: parsed once, chunk by chunk, by the whole-file reader's rules.

The table is decoded chunk by chunk and each chunk of whole lines parsed
with ``io.csv_reader``'s own layout scan and parsers (the same dialect
sniffing on the same first rows, the same bulk parse and row-by-row
fallback with its messages) into an unnamed temporary file of float64 rows
(``tempfile.TemporaryFile``: removed by the system when it is closed or the
process ends).  Every check ``csv_reader.read_text`` makes then runs over
those rows in blocks, in the same order and with the same messages: cells
that are infinite, empty or too large, the time column's steps (the median
found exactly in two passes, ``stream.statistics``), its jumps and the rate
from its span.  Line numbers for a message are found again from the text
only when a message needs one.  The passes of a clean, ``bands`` or
``events`` read the rows from that file by position, so nothing of the
table is held whole.  With ``--fill-gaps linear`` the empty cells are filled
as the whole-file reader fills them (``io.gaps.LinearFill``: the same
numbers, whatever the blocks) into a second temporary file, and a clock's
jumps become rows made by linear interpolation (``time_column.fill_jumps``'
formula, in blocks) with the whole-file reader's warnings.
"""

from __future__ import annotations

import codecs
import os
import tempfile

import numpy as np

from scalesieve.errors import ScalesieveError

#: bytes of the file decoded and parsed at a time
CHUNK_BYTES = 1 << 22
#: rows a check over the parsed table looks at a time
CHECK_ROWS = 1 << 18


class _Text:
    """The table's text in chunks of whole lines, decoded as the whole-file reader decodes it."""

    def __init__(self, source: str, size: int, progress=None):
        from scalesieve.io import text_dialect as td

        self.source, self.size, self.progress = source, size, progress
        with open(source, "rb") as fh:
            head = fh.read(td._SAMPLE_CHARS)
            fh.seek(max(0, size - td._SAMPLE_CHARS))
            tail = fh.read(td._SAMPLE_CHARS)
        if td.is_utf16(head):
            self.codec, self.encoding = "utf-16", "utf-16"
        else:
            td.check_no_nul(head, tail, source)
            self.codec, self.encoding = "utf-8-sig", "utf-8"

    def chunks(self):
        """``(text, first line number)`` for each stretch of whole lines, LF line ends.

        The first ``_SAMPLE_CHARS`` decoded characters are checked as the
        whole-file reader checks them; a byte that is not UTF-8 anywhere makes
        the whole table Latin-1, as it does there (the chunks start again).
        """
        from scalesieve.io import text_dialect as td

        try:
            yield from self._chunks(td)
        except UnicodeDecodeError:
            if self.codec == "utf-16":
                raise ScalesieveError("is not readable text (broken UTF-16)",
                                      source=self.source) from None
            if self.codec == "latin-1":  # pragma: no cover - Latin-1 decodes any bytes
                raise
            self.codec = self.encoding = "latin-1"
            yield _RESTART
            yield from self._chunks(td)

    def _chunks(self, td):
        decoder = codecs.getincrementaldecoder(self.codec)()
        head_chars, checked = [], False
        pending, carry_cr, line = "", "", 1
        with open(self.source, "rb") as fh:
            while True:
                raw = fh.read(CHUNK_BYTES)
                final = not raw
                if self.progress is not None:
                    self.progress(min(1.0, fh.tell() / max(1, self.size)))
                text = decoder.decode(raw, final=final)
                if not checked:
                    head_chars.append(text)
                    got = "".join(head_chars)
                    if len(got) >= td._SAMPLE_CHARS or final:
                        td.check_text_head(got[:td._SAMPLE_CHARS], self.source)
                        checked, head_chars = True, []
                text = carry_cr + text
                carry_cr = ""
                if text.endswith("\r") and not final:
                    text, carry_cr = text[:-1], "\r"     # CR LF may be cut in two
                if "\r" in text:
                    text = text.replace("\r\n", "\n").replace("\r", "\n")
                pending += text
                cut = len(pending) if final else pending.rfind("\n") + 1
                if cut > 0:
                    body, pending = pending[:cut], pending[cut:]
                    yield body, line
                    line += body.count("\n")
                if final:
                    return


_RESTART = object()   # the chunks start again (the table turned out to be Latin-1)


class _StepMedian:
    """``numpy.median`` of a clock's steps in two passes, as ``MedianOfMagnitudes`` finds a
    band's, but keeping the middle bins' values as distinct values and their counts: a
    clock's steps are nearly all alike, so one bin holds them all and the values there
    would be the whole column again."""

    def __init__(self):
        from scalesieve.stream.statistics import MedianOfMagnitudes

        self.bins = MedianOfMagnitudes()      # its first pass: counts in bins

    @property
    def value(self):
        return self.bins.value

    def add(self, values: np.ndarray) -> None:
        from scalesieve.stream.statistics import _bins

        m = self.bins
        if m.wanted is None:
            m.add(values)
            return
        a, b = _bins(values)
        for bin_, parts in m.wanted.items():
            pick = a[b == bin_]
            if pick.size:
                parts.append(np.unique(pick, return_counts=True))
                if len(parts) > 64:
                    parts[:] = [_merged(parts)]

    def end_pass(self) -> None:
        m = self.bins
        if m.wanted is None or m.value is not None:
            m.end_pass()
            return
        picked = []
        for r, b in zip(m.ranks, m.rank_bins):
            u, c = _merged(m.wanted[b])
            picked.append(u[int(np.searchsorted(np.cumsum(c), r - m.below[b], side="right"))])
        # as numpy.median: the mean of the two middle values of an even count
        m.value = float(np.mean(picked)) if len(picked) == 2 else float(picked[0])
        m.wanted = {}


def _merged(parts: list) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values and counts of several ``numpy.unique(..., return_counts=True)``."""
    u = np.concatenate([p[0] for p in parts])
    c = np.concatenate([p[1] for p in parts])
    order = np.argsort(u, kind="stable")
    u, c = u[order], c[order]
    first = np.flatnonzero(np.concatenate([[True], u[1:] != u[:-1]]))
    return u[first], np.add.reduceat(c, first)


class TextSource:
    """A text table's samples in blocks of frames, float64, as ``read_text`` gives them.

    The same attributes and ``blocks`` as ``stream.sources._Source``, and
    ``names``, ``start_time`` and ``clock`` as the whole-file reader's
    Recording holds them.  ``progress(fraction)`` is told how far the parse
    has got (by bytes read).
    """

    format = subtype = None
    parsed = True            # parsed once before the passes (sources.after_parse)

    def __init__(self, path: str, channel=None, rate: float | None = None, progress=None,
                 fill_gaps: str | None = None):
        from scalesieve.io import csv_reader as cr
        from scalesieve.io.gaps import check_fill_method
        from scalesieve.io.input_check import (check_channel, check_rate, check_readable,
                                               os_error_message)

        rate = check_rate(rate, os.fspath(path))
        self.fill = check_fill_method(fill_gaps)
        self.filled, self._notes = 0, []
        self.path, size = check_readable(path)
        try:
            self._text = _Text(self.path, size, progress)
            self._values = tempfile.TemporaryFile(prefix="scalesieve-table-")
            self._parse(cr)
            self._text.progress = None        # a message's line is found again silently
        except OSError as exc:
            raise ScalesieveError(os_error_message(exc), source=self.path) from None
        layout, k = self.layout, self.layout.columns
        has_time = layout.time_scale is not None
        if has_time and k < 2:
            raise ScalesieveError("holds only a time column and no channels", source=self.path)
        self.first = 1 if has_time else 0
        # with --rate the time column is neither checked nor read (as read_text)
        columns = list(range(1, k)) if (rate is not None and has_time) else list(range(k))
        try:
            self._check_values(cr, columns)
        except OSError as exc:
            raise ScalesieveError(os_error_message(exc), source=self.path) from None
        self.start_time = layout.time_origin if layout.time_kind == "iso" else None
        self.clock = layout.clock_form.to_json() if self.start_time is not None else None
        if rate is None:
            if not has_time:
                raise ScalesieveError(
                    "has no time column, so the sampling rate is unknown: give --rate HZ (or "
                    "name the first column time, t, or with a unit such as [s] or (ms))",
                    source=self.path)
            try:
                rate = self._time_rate()
            except OSError as exc:
                raise ScalesieveError(os_error_message(exc), source=self.path) from None
        self.rate = float(rate)
        if layout.names is not None:
            names = [n or f"ch{j}" for j, n in enumerate(layout.names[self.first:])]
        else:
            names = [f"ch{j}" for j in range(k - self.first)]
        names = cr._unique(names)
        self.file_channels = len(names)
        self.pick = check_channel(channel, self.file_channels, self.path, names)
        self.names = names if self.pick is None else [names[self.pick]]
        self.channels = len(self.names)

    # ------------------------------------------------------------------ parsing

    def _bodies(self, cr):
        """``(text, offset, line)`` of each stretch of data rows: the table's head (what
        ``scan_layout`` reads, the data from ``offset``), then each later chunk; or
        ``_RESTART`` when the text starts again in Latin-1."""
        from scalesieve.io import text_dialect as td

        head = []
        for item in self._text.chunks():
            if item is _RESTART:
                head = []
                yield _RESTART
                continue
            body, line = item
            if head is None:
                yield body, 0, line
                continue
            head.append(body)
            text = "".join(head)
            if not self._head_enough(td, text):
                continue
            head = None
            layout = cr.scan_layout(text, self.path, self._text.encoding)
            if self.layout is None:
                self.layout = layout
            yield text, layout.data_offset, layout.data_line
        if head is not None:         # the whole table within its head (or no rows at all)
            text = "".join(head)
            layout = cr.scan_layout(text, self.path, self._text.encoding)
            if self.layout is None:
                self.layout = layout
            yield text, layout.data_offset, layout.data_line

    @staticmethod
    def _head_enough(td, text: str) -> bool:
        """Whether ``text`` holds every row ``scan_layout`` looks at in the whole table:
        ``_SAMPLE_LINES`` data rows, or a data row that starts past ``_SAMPLE_CHARS``."""
        from scalesieve.io.csv_reader import _SAMPLE_LINES

        rows = 0
        for _, offset, line in td._lines(text):
            if td._is_comment_or_blank(line):
                continue
            rows += 1
            if rows >= _SAMPLE_LINES or offset > td._SAMPLE_CHARS:
                return True
        return False

    def _parse(self, cr) -> None:
        """Every data row into the temporary file; ``chunk_rows`` says which stretch of
        text each block of rows came from, for line numbers later."""
        self.layout = None
        self.frames, self.chunk_rows = 0, []
        for i, item in enumerate(self._bodies(cr)):
            if item is _RESTART:
                self._values.seek(0)
                self._values.truncate()
                self.layout, self.frames, self.chunk_rows = None, 0, []
                continue
            text, offset, line = item
            values = cr._parse_bulk(text[offset:], self.layout)
            if values is None:
                values, _ = cr._parse_rows(text, self.layout, self.path, start=(offset, line))
            if values.shape[0] == 0:
                continue
            if not self.chunk_rows:
                self._check_room(len(text[offset:].encode(self._text.encoding, "replace")),
                                 values.shape[0])
            self.chunk_rows.append((self.frames, i))
            self._values.write(np.ascontiguousarray(values, dtype=np.float64).tobytes())
            self.frames += values.shape[0]
        self._values.flush()
        self.row_bytes = 8 * self.layout.columns

    def _check_room(self, text_bytes: int, rows: int) -> None:
        """Refuse, before filling it, a temporary folder without room for the parsed rows
        (estimated from the first chunk's bytes per row)."""
        from scalesieve.io.folder_room import free_bytes

        folder = tempfile.gettempdir()
        need = int(1.1 * self._text.size / max(text_bytes / rows, 1.0)
                   * 8 * self.layout.columns) * (2 if self.fill else 1)  # filled: a second file
        free = free_bytes(folder, source=self.path, hint="set TMPDIR to a folder with room")
        if free is not None and need > free:
            raise ScalesieveError(
                f"parsing it in blocks needs about {need / 2**30:.1f} GiB of temporary disk "
                f"space in {folder}, which has {free / 2**30:.1f} GiB free; set TMPDIR to a "
                "folder with room", source=self.path)
        self.table_bytes = need

    def _line_of(self, row: int) -> int:
        """The 1-based line of data row ``row``, found again from the text."""
        from scalesieve.io import csv_reader as cr

        r0, index = max(c for c in self.chunk_rows if c[0] <= row)
        for i, item in enumerate(self._bodies(cr)):
            if i == index:
                text, offset, line = item
                return int(cr._data_linenos(text, self.layout, start=(offset, line))[row - r0])
        raise AssertionError(f"row {row} not found again")  # pragma: no cover

    # ----------------------------------------------------------------- reading

    def _rows(self, start: int, stop: int) -> np.ndarray:
        k = self.layout.columns
        raw = os.pread(self._values.fileno(), (stop - start) * self.row_bytes,
                       start * self.row_bytes)
        return np.frombuffer(raw, dtype=np.float64).reshape(stop - start, k)

    def _walk(self, start: int = 0, stop: int | None = None, rows: int | None = None):
        stop = self.frames if stop is None else stop
        rows = rows or CHECK_ROWS
        for a in range(start, stop, rows):
            yield a, self._rows(a, min(stop, a + rows))

    def blocks(self, frames: int | None = None, start: int = 0, stop: int | None = None):
        """Frames ``start .. stop`` (default all) in blocks of ``frames``."""
        from scalesieve.stream.sources import READ_FRAMES

        c0 = self.first + (self.pick or 0)
        c1 = c0 + 1 if self.pick is not None else self.layout.columns
        for _, v in self._walk(start, stop, frames or READ_FRAMES):
            yield np.ascontiguousarray(v[:, c0:c1])

    def warnings(self) -> list[str]:
        """The whole-file reader's warnings: one line per clock jump filled."""
        return list(self._notes)

    # ------------------------------------------------------------------ checks

    def _check_values(self, cr, columns: list[int]) -> None:
        """``read_text``'s checks of the cells, in its order: infinite, empty, too large."""
        from scalesieve.io.input_check import MAX_ABS_SAMPLE, first_too_large

        inf = nan = big = None
        present = np.zeros(len(columns), dtype=bool)     # columns holding a value
        for a, v in self._walk():
            part = v[:, columns]
            if self.fill is not None:
                present |= ~np.isnan(part).all(axis=0)
            if inf is None and np.isinf(part).any():
                r, c = np.argwhere(np.isinf(part))[0]
                inf = (a + int(r), int(c))
            if nan is None and np.isnan(part).any():
                r, c = np.argwhere(np.isnan(part))[0]
                nan = (a + int(r), int(c))
            if big is None and inf is None and nan is None:
                found = first_too_large(part)
                if found is not None:
                    big = (a + found[0], found[1], float(part[found]))
        layout = self.layout
        if inf is not None:
            raise ScalesieveError(f"{cr._column_label(layout, columns[inf[1]])}: value is "
                                  "infinite", source=self.path, line=self._line_of(inf[0]))
        if nan is not None and self.fill is None:
            raise ScalesieveError(
                f"{cr._column_label(layout, columns[nan[1]])} is empty or NaN; use --fill-gaps "
                "linear to fill gaps", source=self.path, line=self._line_of(nan[0]))
        if nan is not None:
            empty = np.flatnonzero(~present)
            if empty.size:
                raise ScalesieveError(
                    f"{cr._column_label(layout, columns[int(empty[0])])} holds no values to "
                    "fill gaps from", source=self.path)
            big = self._fill_cells(columns)
        if big is not None:
            raise ScalesieveError(
                f"{cr._column_label(layout, columns[big[1]])}: value {big[2]:.6g} is too large "
                f"to analyse (beyond ±{MAX_ABS_SAMPLE:g})", source=self.path,
                line=self._line_of(big[0]))

    def _replace(self, write) -> None:
        """The rows made again by ``write(out)`` into a new temporary file (the old one goes)."""
        out = tempfile.TemporaryFile(prefix="scalesieve-table-")
        try:
            write(out)
            out.flush()
        except BaseException:
            out.close()
            raise
        self._values.close()
        self._values = out

    def _fill_cells(self, columns: list[int]):
        """Every empty cell of ``columns`` filled as ``io.gaps.fill_linear`` fills the whole
        table; returns ``(row, column, value)`` of the first value then too large, or None."""
        from scalesieve.io.gaps import LinearFill
        from scalesieve.io.input_check import first_too_large

        k = self.layout.columns
        fill = LinearFill(len(columns))
        found, count, made = [], [0], [0]

        def put(out, part):
            if not part.shape[0]:
                return
            if not found:
                big = first_too_large(part)
                if big is not None:
                    found.append((made[0] + big[0], big[1], float(part[big])))
            rows = np.zeros((part.shape[0], k))   # a column not in ``columns`` is never read
            rows[:, columns] = part
            out.write(rows.tobytes())
            made[0] += part.shape[0]

        def write(out):
            for _, v in self._walk():
                part = np.ascontiguousarray(v[:, columns])
                count[0] += int(np.isnan(part).sum())
                put(out, fill.feed(part))
            put(out, fill.end())

        self._replace(write)
        self.filled = count[0]
        return found[0] if found else None

    def _fill_jumps(self, gaps: list[tuple[int, int]]) -> None:
        """The rows each clock jump leaves out, made as ``time_column.fill_jumps`` makes
        them (``time_column.jump_rows``, a few rows at a time), put in their places."""
        from scalesieve.io import time_column as tc

        def write(out):
            g, last = 0, None
            for a, v in self._walk():
                start = 0
                while g < len(gaps) and gaps[g][0] < a + v.shape[0]:
                    row, missing = gaps[g]
                    out.write(np.ascontiguousarray(v[start:row - a]).tobytes())
                    lo = v[row - a - 1] if row > a else last
                    hi = v[row - a]
                    for i in range(1, missing + 1, CHECK_ROWS):
                        out.write(tc.jump_rows(lo, hi, missing, i,
                                               min(missing + 1, i + CHECK_ROWS)).tobytes())
                    start, g = row - a, g + 1
                out.write(np.ascontiguousarray(v[start:]).tobytes())
                last = v[-1].copy()

        self._replace(write)
        added = sum(m for _, m in gaps)
        self.frames += added
        self.filled += added * (self.layout.columns - 1)

    def _times(self):
        """``(first row, seconds)`` of the time column in blocks, as ``read_text`` makes it
        (a clock's midnights carried on as ``time_column.unwrap_midnight`` does)."""
        scale, clock = self.layout.time_scale, self.layout.time_kind == "clock"
        days, last = 0, None
        for a, v in self._walk():
            t = v[:, 0] * scale
            if clock:
                steps = np.diff(t if last is None else np.concatenate([[last], t]))
                wraps = (steps < 0) & (steps + 86400.0 > 0) & (np.abs(steps + 86400.0) < 3600.0)
                count = np.cumsum(wraps)
                if last is None:
                    count = np.concatenate([[0], count])
                last = float(t[-1])
                if days or count[-1]:
                    t = t + 86400.0 * (days + count)
                days += int(count[-1])
            yield a, t

    def _time_rate(self) -> float:
        """``time_column.analyse_steps`` over the time column in blocks; with
        ``--fill-gaps`` its jumps filled, with the whole-file reader's warnings."""
        from scalesieve.io import time_column as tc

        rate, gaps, at = steps_axis(self._times, self.frames, self.path, self.start_time,
                                    self._line_of, fill=self.fill)
        if gaps:
            self._notes = tc.gap_warnings(at, gaps, rate, self._line_of, self.start_time)
            self._fill_jumps(gaps)
        return rate


def steps_rate(times, n: int, src: str, origin, line_of) -> float:
    """``time_column.analyse_steps(t, line_of, src, origin=origin).rate`` of a time axis of
    ``n`` values that comes in blocks, without gaps filled: ``times()`` gives
    ``(first row, seconds)`` of each block (it is called for each of three passes)."""
    return steps_axis(times, n, src, origin, line_of)[0]


def steps_axis(times, n: int, src: str, origin, line_of, fill: str | None = None):
    """``(rate, gaps, times at the gaps)`` as ``time_column.analyse_steps(..., fill=fill)``
    gives rate and gaps; the times are ``{row: seconds}`` of each gap's two rows."""
    from scalesieve.io import time_column as tc

    if n < 2:
        raise tc.too_few_rows(src)
    median = _StepMedian()

    def steps():
        before = None
        for a, t in times():
            joined = t if before is None else np.concatenate([[before], t])
            s0 = a if before is None else a - 1          # row of joined[0]
            yield s0, joined, np.diff(joined)
            before = float(t[-1])
    for s0, t, s in steps():
        bad = np.flatnonzero(~(s > 0))
        if bad.size:
            i = int(bad[0]) + 1
            raise tc.not_increasing(t[i - 1], t[i], line_of(s0 + i), src, origin)
        median.add(s)
    median.end_pass()
    for _, _, s in steps():
        median.add(s)
    median.end_pass()
    typical = median.value
    lo = hi = None
    worst, worst_at, first_jump, t0, t1 = -np.inf, None, None, None, None
    jumps = []           # (row after the jump, its step, the times either side), with fill
    for s0, t, s in steps():
        if t0 is None:
            t0 = float(t[0])
        t1 = float(t[-1])
        jump = s >= tc.JUMP_FACTOR * typical
        regular = s[~jump]
        if regular.size:
            lo = regular.min() if lo is None else min(lo, regular.min())
            hi = regular.max() if hi is None else max(hi, regular.max())
        dev = np.abs(s - typical)
        dev[jump] = -1.0
        j = int(np.argmax(dev))
        if dev[j] > worst:                       # the first largest, as numpy.argmax
            worst, worst_at = dev[j], (s0 + j + 1, float(s[j]))
        if first_jump is None and jump.any():
            j = int(np.flatnonzero(jump)[0])
            first_jump = (s0 + j + 1, float(t[j]), float(t[j + 1]))
        if fill is not None:
            jumps.extend((s0 + int(j) + 1, float(s[j]), float(t[j]), float(t[j + 1]))
                         for j in np.flatnonzero(jump))
    spread = float(hi - lo) / typical
    if not spread < tc.UNIFORM_STEP_TOLERANCE:
        raise tc.not_uniform(spread, worst_at[1], typical, line_of(worst_at[0]), src)
    if first_jump is not None and fill is None:
        row, before, here = first_jump
        raise tc.clock_jump(before, here, typical, line_of(row), src, origin)
    if first_jump is None:
        return tc.tidy_rate(float((n - 1) / (t1 - t0)), False), [], {}
    step = tc.regular_step(t0, t1, [v for _, v, _, _ in jumps], n - 1 - len(jumps))
    gaps = [(row, int(round(v / step)) - 1) for row, v, _, _ in jumps]
    tc.check_filled(gaps, src, lambda: line_of(first_jump[0]))
    at = {}
    for row, _, before, here in jumps:
        at[row - 1], at[row] = before, here
    return tc.tidy_rate(1.0 / step, True), gaps, at
