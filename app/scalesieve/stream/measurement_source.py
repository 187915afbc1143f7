"""A measurement file's samples in blocks, and gaps filled block by block.

``MeasurementSource`` reads TDMS, HDF5, MATLAB v7.3, EDF, MDF and NumPy files by
range through their own libraries (``io.measurement_readers.Source.opened``),
so no channel is loaded whole.  It makes the checks ``io.readers`` makes on the
whole array, in one first pass over the blocks (``io.gaps.GapSurvey``), with the
same messages and warnings: NaN runs (an error without ``--fill-gaps``), a
channel of NaN only, infinite or too large values.

``filled_blocks`` gives any recording's blocks with ``--fill-gaps linear``
applied as ``io.gaps.fill_linear`` applies it to the whole array, sample for
sample (``io.gaps.LinearFill``): the last value before the first block read is
found by reading back from it, and a gap that runs past the last block wanted is
read on until its next value.
"""

from __future__ import annotations

import numpy as np

from scalesieve.errors import ScalesieveError


def last_values_before(read, start: int, channels: int, frames: int) -> list:
    """Per channel ``(row, value)`` of the last value (not NaN) before row ``start``, else
    None: read back block by block from ``start`` until every channel has one."""
    last: list = [None] * channels
    b = start
    while b > 0 and any(v is None for v in last):
        a = max(0, b - frames)
        rows = read(a, b)
        for k in range(channels):
            if last[k] is None:
                ok = np.flatnonzero(~np.isnan(rows[:, k]))
                if ok.size:
                    last[k] = (a + int(ok[-1]), float(rows[ok[-1], k]))
        b = a
    return last


def filled_blocks(read, total: int, channels: int, frames: int, start: int, stop: int):
    """Rows ``start .. stop`` in blocks of ``frames`` (the last may be shorter), NaN filled as
    ``io.gaps.fill_linear`` fills the whole recording; ``read(a, b)`` gives raw rows."""
    from scalesieve.io.gaps import LinearFill

    before = last_values_before(read, start, channels, frames) if start > 0 else None
    fill = LinearFill(channels, start, before)
    pos, made, parts, held = start, start, [], 0
    while made < stop:
        if pos < total:
            b = min(total, pos + frames)
            got = fill.feed(read(pos, b))
            pos = b
        else:
            got = fill.end()
            if got.shape[0] == 0:  # pragma: no cover - the end gives every row held
                break
        got = got[:stop - made]
        made += got.shape[0]
        if got.shape[0]:
            parts.append(got)
            held += got.shape[0]
        while held >= frames:
            rows = np.concatenate(parts) if len(parts) > 1 else parts[0]
            yield rows[:frames]
            parts, held = ([rows[frames:]] if rows.shape[0] > frames else []), held - frames
    if held:
        yield np.concatenate(parts) if len(parts) > 1 else parts[0]


def _rate_of_master(src, path: str) -> float:
    """The rate the whole-file reader finds from an MDF group's time stamps (their steps
    checked as ``time_column.analyse_steps`` checks them), from blocks of them."""
    from scalesieve.stream.sources import READ_FRAMES
    from scalesieve.stream.text_source import steps_rate

    reader = src.opened()
    try:
        t0 = float(reader.times(0, 1)[0])

        def times():
            for a in range(0, src.frames, READ_FRAMES):
                yield a, reader.times(a, min(src.frames, a + READ_FRAMES)) - t0
        return steps_rate(times, src.frames, path, None, lambda i: None)
    finally:
        reader.close()


