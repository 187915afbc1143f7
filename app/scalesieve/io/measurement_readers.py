"""Measurement formats, each read through its own library (the ``formats`` extra).

TDMS (npTDMS), EDF/BDF (edfio), MATLAB ``.mat`` v5 (scipy.io) and v7.3 (h5py),
HDF5 (h5py), ASAM MDF 4 (asammdf) and Excel ``.xlsx`` (openpyxl, its first
sheet read as a text table). Channel names and units come from the file, the
rate where the format stores it, else ``--rate``.

Each format opens as a :class:`Source`: names, units, rate, ``frames`` and
``read(start, stop)``, so the facts (for the memory guard) come without the
samples, and a span can be read where the format allows it cheaply (TDMS,
HDF5 slice on disk; the others read whole and cut).  ``Source.opened()`` keeps
the file open for many ranges (``io.measurement_ranges`` says how, per format).
"""

from __future__ import annotations

import contextlib
import gc
import io
import logging
import os
import sys
import warnings
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone

import numpy as np

from scalesieve.errors import ScalesieveError

#: Extension -> format name, for files whose content does not say.
EXTENSIONS = {".tdms": "tdms", ".edf": "edf", ".bdf": "bdf", ".mat": "mat", ".h5": "hdf5",
              ".hdf5": "hdf5", ".hdf": "hdf5", ".he5": "hdf5", ".mf4": "mdf", ".mdf": "mdf",
              ".xlsx": "xlsx", ".xlsm": "xlsx"}

#: Formats whose samples are read by range without loading a whole channel (the others
#: are read whole: ``stream.choice`` says why when a command would need them in blocks).
RANGED = frozenset({"TDMS", "HDF5", "MATLAB v7.3", "EDF", "NumPy", "ASAM MDF"})

#: What each format is called in messages, and the library that reads it.
NAMES = {"tdms": ("TDMS", "npTDMS", "nptdms"), "edf": ("EDF", "edfio", "edfio"),
         "bdf": ("BDF", "edfio", "edfio"), "mat": ("MATLAB", "scipy", "scipy.io"),
         "mat73": ("MATLAB v7.3", "h5py", "h5py"), "hdf5": ("HDF5", "h5py", "h5py"),
         "mdf": ("ASAM MDF", "asammdf", "asammdf"), "xlsx": ("Excel", "openpyxl", "openpyxl"),
         "npy": ("NumPy", "numpy", "numpy"), "npz": ("NumPy", "numpy", "numpy")}

#: Names of a scalar that gives the rate in Hz (case-insensitive).
RATE_NAMES = ("fs", "rate", "sample_rate", "samplerate", "sampling_rate")

_HDF5_MAGIC = b"\x89HDF\r\n\x1a\n"


def kind_of(head: bytes, ext: str) -> str | None:
    """The measurement format a file's first bytes (then its extension) name, else None."""
    if head.startswith(b"TDSm"):
        return "tdms"
    if head.startswith(_HDF5_MAGIC):
        return "hdf5"
    if head.startswith(b"MATLAB 7.3 MAT-file"):
        return "mat73"
    if head.startswith((b"MDF     ", b"UnFinMF ")):
        return "mdf"
    if head.startswith(b"\x93NUMPY"):
        return "npy"
    if ext == ".npz" and head[:4] in (b"PK\x03\x04", b"PK\x05\x06"):
        return "npz"
    if head.startswith(b"\xffBIOSEMI"):
        return "bdf"
    if head.startswith(b"0       ") and len(head) >= 256 and ext in (".edf", ".rec", ""):
        return "edf"
    # a MATLAB 5.0 header or not, a .mat file is read as MATLAB (SciPy names what is wrong)
    return EXTENSIONS.get(ext)


_LIBRARY_LOGGERS = ("nptdms", "asammdf", "edfio", "h5py", "openpyxl")


class _Notes(logging.Handler):
    """Collects what a library logs, so it reaches the user as our warnings, not as noise."""

    def __init__(self):
        super().__init__(logging.WARNING)
        self.lines: list[str] = []

    def emit(self, record):
        text = " ".join(record.getMessage().split())
        if text and text not in self.lines:
            self.lines.append(text if len(text) <= 160 else text[:159] + "…")


