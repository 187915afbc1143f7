"""The recording's samples read in blocks of frames, checked as they come.

An audio file is read through soundfile (``_Source``); a text table is parsed
once in chunks by the whole-file reader's rules (``stream.text_source``).
Both give ``rate``, ``frames``, ``channels``, ``pick``, ``names``,
``start_time``, ``clock``, ``blocks(frames, start, stop)`` and ``warnings()``.
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

    def __init__(self, path: str, channel: int | None):
        from scalesieve.io.audio_facts import audio_facts

        self.path, self.pick = path, channel
        self.rate, self.file_channels, self.frames, self.format, self.subtype = \
            audio_facts(path)
        self.channels = 1 if channel is not None else self.file_channels
        # an audio file's channels are named ch0, ch1, ... (as io.readers names them)
        self.names = ([f"ch{k}" for k in range(self.file_channels)] if channel is None
                      else [f"ch{channel}"])

    def warnings(self) -> list[str]:
        """The reader's warnings (a header that declares more frames than the file holds)."""
        from scalesieve.io.readers import truncation_warnings

        return truncation_warnings(self.path, self.frames)

    def blocks(self, frames: int = READ_FRAMES, start: int = 0, stop: int | None = None):
        """Frames ``start .. stop`` (default all) in blocks of ``frames``."""
        from scalesieve.io.input_check import MAX_ABS_SAMPLE, first_unusable

        stop = self.frames if stop is None else stop
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


def open_source(input_path: str, channel=None, rate: float | None = None, progress=None):
    """The recording to read in blocks, its channel and rate checked as the readers check them.

    ``progress(fraction, text)``: told how a text table's parse goes, over the
    first ``PARSE_SHARE`` of the bar (``after_parse`` maps the passes onto the rest).
    """
    from scalesieve.io.csv_reader import check_channel, check_rate
    from scalesieve.io.readers import TEXT_EXTENSIONS

    if os.path.splitext(input_path)[1].lower() in TEXT_EXTENSIONS:
        from scalesieve.stream.text_source import TextSource

        told = None if progress is None else \
            (lambda f: progress(PARSE_SHARE * f, "parsing the table"))
        return TextSource(input_path, channel, rate, progress=told)
    whole = _Source(input_path, None)
    # an audio file's channels are named ch0, ch1, ... (as io.readers names them)
    names = [f"ch{k}" for k in range(whole.file_channels)]
    src = _Source(input_path, check_channel(channel, whole.file_channels, input_path, names))
    given = check_rate(rate, input_path)
    if given is not None and abs(given - src.rate) > 1e-9 * src.rate:
        raise ScalesieveError(
            f"the file's header says {src.rate:g} Hz; --rate {given:g} does not match "
            "(the rate of an audio file comes from its header; leave out --rate)", input_path)
    return src


def after_parse(src, progress):
    """``progress`` for the passes over ``src``: the whole bar, or what a parse left of it."""
    if progress is None or not src.parsed:
        return progress
    return lambda f, text: progress(PARSE_SHARE + (1.0 - PARSE_SHARE) * f, text)
