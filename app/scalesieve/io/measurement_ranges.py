"""Measurement files kept open while many ranges of their samples are read.

Each class has ``read(start, stop, columns)`` (float64 rows) and ``close()``;
``io.measurement_readers.Source.opened()`` returns one, and the blocks of a
long recording (``stream.measurement_source``) are read through it: TDMS
through ``TdmsFile.open`` and ``channel[a:b]``, HDF5 and MATLAB v7.3 by dataset
slices (``io.matlab_hdf5``), EDF by ``get_data_slice`` of a lazily loaded file,
ASAM MDF by ``MDF.get``'s record offset and count (its time stamps too, by
``get_master``), NumPy files by plain file reads (no memory map) or an
inflating stream (``io.numpy_arrays``).  BDF (edfio loads it whole) and MATLAB
v5 (scipy.io) are read whole.
"""

from __future__ import annotations

import os
import warnings
from datetime import timedelta

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
    ``get_data_slice``, which reads only the records that hold them.

    A mapped file that another program shortens kills the process with a bus error
    when a page past its new end is touched, so each range first checks that the
    file still holds every byte it held when it was opened (one clear message if not).
    """

    def __init__(self, edfio, source: str):
        self.source = source
        self.fh = open(source, "rb")
        try:
            self.size = os.fstat(self.fh.fileno()).st_size
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                self.signals = list(edfio.read_edf(source, lazy_load_data=True).signals)
        except BaseException:
            self.fh.close()
            raise

    def _still_whole(self) -> None:
        now = os.fstat(self.fh.fileno()).st_size
        if now < self.size:
            raise ScalesieveError(f"the file became shorter while it was read (it held "
                                  f"{self.size} bytes when opened, it now holds {now})",
                                  source=self.source)

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        self._still_whole()
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
        self.fh.close()


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

    def times(self, a: int, b: int) -> np.ndarray:
        return self._guard(self.inner.times, a, b)

    def close(self) -> None:
        self._guard(self.inner.close)


def _mdf_by_file(source: str):
    """``(file, MDF)``: an MDF opened from a file object, so that asammdf reads only the
    records a range needs (opened by name, its memory-mapped path reads the whole group
    for every range, even one record)."""
    from scalesieve.io.measurement_readers import _mdf_open

    fh = open(source, "rb")
    try:
        return fh, _mdf_open(source, fh)
    except BaseException:
        fh.close()
        raise


class MdfRanges:
    """An MDF file open while ranges of one channel group are read by record offset."""

    def __init__(self, source: str, group: int, indexes: list[int]):
        self.fh, self.mdf = _mdf_by_file(source)
        self.group, self.indexes = group, indexes

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        out = np.empty((max(0, b - a), len(cols)), dtype=np.float64)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for j, k in enumerate(cols):
                out[:, j] = self.mdf.get(group=self.group, index=self.indexes[k],
                                         record_offset=a, record_count=b - a,
                                         samples_only=True)[0]
        return out

    def times(self, a: int, b: int) -> np.ndarray:
        """The group's time stamps ``a .. b`` (s)."""
        return np.asarray(self.mdf.get_master(self.group, record_offset=a, record_count=b - a),
                          dtype=np.float64)

    def close(self) -> None:
        self.mdf.close()
        self.fh.close()


def mdf_by_range(source: str, group: str | None):
    """An MDF channel group as a ``Source`` whose samples stay on disk, read by range.

    The channels are those the whole-file reader keeps (numeric, one value per
    record: learnt from each one's first record); its rate is left for the
    reader of the blocks to find from the time stamps (``detail["master"]``).
    """
    from scalesieve.io.measurement_readers import Source, _mdf_group

    fh, mdf = _mdf_by_file(source)
    try:
        gi, label, cycles, chans = _mdf_group(mdf, group, source)
        keep, names, units = [], [], []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for ci, _ in chans:
                s = mdf.get(group=gi, index=ci, record_offset=0, record_count=1)
                arr = np.asarray(s.samples)
                if arr.ndim != 1 or arr.dtype.kind not in "iufb":
                    continue
                keep.append(ci)
                names.append(s.name)
                units.append(str(s.unit or ""))
            t0 = np.asarray(mdf.get_master(gi, record_offset=0, record_count=1))
        if not keep:
            raise ScalesieveError(f"channel group {label!r} holds no numeric channel",
                                  source=source)
        try:
            start_time = mdf.header.start_time
        except Exception:  # a header without a usable time stamp
            start_time = None
    finally:
        mdf.close()
        fh.close()
    if start_time is not None and cycles >= 2 and t0.size and float(t0[0]) != 0:
        start_time = start_time + timedelta(seconds=float(t0[0]))

    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        r = MdfRanges(source, gi, keep)
        try:
            return r.read(a, b, cols)
        finally:
            r.close()

    return Source(names, units, None, cycles, read, start_time, format="MDF",
                  detail={"group": label, "master": True},
                  session=lambda: MdfRanges(source, gi, keep))