@contextlib.contextmanager
def _quiet_libraries(collect: bool = True):
    """Library log lines and Python warnings gathered instead of printed (and collected)."""
    notes = _Notes()
    saved = []
    # npTDMS hangs a console handler on each of its module loggers: take them all.
    names = set(_LIBRARY_LOGGERS) | {
        n for n in list(logging.root.manager.loggerDict)
        if n.split(".")[0] in _LIBRARY_LOGGERS}
    for name in sorted(names):
        log = logging.getLogger(name)
        saved.append((log, log.propagate, list(log.handlers)))
        log.handlers = [notes]
        log.propagate = False
    hook = sys.unraisablehook
    # asammdf's __del__ fails on an object whose opening failed; that is no news to the user
    sys.unraisablehook = lambda unraisable: None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield notes
    finally:
        if collect:
            gc.collect()
        sys.unraisablehook = hook
        for log, propagate, handlers in saved:
            log.handlers = handlers
            log.propagate = propagate


def _library(kind: str, source: str):
    """Import the library for ``kind``; a missing one is one line naming the extra."""
    import importlib

    label, package, module = NAMES[kind]
    try:
        return importlib.import_module(module)
    except ImportError:
        raise ScalesieveError(
            f"reading {label} files needs the {package} package; install it with "
            "pip install 'scalesieve[formats]'", source=source) from None


@dataclass
class Source:
    """A recording in a measurement file, its facts known before its samples."""

    names: list[str]
    units: list[str]
    rate: float | None
    frames: int
    reader: object                     # callable (start, stop, columns) -> (n, k) array
    start_time: datetime | None = None
    warnings: list[str] = field(default_factory=list)
    format: str = ""
    detail: dict = field(default_factory=dict)
    #: callable () -> an object with ``read(start, stop, columns)`` and ``close()`` that keeps
    #: the file open over many ranges; None: ranges come from ``reader``
    session: object = None

    def read(self, start: int = 0, stop: int | None = None,
             columns: list[int] | None = None) -> np.ndarray:
        stop = self.frames if stop is None else stop
        cols = list(range(len(self.names))) if columns is None else list(columns)
        return self.reader(start, stop, cols)

    def opened(self):
        """A reader of many ranges (``read(start, stop, columns)``, ``close()``)."""
        from scalesieve.io.measurement_ranges import WholeReads

        return WholeReads(self.reader) if self.session is None else self.session()


def _float_array(a, what: str, source: str) -> np.ndarray:
    arr = np.asarray(a)
    if arr.dtype.kind == "b":
        arr = arr.astype(np.float64)
    if arr.dtype.kind not in "iuf":
        raise ScalesieveError(f"{what} holds {arr.dtype.name} values, not numbers",
                              source=source)
    return arr


def _rate_near_whole(rate: float) -> float:
    if abs(rate - round(rate)) <= 1e-9 * rate:
        return float(round(rate))
    return float(rate)


def _choose(candidates: list[str], wanted: str | None, option: str, what: str,
            source: str) -> str:
    """The candidate ``wanted`` names, the only one, or an error listing them."""
    if wanted is not None:
        if wanted in candidates:
            return wanted
        low = [c for c in candidates if c.lower() == wanted.lower()]
        if len(low) == 1:
            return low[0]
        listed = ", ".join(repr(c) for c in candidates) or "none"
        raise ScalesieveError(f"{option} {wanted!r} is not in the file; its {what}: {listed}",
                              source=source)
    if len(candidates) == 1:
        return candidates[0]
    listed = ", ".join(repr(c) for c in candidates[:12])
    more = f" and {len(candidates) - 12} more" if len(candidates) > 12 else ""
    raise ScalesieveError(f"holds {len(candidates)} {what} ({listed}{more}); choose one "
                          f"with {option} NAME", source=source)


# ---------------------------------------------------------------------------- TDMS