class MeasurementSource:
    """A measurement file's samples in blocks, float64, as ``io.readers`` reads them whole.

    The attributes and ``blocks`` of ``stream.sources._Source``; ``group`` and
    ``dataset`` choose as for the whole-file reader.
    """

    subtype = None
    parsed = False            # read as it is, no parse before the passes
    checked = True            # one pass checks the file before the passes

    def __init__(self, path: str, kind: str, channel=None, rate: float | None = None,
                 fill_gaps: str | None = None, group: str | None = None,
                 dataset: str | None = None, survey: dict | None = None):
        from scalesieve.io import measurement_readers as mr
        from scalesieve.io.readers import measurement_channel_rate

        self.path = path
        src = mr.open_source(path, kind, group=group, dataset=dataset, channel=channel,
                             lazy=True)
        if src.detail.get("master") and src.frames >= 2:
            src.rate = _rate_of_master(src, path)
        label = src.format
        pick, file_rate, frames = measurement_channel_rate(src, channel, rate, path)
        if frames == 0:
            raise ScalesieveError(f"this {label} file holds no samples", source=path)
        self._src, self.pick, self.fill = src, pick, fill_gaps
        self.cols = list(range(len(src.names))) if pick is None else [pick]
        self.rate, self.frames = float(file_rate), int(frames)
        self.file_channels = len(src.names)
        self.names = [src.names[k] for k in self.cols]
        self.units = [src.units[k] for k in self.cols]
        self.channels = len(self.cols)
        self.format = None                       # outputs take the defaults (as io.writers)
        self.measurement_format = label
        self.start_time = src.start_time
        self.clock = ({"sep": "T", "digits": 6, "offset": None}
                      if src.start_time is not None else None)
        self._notes = list(src.warnings)
        self.filled = 0
        if survey is None:
            self._survey()
        else:                  # a worker's piece: the parent's pass checked the file
            self.filled, self._notes = int(survey["filled"]), list(survey["notes"])

    def _survey(self) -> None:
        """``io.readers``' checks of the whole array, in one pass over the blocks."""
        from scalesieve.io.gaps import GapSurvey, describe_runs
        from scalesieve.io.input_check import MAX_ABS_SAMPLE
        from scalesieve.stream.sources import READ_FRAMES

        survey = GapSurvey(self.channels, MAX_ABS_SAMPLE)
        for block in self._raw_blocks(READ_FRAMES, 0, self.frames):
            survey.add(block)
        if survey.count.any():
            col = int(np.flatnonzero(survey.count)[0])
            where = describe_runs(self.names[col], survey.run(col), int(survey.runs[col]),
                                  self.rate)
            if self.fill is None:
                raise ScalesieveError(f"{where}; use --fill-gaps linear to fill gaps",
                                      source=self.path)
            if not survey.valued.all():
                raise ScalesieveError("a channel holds only NaN samples", source=self.path)
            self.filled = int(survey.count.sum())
            self._notes.append(f"filled {self.filled} NaN samples by linear interpolation "
                               f"({where})")
        if survey.first_bad is not None:
            r, c, v = survey.first_bad
            raise ScalesieveError(f"sample {r} of channel {self.names[c]!r} is "
                                  + ("infinite" if np.isinf(v) else
                                     f"{v:.3g}, beyond ±{MAX_ABS_SAMPLE:g}"), source=self.path)

    def warnings(self) -> list[str]:
        """The reader's warnings: the library's notes, the gaps filled."""
        return list(self._notes)

    def _raw_blocks(self, frames: int, start: int, stop: int):
        reader = self._src.opened()
        try:
            for a in range(start, stop, frames):
                yield reader.read(a, min(stop, a + frames), self.cols)
        finally:
            reader.close()

    def blocks(self, frames: int | None = None, start: int = 0, stop: int | None = None):
        """Frames ``start .. stop`` (default all) in blocks of ``frames``."""
        from scalesieve.stream.sources import READ_FRAMES

        frames = frames or READ_FRAMES
        stop = self.frames if stop is None else stop
        if not self.filled:
            yield from self._raw_blocks(frames, start, stop)
            return
        reader = self._src.opened()
        try:
            yield from filled_blocks(lambda a, b: reader.read(a, b, self.cols), self.frames,
                                     self.channels, frames, start, stop)
        finally:
            reader.close()
