"""Fill missing samples (NaN) in a table of channels, when the user opts in."""

from __future__ import annotations

import numpy as np

FILL_METHODS = ("linear",)


def check_fill_method(fill_gaps: str | None) -> str | None:
    """Return ``fill_gaps`` if it is ``None`` or a known method, else raise ``ValueError``."""
    if fill_gaps is None or fill_gaps in FILL_METHODS:
        return fill_gaps
    raise ValueError(
        f"unknown gap filling {fill_gaps!r}; choose one of: {', '.join(FILL_METHODS)}")


def fill_linear(values: np.ndarray) -> np.ndarray:
    """Replace NaN in each column, in place, by linear interpolation over the row index.

    Gaps before the first or after the last value take that value, as
    ``numpy.interp`` does. Every column must hold at least one value.

    Parameters
    ----------
    values : ndarray, shape (n, ch), float
        Modified in place.

    Returns
    -------
    ndarray of int, shape (ch,)
        How many cells were filled in each column.
    """
    n, ch = values.shape
    filled = np.zeros(ch, dtype=np.int64)
    index = np.arange(n, dtype=np.float64)
    for k in range(ch):
        col = values[:, k]
        gap = np.isnan(col)
        count = int(gap.sum())
        if count == 0:
            continue
        if count == n:
            raise ValueError(f"column {k} has no values to fill from")
        ok = ~gap
        col[gap] = np.interp(index[gap], index[ok], col[ok])
        filled[k] = count
    return filled


def describe_runs(name: str, first: tuple[int, int], runs: int, rate: float) -> str:
    """Where a channel's NaN lie: its first run (first and last sample) and how many more."""
    a, b = first
    return (f"channel {name!r} holds NaN from sample {a} to {b} ({b - a + 1} samples, at "
            f"{a / rate:.6g} s)"
            + (f" and {runs - 1} more run{'s' if runs > 2 else ''}" if runs > 1 else ""))


class GapSurvey:
    """What one pass over a recording's blocks finds of its NaN and unusable values.

    Fed blocks of rows in order (float, one column per channel): per channel how
    many NaN, in how many runs, the first run, and whether any value is there; the
    first NaN and the first infinite value (row-major, as ``numpy.argwhere``), and
    the first value that is neither NaN nor within ``limit`` (infinite or too
    large), so the whole-array readers' messages can be given before any work.
    """

    def __init__(self, channels: int, limit: float):
        self.limit = limit
        self.count = np.zeros(channels, dtype=np.int64)
        self.runs = np.zeros(channels, dtype=np.int64)
        self.first_run: list = [None] * channels
        self.valued = np.zeros(channels, dtype=bool)
        self._open = np.zeros(channels, dtype=bool)      # the last row seen was NaN
        self.first_nan = self.first_inf = self.first_bad = None
        self.rows = 0

    def add(self, block: np.ndarray) -> None:
        r0, n = self.rows, block.shape[0]
        self.rows += n
        if n == 0:
            return
        nan = np.isnan(block)
        if self.first_nan is None and nan.any():
            r, c = np.argwhere(nan)[0]
            self.first_nan = (r0 + int(r), int(c))
        for k in range(block.shape[1]):
            run = self.first_run[k]
            if not nan[:, k].any():
                if run is not None and run[1] is None:
                    self.first_run[k] = (run[0], r0 - 1)     # it ended with the last block
                continue
            gap = nan[:, k].astype(np.int8)
            # a run open at the last block's end goes on here without a new start
            edges = np.diff(np.concatenate(([int(self._open[k])], gap, [0])))
            starts = np.flatnonzero(edges == 1)
            ends = np.flatnonzero(edges == -1)          # a run ends at row e - 1
            self.count[k] += int(gap.sum())
            self.runs[k] += starts.size
            if run is None:
                a = int(starts[0])
                e = int(ends[ends > a][0])
                run = (r0 + a, None)
            elif run[1] is None:
                e = int(ends[0])
            else:
                continue
            still_open = e == n and gap[-1]
            self.first_run[k] = (run[0], None if still_open else r0 + e - 1)
        self.valued |= ~nan.all(axis=0)
        self._open = nan[-1]
        with np.errstate(invalid="ignore"):
            bad = ~nan & ~(np.abs(block) <= self.limit)
        if bad.any():
            if self.first_bad is None:
                r, c = np.argwhere(bad)[0]
                self.first_bad = (r0 + int(r), int(c), float(block[r, c]))
            if self.first_inf is None:
                inf = np.isinf(block)
                if inf.any():
                    r, c = np.argwhere(inf)[0]
                    self.first_inf = (r0 + int(r), int(c))

    def run(self, k: int) -> tuple[int, int]:
        """Channel ``k``'s first run of NaN, (first, last) sample."""
        a, b = self.first_run[k]
        return a, (self.rows - 1 if b is None else b)


class LinearFill:
    """:func:`fill_linear` over a recording that comes in blocks of rows, sample for sample.

    Each NaN takes ``numpy.interp`` of the row index between the last value
    before it and the next after it (the whole-array call gives the same number:
    the same two points and the same formula); a gap before a channel's first
    value takes that value, one after its last value that value.  A gap that
    runs past a block's end is held, with the rows after its start, until its
    next value comes: what is held grows only with the longest gap.

    ``before``: per channel, ``(row, value)`` of the last value before the first
    row fed, or None (none: the rows start the recording, or a leading gap).
    """

    def __init__(self, channels: int, first_row: int = 0, before=None):
        self.last = list(before) if before is not None else [None] * channels
        self.held = np.empty((0, channels), dtype=np.float64)
        self.row0 = first_row                              # row of held[0]

    def _filled(self, rows: np.ndarray, end: bool) -> tuple[np.ndarray, int]:
        """``rows`` (from ``row0``) with every gap that can be filled filled, and how many
        rows are final (before the first gap still waiting for its next value)."""
        out = rows.copy()
        final = rows.shape[0]
        for k in range(rows.shape[1]):
            col = out[:, k]
            gap = np.isnan(col)
            if not gap.any():
                continue
            ok = np.flatnonzero(~gap)
            xp = (self.row0 + ok).astype(np.float64)
            fp = col[ok]
            if self.last[k] is not None:
                xp = np.concatenate(([float(self.last[k][0])], xp))
                fp = np.concatenate(([self.last[k][1]], fp))
            where = np.flatnonzero(gap)
            if not end:
                waiting = where[where > (ok[-1] if ok.size else -1)]
                if waiting.size:
                    final = min(final, int(waiting[0]))
                    where = where[:where.size - waiting.size]
            if where.size and xp.size:
                col[where] = np.interp((self.row0 + where).astype(np.float64), xp, fp)
        return out, final

    def feed(self, block: np.ndarray) -> np.ndarray:
        """The rows now final (filled), in order; the others are held for later."""
        rows = block if not self.held.shape[0] else np.concatenate([self.held, block])
        out, final = self._filled(rows, end=False)
        done = out[:final]
        for k in range(rows.shape[1]):
            ok = np.flatnonzero(~np.isnan(rows[:final, k]))
            if ok.size:
                self.last[k] = (self.row0 + int(ok[-1]), float(rows[ok[-1], k]))
        self.held = np.array(rows[final:], dtype=np.float64)
        self.row0 += final
        return done

    def end(self) -> np.ndarray:
        """The rows still held, their trailing gaps taking each channel's last value."""
        out, _ = self._filled(self.held, end=True)
        self.row0 += out.shape[0]
        self.held = self.held[:0]
        return out