class _CappedFile(io.FileIO):
    """A file whose reads never ask for more than it holds.

    A damaged length field makes a library call ``read(2**28)``; a plain file
    allocates that much before finding the end, this one only what is left.
    """

    def __init__(self, path: str):
        super().__init__(path, "rb")
        self._size = os.fstat(self.fileno()).st_size

    def read(self, size: int = -1) -> bytes:
        if size is not None and size > 0:
            size = min(size, max(0, self._size - self.tell()))
        return super().read(size)


def _tdms(source: str, group: str | None, dataset: str | None) -> Source:
    nptdms = _library("tdms", source)
    try:
        with _CappedFile(source) as fh:
            f = nptdms.TdmsFile.read_metadata(fh)
    except Exception as exc:  # npTDMS raises many kinds on damaged files
        raise ScalesieveError(f"is not a readable TDMS file ({_reason(exc)})",
                              source=source) from None
    groups = [g for g in f.groups()]
    with_data = [g.name for g in groups if any(len(c) > 0 for c in g.channels())]
    if not with_data:
        empty = ", ".join(repr(g.name) for g in groups) or "none"
        raise ScalesieveError(f"holds no channel with samples (groups: {empty})",
                              source=source)
    name = _choose(with_data, group, "--group", "groups with samples", source)
    g = f[name]
    chans = [c for c in g.channels() if len(c) > 0]
    numeric = [c for c in chans if np.dtype(c.dtype).kind in "iufb"] if all(
        getattr(c, "dtype", None) is not None for c in chans) else chans
    if not numeric:
        raise ScalesieveError(f"group {name!r} holds no numeric channel", source=source)
    lengths = {len(c) for c in numeric}
    incs = {float(c.properties.get("wf_increment", 0) or 0) for c in numeric}
    if len(lengths) > 1 or len(incs) > 1:
        parts = ", ".join(f"{c.name!r} ({len(c)} samples"
                          + (f", {1 / float(c.properties['wf_increment']):g} Hz"
                             if c.properties.get("wf_increment") else "") + ")"
                          for c in numeric)
        raise ScalesieveError(f"group {name!r} holds channels of different lengths or rates: "
                              f"{parts}; choose one with --channel NAME", source=source)
    inc = incs.pop()
    rate = _rate_near_whole(1.0 / inc) if inc > 0 else None
    start = numeric[0].properties.get("wf_start_time")
    start_time = None
    if start is not None:
        try:
            # npTDMS gives UTC as numpy datetime64
            start_time = (datetime(1970, 1, 1, tzinfo=timezone.utc)
                          + timedelta(microseconds=int(np.datetime64(start, "us").astype(
                              np.int64))))
        except (TypeError, ValueError, OverflowError):
            start_time = None
    names = [c.name for c in numeric]
    units = [str(c.properties.get("unit_string", "") or "") for c in numeric]

    from scalesieve.io.measurement_ranges import TdmsRanges

    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        r = TdmsRanges(nptdms, source, name, names)
        try:
            return r.read(a, b, cols)
        finally:
            r.close()

    return Source(names, units, rate, lengths.pop(), read, start_time, format="TDMS",
                  detail={"group": name},
                  session=lambda: TdmsRanges(nptdms, source, name, names))


# ------------------------------------------------------------------------- EDF/BDF

def _edf(source: str, kind: str, channel) -> Source:
    edfio = _library(kind, source)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            edf = edfio.read_bdf(source) if kind == "bdf" else edfio.read_edf(source)
    except Exception as exc:  # edfio raises ValueError and others on damaged headers
        raise ScalesieveError(f"is not a readable {NAMES[kind][0]} file ({_reason(exc)})",
                              source=source) from None
    signals = list(edf.signals)
    if not signals:
        notes = len(edf.annotations)
        raise ScalesieveError(f"holds annotations only ({notes} annotation"
                              f"{'' if notes == 1 else 's'}) and no signal to analyse",
                              source=source)
    names = [s.label.strip() or f"ch{k}" for k, s in enumerate(signals)]
    units = [s.physical_dimension.strip() for s in signals]
    rates = [float(s.sampling_frequency) for s in signals]
    detail: dict = {"rates": rates}
    if len(set(rates)) > 1:
        # Signals at other rates need --channel: choose first, then check the rest agree.
        detail["mixed_rates"] = True
    try:
        start_time = edf.startdatetime
    except Exception:  # anonymised or damaged dates
        start_time = None

    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        return np.column_stack([np.asarray(signals[k].data, dtype=np.float64)[a:b]
                                for k in cols]) if cols else np.empty((b - a, 0))

    # at mixed rates the reader takes the chosen channel's own length (from the header:
    # a lazily loaded signal's data stays on disk until it is read)
    lengths = [int(s.samples_per_data_record) * int(edf.num_data_records) for s in signals]
    src = Source(names, units, rates[0], min(lengths), read, start_time,
                 format=NAMES[kind][0], detail=detail)
    src.detail["lengths"] = lengths
    if kind == "edf":       # edfio loads BDF whole; an EDF file lazily, a slice at a time
        from scalesieve.io.measurement_ranges import EdfRanges

        src.session = lambda: EdfRanges(edfio, source)
    return src


