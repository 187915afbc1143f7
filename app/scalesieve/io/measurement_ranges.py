"""Measurement files kept open while many ranges of their samples are read.

Each class has ``read(start, stop, columns)`` (float64 rows) and ``close()``;
``io.measurement_readers.Source.opened()`` returns one, and the blocks of a
long recording (``stream.measurement_source``) are read through it.
"""

from __future__ import annotations

import warnings

import numpy as np

from scalesieve.errors import ScalesieveError
from scalesieve.io.measurement_readers import NAMES, _CappedFile, _quiet_libraries, _reason


class WholeReads:
    """Ranges of a format read whole: each through the Source's own reader."""

    def __init__(self, reader):
        self.read = reader

    def close(self) -> None:
        pass


class TdmsRanges:
    """A TDMS file open for streaming (``TdmsFile.open``): each range read by ``channel[a:b]``."""

    def __init__(self, nptdms, source: str, group: str, names: list[str]):
        self.raw = _CappedFile(source)
        try:
            self.file = nptdms.TdmsFile.open(self.raw)
        except BaseException:
            self.raw.close()
            raise
        self.group, self.names = self.file[group], names

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        out = np.empty((max(0, b - a), len(cols)), dtype=np.float64)
        for j, k in enumerate(cols):
            out[:, j] = self.group[self.names[k]][a:b]
        return out

    def close(self) -> None:
        self.file.close()
        self.raw.close()


class EdfRanges:
    """An EDF file loaded lazily (edfio memory-maps its data records): ranges by
    ``get_data_slice``, which reads only the records that hold them."""

    def __init__(self, edfio, source: str):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            self.signals = list(edfio.read_edf(source, lazy_load_data=True).signals)

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        out = np.empty((max(0, b - a), len(cols)), dtype=np.float64)
        for j, k in enumerate(cols):
            s = self.signals[k]
            fs = float(s.sampling_frequency)
            part = s.get_data_slice(a / fs, b / fs)
            if part.shape[0] != b - a:  # pragma: no cover - a rate no float can hold
                raise ValueError(f"a slice of {b - a} samples came back with {part.shape[0]}")
            out[:, j] = part
        return out

    def close(self) -> None:
        self.signals = []


class QuietRanges:
    """A format's open reader of ranges, its log lines kept quiet and its failures one line."""

    def __init__(self, opener, kind: str, source: str):
        self.kind, self.source = kind, source
        self.inner = self._guard(opener)

    def _guard(self, call, *args):
        try:
            with _quiet_libraries(collect=False):
                return call(*args)
        except ScalesieveError:
            raise
        except MemoryError:
            raise ScalesieveError("is too large to load into memory",
                                  source=self.source) from None
        except Exception as exc:  # a damaged file's samples: one line
            raise ScalesieveError(f"could not read the {NAMES[self.kind][0]} samples "
                                  f"({_reason(exc)})", source=self.source) from None

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        return self._guard(self.inner.read, a, b, cols)

    def close(self) -> None:
        self._guard(self.inner.close)
