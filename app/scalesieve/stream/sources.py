"""The recording's samples read in blocks of frames, checked as they come.

An audio file is read through soundfile (``_Source``); a text table is parsed
once in chunks by the whole-file reader's rules (``stream.text_source``); a
measurement file (TDMS, HDF5, MATLAB v7.3, EDF, NumPy) is read by range through
its own library (``stream.measurement_source``).  All give ``rate``, ``frames``,
``channels``, ``pick``, ``names``, ``start_time``, ``clock``,
``blocks(frames, start, stop)`` and ``warnings()``.  With ``--fill-gaps linear``
an audio or measurement file's NaN are filled block by block, sample for sample
as the whole-file readers fill them (``measurement_source.filled_blocks``).
"""

from __future__ import annotations

import os

import numpy as np
import soundfile as sf

from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError

#: frames read at a time
READ_FRAMES = tf.BLOCK
#: the share of a command's progress a text table's parse takes (the passes take the rest)
PARSE_SHARE = 0.5


class _Source:
    """An audio recording's samples in blocks of frames, float64, checked as they come."""

    start_time = clock = None        # audio files carry no clock
    parsed = False                   # read as it is, no parse before the passes
    checked = False                  # no pass checks the file first (but to fill gaps)

    def __init__(self, path: str, channel: int | None, fill_gaps: str | None = None,
                 survey: dict | None = None):
        from scalesieve.io.audio_facts import audio_facts

        self.path, self.pick, self.filled = path, channel, 0
        self.rate, self.file_channels, self.frames, self.format, self.subtype = \
            audio_facts(path)
        self.channels = 1 if channel is not None else self.file_channels
        # an audio file's channels are named ch0, ch1, ... (as io.readers names them)
        self.names = ([f"ch{k}" for k in range(self.file_channels)] if channel is None
                      else [f"ch{channel}"])
        if fill_gaps is not None:
            from scalesieve.io.readers import _BOUNDED_SUBTYPES

            if self.subtype not in _BOUNDED_SUBTYPES:    # integer samples hold no NaN
                if survey is None:
                    self._survey()
                else:                        # a worker: the parent's pass found them
                    self.filled = int(survey["filled"])
                self.checked = True          # one pass checks the file before the passes

    def _survey(self) -> None:
        """``io.readers``' checks of the whole array with ``--fill-gaps``, in one pass."""
        from scalesieve.io.gaps import GapSurvey
        from scalesieve.io.input_check import MAX_ABS_SAMPLE

        survey = GapSurvey(self.channels, MAX_ABS_SAMPLE)
        with _AudioRanges(self) as r:
            for a in range(0, self.frames, READ_FRAMES):
                survey.add(r.read(a, min(self.frames, a + READ_FRAMES)))
        nan, bad = survey.first_nan, survey.first_bad
        first = nan if bad is None or (nan is not None and nan < bad[:2]) else bad[:2]
        if first is not None and first == nan:
            if survey.first_inf is not None:
                first = survey.first_inf
            elif not survey.valued.all():
                raise ScalesieveError("a channel holds only NaN samples", self.path)
            else:
                self.filled = int(survey.count.sum())
                first = None if bad is None else bad[:2]
        if first is not None:
            r, c = first
            v = bad[2] if bad is not None and bad[:2] == first else float("inf")
            where = (f"sample {r} (at {r / self.rate:.6g} s) of channel "
                     f"{self.pick if self.pick is not None else c}")
            what = ("is infinite" if np.isinf(v) else
                    f"is {v:.3g}, beyond ±{MAX_ABS_SAMPLE:g}; the file looks damaged")
            raise ScalesieveError(f"{where} {what}", self.path)

    def warnings(self) -> list[str]:
        """The reader's warnings (a header that declares more frames than the file holds)."""
        from scalesieve.io.readers import truncation_warnings

        return truncation_warnings(self.path, self.frames)

    def blocks(self, frames: int = READ_FRAMES, start: int = 0, stop: int | None = None):
        """Frames ``start .. stop`` (default all) in blocks of ``frames``."""
        from scalesieve.io.input_check import MAX_ABS_SAMPLE, first_unusable

        stop = self.frames if stop is None else stop
        if self.filled:
            from scalesieve.stream.measurement_source import filled_blocks

            with _AudioRanges(self) as r:
                yield from filled_blocks(r.read, self.frames, self.channels, frames, start,
                                         stop)
            return
        done = start
        try:
            f = sf.SoundFile(self.path)
        except Exception as exc:  # noqa: BLE001 - soundfile's own errors vary by version
            raise ScalesieveError(f"could not read the audio samples ({exc})", self.path) from None
        with f:
            if start:
                f.seek(start)
            while done < stop:
                try:
                    block = f.read(min(frames, stop - done), dtype="float64", always_2d=True)
                except Exception as exc:  # noqa: BLE001 - as above
                    raise ScalesieveError(f"could not read the audio samples after frame "
                                          f"{done} ({exc})", self.path) from None
                if block.shape[0] == 0:
                    break
                if self.pick is not None:
                    block = block[:, self.pick:self.pick + 1]
                bad = first_unusable(block)
                if bad is not None:
                    r, c = bad
                    v = float(block[r, c])
                    r += done
                    c = self.pick if self.pick is not None else c
                    where = f"sample {r} (at {r / self.rate:.6g} s) of channel {c}"
                    what = ("is NaN; use --fill-gaps linear to fill gaps" if np.isnan(v) else
                            "is infinite" if np.isinf(v) else
                            f"is {v:.3g}, beyond ±{MAX_ABS_SAMPLE:g}; the file looks damaged")
                    raise ScalesieveError(f"{where} {what}", self.path)
                done += block.shape[0]
                yield block
        if done != stop:
            raise ScalesieveError(f"holds {done} readable frames, but its header says "
                                  f"{self.frames} (truncated?)", self.path)