# --------------------------------------------------------------------- HDF5 / MAT

def _mdf_open(source: str, fh=None):
    asammdf = _library("mdf", source)
    try:
        return asammdf.MDF(source if fh is None else fh)
    except Exception as exc:  # asammdf raises many kinds on damaged files
        reason = _reason(exc)
    gc.collect()  # the half-made object goes now, while its complaints are quietened
    raise ScalesieveError(f"is not a readable MDF file ({reason})", source=source)


def _mdf_group(mdf, group: str | None, source: str):
    """``(index, label, cycles, [(channel index, channel)])`` of the channel group to read."""
    groups = []
    for gi, g in enumerate(mdf.groups):
        chans = [(ci, c) for ci, c in enumerate(g.channels) if c.channel_type != 2
                 and getattr(c, "component_addr", 0) == 0 and c.name]
        cycles = int(g.channel_group.cycles_nr)
        if chans and cycles > 0:
            label = (getattr(g.channel_group, "acq_name", "") or "").strip() or str(gi)
            groups.append((gi, label, cycles, chans))
    if not groups:
        raise ScalesieveError("holds no channel group with samples", source=source)
    if group is None and len(groups) > 1:
        parts = "; ".join(f"{label!r} ({', '.join(c.name for _, c in chans[:4])}"
                          f"{', ...' if len(chans) > 4 else ''}; {cycles} samples)"
                          for _, label, cycles, chans in groups)
        raise ScalesieveError(f"holds {len(groups)} channel groups on different time "
                              f"bases: {parts}; choose one with --group NAME or number",
                              source=source)
    if group is None:
        chosen = groups[0]
    else:
        chosen = next((x for x in groups if x[1] == group or str(x[0]) == group), None)
        if chosen is None:
            listed = ", ".join(f"{label!r} ({gi})" for gi, label, _, _ in groups)
            raise ScalesieveError(f"--group {group!r} is not in the file; its channel "
                                  f"groups: {listed}", source=source)
    return chosen


def _mdf(source: str, group: str | None) -> Source:
    mdf = _mdf_open(source)
    try:
        gi, label, cycles, chans = _mdf_group(mdf, group, source)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sigs = [mdf.get(group=gi, index=ci) for ci, _ in chans]
        t = np.asarray(sigs[0].timestamps, dtype=np.float64)
        columns, names, units = [], [], []
        for s in sigs:
            arr = np.asarray(s.samples)
            if arr.ndim != 1 or arr.dtype.kind not in "iufb":
                continue
            columns.append(arr.astype(np.float64))
            names.append(s.name)
            units.append(str(s.unit or ""))
        if not columns:
            raise ScalesieveError(f"channel group {label!r} holds no numeric channel",
                                  source=source)
        try:
            start_time = mdf.header.start_time
        except Exception:  # a header without a usable time stamp
            start_time = None
    finally:
        mdf.close()
    rate = None
    if t.size >= 2:
        from scalesieve.io import time_column as tc

        rate = tc.analyse_steps(t - t[0], lambda i: None, source).rate
        if start_time is not None and t[0] != 0:
            start_time = start_time + timedelta(seconds=float(t[0]))
    data = np.column_stack(columns)

    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        return data[a:b, cols]

    return Source(names, units, rate, data.shape[0], read, start_time, format="MDF",
                  detail={"group": label})


