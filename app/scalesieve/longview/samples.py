"""Any stretch of a long recording's samples, read when asked for, as float64.

A WAV holding 16-, 24- or 32-bit integer PCM or 32- or 64-bit float samples
is read straight from its data chunk (``io.wav_header.data_layout``) with plain
file reads, scaled as libsndfile scales it, so the numbers equal what
``soundfile.read`` gives; any other file is read with soundfile, seeking to the
stretch.  No memory map: a mapped file that another program shortens kills the
process with a bus error at the first page past its new end; each read here
checks the file's size first and a short read is one clear message.
"""

from __future__ import annotations


import numpy as np
import soundfile as sf

from scalesieve.errors import ScalesieveError
from scalesieve.io.exact_reads import read_range
from scalesieve.io.wav_header import data_layout


class SampleReader:
    """Frames ``start .. stop`` of ``path`` (one channel, or all), float64, shape (m, channels).

    Parameters
    ----------
    path : str
    channel : int, optional
        Only this channel (0-based); default every channel.
    direct : bool
        Read the data chunk straight where the format allows (``False``: soundfile always).
    """

    def __init__(self, path: str, channel: int | None = None, direct: bool = True):
        from scalesieve.io.audio_facts import audio_facts

        self.path, self.pick = path, channel
        self.rate, self.file_channels, self.frames = audio_facts(path)[:3]
        self.channels = 1 if channel is not None else self.file_channels
        self.layout = data_layout(path) if direct else None
        self._file = None
        if self.layout is not None and self.layout["channels"] == self.file_channels \
                and self.layout["frames"] >= self.frames:
            lay = self.layout
            width = 3 if lay["kind"] == "i3" else int(lay["kind"][1])
            order = ">" if lay["byteorder"] == "big" else "<"
            if lay["kind"] == "i3":
                dtype = np.dtype("u1")
                shape = (self.frames, self.file_channels * 3)
            else:
                dtype = np.dtype(order + lay["kind"])
                shape = (self.frames, self.file_channels)
            self._file = open(path, "rb", buffering=0)
            self._dtype, self._frame_bytes = dtype, shape[1] * dtype.itemsize
            self._width, self._order = width, order
        else:
            self.layout = None

    @property
    def direct(self) -> bool:
        """Whether the samples are read straight from the data chunk (not through soundfile)."""
        return self._file is not None

    def read(self, start: int, stop: int) -> np.ndarray:
        """Frames ``start .. stop`` (clipped to the recording), float64, (m, channels)."""
        start, stop = max(0, int(start)), min(self.frames, int(stop))
        if stop <= start:
            return np.zeros((0, self.channels))
        if self._file is not None:
            return self._direct(start, stop)
        try:
            with sf.SoundFile(self.path) as f:
                f.seek(start)
                x = f.read(stop - start, dtype="float64", always_2d=True)
        except Exception as exc:  # noqa: BLE001 - soundfile's own errors vary by version
            raise ScalesieveError(f"could not read the audio samples after frame {start} "
                                  f"({exc})", self.path) from None
        if x.shape[0] != stop - start:
            raise ScalesieveError(f"holds {start + x.shape[0]} readable frames, but its header "
                                  f"says {self.frames} (truncated?)", self.path)
        return x if self.pick is None else x[:, self.pick:self.pick + 1].copy()

    def _chunk(self, start: int, stop: int) -> np.ndarray:
        """The data chunk's bytes of frames ``start .. stop``, the file's size checked first."""
        first = self.layout["offset"] + start * self._frame_bytes
        count = (stop - start) * self._frame_bytes
        raw = np.empty(count // self._dtype.itemsize, dtype=self._dtype)
        read_range(self._file, first, raw, (start, stop), self.path)
        return raw.reshape(stop - start, -1)

    def _direct(self, start: int, stop: int) -> np.ndarray:
        lay = self.layout
        raw = self._chunk(start, stop)
        if lay["kind"] == "i3":
            b = np.asarray(raw).reshape(stop - start, self.file_channels, 3).astype(np.int32)
            if self._order == "<":
                v = b[..., 0] | (b[..., 1] << 8) | (b[..., 2] << 16)
            else:
                v = b[..., 2] | (b[..., 1] << 8) | (b[..., 0] << 16)
            v = np.where(v >= 1 << 23, v - (1 << 24), v)
            x = v.astype(np.float64)
        else:
            x = np.asarray(raw, dtype=np.float64)
        if lay["scale"] != 1.0:
            x = x / lay["scale"]
        return x if self.pick is None else x[:, self.pick:self.pick + 1].copy()

    def close(self) -> None:
        """Let the file go (it may then be replaced or removed)."""
        if self._file is not None:
            self._file.close()
            self._file = None