class _AudioRanges:
    """An audio file open while ranges of its frames are read (raw: NaN as they are)."""

    def __init__(self, src: _Source):
        self.src, self.file, self.at = src, sf.SoundFile(src.path), 0

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.file.close()

    def read(self, a: int, b: int) -> np.ndarray:
        try:
            if a != self.at:
                self.file.seek(a)
            block = self.file.read(b - a, dtype="float64", always_2d=True)
        except Exception as exc:  # noqa: BLE001 - soundfile's own errors vary by version
            raise ScalesieveError(f"could not read the audio samples after frame {a} "
                                  f"({exc})", self.src.path) from None
        if block.shape[0] != b - a:
            raise ScalesieveError(f"holds {a + block.shape[0]} readable frames, but its "
                                  f"header says {self.src.frames} (truncated?)", self.src.path)
        self.at = b
        pick = self.src.pick
        return block if pick is None else np.ascontiguousarray(block[:, pick:pick + 1])


def open_source(input_path: str, channel=None, rate: float | None = None, progress=None, *,
                fill_gaps: str | None = None, group: str | None = None,
                dataset: str | None = None, survey: dict | None = None):
    """The recording to read in blocks, its channel and rate checked as the readers check them.

    ``survey``: what :func:`survey_of` said of the same recording opened the same way
    (a worker opening its piece): the pass that checks the samples and counts the
    gaps is not made again.

    ``progress(fraction, text)``: told how a text table's parse goes, over the
    first ``PARSE_SHARE`` of the bar (``after_parse`` maps the passes onto the rest).
    ``fill_gaps``, ``group`` and ``dataset`` as for ``io.readers.read_recording``.
    """
    from scalesieve.io.csv_reader import check_channel, check_rate
    from scalesieve.io.readers import TEXT_EXTENSIONS, _kind
    from scalesieve.io.input_check import check_readable

    if os.path.splitext(input_path)[1].lower() in TEXT_EXTENSIONS:
        from scalesieve.stream.text_source import TextSource

        told = None if progress is None else \
            (lambda f: progress(PARSE_SHARE * f, "parsing the table"))
        return TextSource(input_path, channel, rate, progress=told, fill_gaps=fill_gaps)
    kind = _kind(check_readable(input_path)[0])
    if kind not in ("audio", "text"):
        from scalesieve.stream.measurement_source import MeasurementSource

        return MeasurementSource(input_path, kind, channel, rate, fill_gaps, group, dataset,
                                 survey=survey)
    whole = _Source(input_path, None)
    # an audio file's channels are named ch0, ch1, ... (as io.readers names them)
    names = [f"ch{k}" for k in range(whole.file_channels)]
    src = _Source(input_path, check_channel(channel, whole.file_channels, input_path, names),
                  fill_gaps, survey)
    given = check_rate(rate, input_path)
    if given is not None and abs(given - src.rate) > 1e-9 * src.rate:
        raise ScalesieveError(
            f"the file's header says {src.rate:g} Hz; --rate {given:g} does not match "
            "(the rate of an audio file comes from its header; leave out --rate)", input_path)
    return src


def survey_of(src) -> dict:
    """What the first pass over ``src`` found, for ``open_source(..., survey=)``."""
    return {"filled": int(getattr(src, "filled", 0)), "notes": list(src.warnings())}


def after_parse(src, progress):
    """``progress`` for the passes over ``src``: the whole bar, or what a parse left of it."""
    if progress is None or not src.parsed:
        return progress
    return lambda f, text: progress(PARSE_SHARE + (1.0 - PARSE_SHARE) * f, text)