# --------------------------------------------------------------------------- xlsx

def xlsx_as_text(source: str) -> str:
    """The first sheet of a workbook as tab-separated text (dates as ISO 8601)."""
    openpyxl = _library("xlsx", source)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wb = openpyxl.load_workbook(source, read_only=True, data_only=True)
    except Exception as exc:  # zip, XML and openpyxl errors alike
        raise ScalesieveError(f"is not a readable Excel workbook ({_reason(exc)})",
                              source=source) from None
    try:
        if not wb.worksheets:
            raise ScalesieveError("holds no worksheet", source=source)
        ws = wb.worksheets[0]
        lines = []
        for row in ws.iter_rows(values_only=True):
            cells = []
            for v in row:
                if v is None:
                    cells.append("")
                elif isinstance(v, datetime):
                    cells.append(v.isoformat(timespec="microseconds"))
                elif isinstance(v, float):
                    cells.append(repr(v))
                else:
                    cells.append(" ".join(str(v).split()))
            while cells and cells[-1] == "":
                cells.pop()
            lines.append("\t".join(cells))
    finally:
        wb.close()
    while lines and not lines[-1]:
        lines.pop()
    if not lines:
        raise ScalesieveError("its first worksheet is empty", source=source)
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- public

def _reason(exc: Exception) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= 120 else text[:119] + "…"


def open_source(source: str, kind: str, *, group: str | None = None,
                dataset: str | None = None, channel=None, lazy: bool = False) -> Source:
    """The :class:`Source` of a measurement file of ``kind`` (see :func:`kind_of`);
    ``lazy``: an MDF file's samples and time stamps left on disk (read by range)."""
    _library(kind, source)  # imported first: its loggers must exist to be quietened
    try:
        from scalesieve.io.matlab_hdf5 import _hdf5, _mat5
        from scalesieve.io.measurement_ranges import mdf_by_range

        with _quiet_libraries() as notes:
            if kind == "tdms":
                src = _tdms(source, group, dataset)
            elif kind in ("edf", "bdf"):
                src = _edf(source, kind, channel)
            elif kind == "mat":
                src = _mat5(source, dataset)
            elif kind in ("mat73", "hdf5"):
                src = _hdf5(source, dataset, matlab=kind == "mat73")
            elif kind == "mdf":
                src = mdf_by_range(source, group) if lazy else _mdf(source, group)
            elif kind in ("npy", "npz"):
                from scalesieve.io.numpy_arrays import numpy_source

                src = numpy_source(source, kind, dataset)
            else:  # pragma: no cover - kind_of names only these
                raise ValueError(f"unknown measurement format {kind!r}")
        label = NAMES[kind][1]
        src.warnings.extend(f"{label}: {line}" for line in notes.lines)
        reader = src.reader

        def quiet_reader(a, b, cols):
            try:
                with _quiet_libraries():
                    return reader(a, b, cols)
            except ScalesieveError:
                raise
            except MemoryError:
                raise ScalesieveError("is too large to load into memory",
                                      source=source) from None
            except Exception as exc:  # a damaged file's samples: one line
                raise ScalesieveError(f"could not read the {NAMES[kind][0]} samples "
                                      f"({_reason(exc)})", source=source) from None

        src.reader = quiet_reader
        if src.session is not None:
            opener = src.session
            from scalesieve.io.measurement_ranges import QuietRanges

            src.session = lambda: QuietRanges(opener, kind, source)
        return src
    except ScalesieveError:
        raise
    except MemoryError:
        raise ScalesieveError("is too large to load into memory", source=source) from None
    except Exception as exc:  # a library's own failure on a damaged file: one line
        raise ScalesieveError(f"could not be read as {NAMES[kind][0]} ({_reason(exc)})",
                              source=source) from None


def _edf_header_facts(source: str) -> tuple[int, int, float | None]:
    """(most samples of one signal, signals, its rate) from an EDF/BDF header alone."""
    with open(source, "rb") as fh:
        head = fh.read(256)
        ns = int(head[252:256].decode("ascii", "replace").strip() or 0)
        records = int(head[236:244].decode("ascii", "replace").strip() or -1)
        duration = float(head[244:252].decode("ascii", "replace").strip() or 0)
        labels = [fh.read(16).decode("latin-1").strip() for _ in range(ns)]
        fh.seek(256 + ns * 216)  # label 16, transducer 80, five fields of 8, prefilter 80
        per = [int(fh.read(8).decode("ascii", "replace").strip() or 0) for _ in range(ns)]
    keep = [p for p, lab in zip(per, labels) if "annotations" not in lab.lower()]
    if records < 0:  # unknown count: the file size tells
        size = os.path.getsize(source)
        width = 3 if head.startswith(b"\xff") else 2
        records = max(0, (size - 256 * (ns + 1)) // max(1, width * sum(per)))
    most = max(keep) if keep else 0
    return records * most, len(keep), (most / duration if duration > 0 and most else None)


def probe_facts(source: str, kind: str) -> dict:
    """Frames, channels and rate of a measurement file without reading its samples.

    Raises ScalesieveError when the file cannot be opened (or its library is missing).
    """
    frames, names, rate = 0, [], None
    _library(kind, source)
    quiet = _quiet_libraries()
    quiet.__enter__()
    try:
        if kind == "tdms":
            nptdms = _library(kind, source)
            with _CappedFile(source) as fh:
                f = nptdms.TdmsFile.read_metadata(fh)
            best = max(f.groups(), key=lambda g: sum(len(c) for c in g.channels()),
                       default=None)
            if best is not None:
                chans = [c for c in best.channels() if len(c) > 0]
                frames = max((len(c) for c in chans), default=0)
                names = [c.name for c in chans]
                inc = chans[0].properties.get("wf_increment") if chans else None
                rate = 1.0 / float(inc) if inc else None
        elif kind in ("hdf5", "mat73"):
            h5py = _library("hdf5", source)
            shapes = []
            with h5py.File(source, "r") as f:
                f.visititems(lambda n, o: shapes.append((n, o.shape)) if isinstance(
                    o, h5py.Dataset) and o.shape and o.dtype.kind in "iufb" else None)
            if shapes:
                n, shape = max(shapes, key=lambda x: int(np.prod(x[1])))
                frames = max(shape)
                width = int(np.prod(shape)) // max(1, frames)
                names = [f"{n}[{k}]" for k in range(width)]
        elif kind == "mat":
            sio = _library(kind, source)
            with _CappedFile(source) as fh:
                listed = sio.whosmat(fh)
            found = [(n, shape) for n, shape, cls in listed
                     if cls not in ("char", "cell", "struct", "logical") and len(shape) <= 2]
            if found:
                n, shape = max(found, key=lambda x: int(np.prod(x[1])))
                frames = max(shape)
                names = [f"{n}[{k}]" for k in range(int(np.prod(shape)) // max(1, frames))]
        elif kind in ("edf", "bdf"):
            frames, count, rate = _edf_header_facts(source)
            names = [f"ch{k}" for k in range(count)]
        elif kind == "mdf":
            asammdf = _library(kind, source)
            reason = None
            with _quiet_libraries():  # a half-made object is collected here, quietly
                try:
                    mdf = asammdf.MDF(source)
                except Exception as exc:  # asammdf raises many kinds on damaged files
                    reason = _reason(exc)
            if reason is not None:
                raise ScalesieveError(f"is not a readable MDF file ({reason})", source=source)
            try:
                for g in mdf.groups:
                    if int(g.channel_group.cycles_nr) > frames:
                        frames = int(g.channel_group.cycles_nr)
                        names = [c.name for c in g.channels if c.channel_type != 2]
            finally:
                mdf.close()
        elif kind in ("npy", "npz"):
            from scalesieve.io.numpy_arrays import probe_numpy

            frames, names, rate = probe_numpy(source, kind)
        elif kind == "xlsx":
            openpyxl = _library(kind, source)
            wb = openpyxl.load_workbook(source, read_only=True)
            try:
                ws = wb.worksheets[0]
                frames = int(ws.max_row or 0)
                names = [f"ch{k}" for k in range(int(ws.max_column or 1))]
            finally:
                wb.close()
    except ScalesieveError:
        raise
    except Exception as exc:  # the reader will say what is wrong in its own words
        raise ScalesieveError(f"could not be probed as {NAMES[kind][0]} ({_reason(exc)})",
                              source=source) from None
    finally:
        quiet.__exit__(None, None, None)
    return {"frames": int(frames), "channels": len(names), "channel_names": names,
            "rate": rate, "format": NAMES[kind][0]}


def contents(source: str, kind: str) -> tuple[str | None, dict[str, list[tuple[str, str, float | None]]]]:
    """What a measurement file holds, for a window to offer: ``(option, parts)``.

    ``option`` is ``"group"``, ``"dataset"`` or ``None`` (one part only);
    ``parts`` maps each group or dataset to its channels as (name, unit, rate).
    """
    _library(kind, source)
    parts: dict[str, list[tuple[str, str, float | None]]] = {}
    option: str | None = None
    with _quiet_libraries():
        try:
            if kind == "tdms":
                option = "group"
                nptdms = _library(kind, source)
                with _CappedFile(source) as fh:
                    f = nptdms.TdmsFile.read_metadata(fh)
                for g in f.groups():
                    chans = []
                    for c in g.channels():
                        if len(c) == 0:
                            continue
                        inc = c.properties.get("wf_increment")
                        chans.append((c.name, str(c.properties.get("unit_string", "") or ""),
                                      1.0 / float(inc) if inc else None))
                    if chans:
                        parts[g.name] = chans
            elif kind == "mdf":
                option = "group"
                asammdf = _library(kind, source)
                mdf = asammdf.MDF(source)
                try:
                    for gi, g in enumerate(mdf.groups):
                        if int(g.channel_group.cycles_nr) <= 0:
                            continue
                        label = (getattr(g.channel_group, "acq_name", "") or "").strip() \
                            or str(gi)
                        chans = [(c.name, str(c.unit or ""), None) for c in g.channels
                                 if c.channel_type != 2 and c.name]
                        if chans:
                            parts[label] = chans
                finally:
                    mdf.close()
            elif kind in ("hdf5", "mat73", "mat"):
                option = "dataset"
                if kind == "mat":
                    sio = _library(kind, source)
                    with _CappedFile(source) as fh:
                        listed = sio.whosmat(fh)
                    for n, shape, cls in listed:
                        if cls in ("char", "cell", "struct") or len(shape) > 2 or \
                                n.lower() in RATE_NAMES or int(np.prod(shape)) < 2:
                            continue
                        width = min(shape) if len(shape) == 2 else 1
                        parts[n] = [(n if width == 1 else f"{n}[{k}]", "", None)
                                    for k in range(width)]
                else:
                    from scalesieve.io.matlab_hdf5 import _text_attr

                    h5py = _library("hdf5", source)
                    with h5py.File(source, "r") as f:
                        def visit(n, o):
                            if not isinstance(o, h5py.Dataset) or o.dtype.kind not in "iufb" \
                                    or o.ndim not in (1, 2) or o.size < 2 or \
                                    n.split("/")[-1].lower() in RATE_NAMES or \
                                    any(p.startswith("#") for p in n.split("/")):
                                return
                            width = 1 if o.ndim == 1 else min(o.shape)
                            short = n.split("/")[-1]
                            unit = _text_attr(o, "unit", "units") or ""
                            parts[n] = [(short if width == 1 else f"{short}[{k}]", unit, None)
                                        for k in range(width)]
                        f.visititems(visit)
            else:  # EDF/BDF: one set of signals, each at its own rate
                src = _edf(source, kind, None)
                parts[""] = [(n, u, r) for n, u, r in
                             zip(src.names, src.units, src.detail["rates"])]
        except ScalesieveError:
            raise
        except Exception as exc:  # damaged files: the reader says the rest
            raise ScalesieveError(f"could not be read as {NAMES[kind][0]} ({_reason(exc)})",
                                  source=source) from None
    return option, parts
