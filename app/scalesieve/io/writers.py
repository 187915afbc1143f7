"""Write signals (WAV/FLAC/AIFF/OGG/CSV) and results (NPZ/JSON/CSV tables).

Every writer goes through :func:`scalesieve.io.atomic.atomic_write`: the file
appears complete or not at all, an existing file is replaced only with
``force``, and the paths in ``protect`` (the inputs) are never written.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Iterable, Mapping

import numpy as np
import soundfile as sf

from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.io.atomic import atomic_write

#: Extensions written as audio, and the soundfile format each one means.
AUDIO_FORMAT_BY_EXTENSION = {
    ".wav": "WAV", ".wave": "WAV", ".flac": "FLAC", ".aiff": "AIFF", ".aif": "AIFF",
    ".aifc": "AIFF", ".ogg": "OGG", ".oga": "OGG", ".au": "AU", ".snd": "AU", ".caf": "CAF",
    ".w64": "W64", ".rf64": "RF64",
}
#: Extensions written as a CSV table of samples.
CSV_EXTENSIONS = (".csv", ".txt")

# Default subtype when neither the caller nor the input says: 32-bit float
# keeps every value (docs/reference.md: from CSV input, 32-bit float WAV); FLAC has no
# float, so its widest integer; Ogg means Vorbis.
_DEFAULT_SUBTYPE = {"WAV": "FLOAT", "WAVEX": "FLOAT", "RF64": "FLOAT", "W64": "FLOAT",
                    "AIFF": "FLOAT", "AU": "FLOAT", "CAF": "FLOAT", "FLAC": "PCM_24",
                    "OGG": "VORBIS"}
# Formats that are one family under one extension: the input's member is kept.
_FAMILY = {"WAV": {"WAV", "WAVEX", "RF64"}}
# Nearest stand-in when a format cannot hold the input's subtype.
_NEAREST_SUBTYPE = {"PCM_U8": ["PCM_S8"], "PCM_S8": ["PCM_U8"], "ULAW": ["PCM_16"],
                    "ALAW": ["PCM_16"], "PCM_32": ["PCM_24"], "FLOAT": ["PCM_24"],
                    "DOUBLE": ["FLOAT", "PCM_24"]}
# Subtypes that store values beyond full scale; every other one clips.
_FLOAT_SUBTYPES = frozenset({"FLOAT", "DOUBLE"})
_BYTES_PER_SAMPLE = {"PCM_S8": 1, "PCM_U8": 1, "ULAW": 1, "ALAW": 1, "PCM_16": 2,
                     "PCM_24": 3, "PCM_32": 4, "FLOAT": 4, "DOUBLE": 8}
# A plain WAV's sizes are 32-bit; beyond this the RF64 variant is written.
_WAV_DATA_LIMIT = 0xFFFFFFFF - (1 << 20)
# Sample rates are whole numbers in audio headers; a rate this close is rounded.
_RATE_ROUNDING = 1e-5

# Channel limits of formats that have one (FLAC: 8 channels, its format specification;
# from memory, and libsndfile refuses more).
_MAX_CHANNELS = {"FLAC": 8}

_BLOCK_FRAMES = 1 << 16
_CSV_CHUNK_ROWS = 1 << 15

# soundfile >= 0.11 raises SoundFileError; older releases plain RuntimeError.
_SF_ERRORS = (getattr(sf, "SoundFileError", RuntimeError), RuntimeError, ValueError, TypeError)


def _as_2d(samples) -> np.ndarray:
    arr = np.asarray(samples)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise ValueError(f"samples must be 1-D or 2-D, got shape {arr.shape}")
    if arr.dtype not in (np.float64, np.float32):
        arr = arr.astype(np.float64)
    return arr


def _audio_format(target: str, fmt: str | None) -> str:
    if fmt is not None:
        name = str(fmt).upper()
        if name not in sf.available_formats():
            raise ScalesieveError(
                f"unknown audio format {fmt!r}; choose one of: "
                f"{', '.join(sorted(sf.available_formats()))}", source=target)
        return name
    ext = os.path.splitext(target)[1].lower()
    if ext in AUDIO_FORMAT_BY_EXTENSION:
        return AUDIO_FORMAT_BY_EXTENSION[ext]
    raise ScalesieveError(
        f"cannot tell the audio format from the extension {ext or '(none)'!r}; "
        "use .wav, .flac, .aiff or .ogg", source=target)


def _check_subtype(fmt: str, subtype: str, target: str) -> str:
    sub = str(subtype).upper()
    if sf.check_format(fmt, sub):
        return sub
    allowed = ", ".join(sorted(sf.available_subtypes(fmt)))
    raise ScalesieveError(f"subtype {subtype!r} cannot be written as {fmt}; choose one of: "
                          f"{allowed}", source=target)


def _whole_rate(rate: float, target: str) -> int:
    r = float(rate)
    if not math.isfinite(r) or r <= 0:
        raise ScalesieveError(f"sampling rate must be positive, got {rate!r}", source=target)
    whole = int(round(r))
    if whole < 1 or abs(r - whole) > _RATE_ROUNDING * r:
        raise ScalesieveError(
            f"audio files store whole-number sampling rates; {r:.9g} Hz cannot be kept "
            "(write .csv instead)", source=target)
    return whole


def _finite_and_loud(arr: np.ndarray, target: str) -> set[int]:
    """Refuse NaN and infinite samples; return the starts of the blocks that reach full scale.

    One pass of each block's least and greatest value (NaN makes them NaN, an
    infinity is one of them) finds both, before anything is written: the
    writer then clips only the blocks named here (values outside [-1, 1)).
    """
    loud = set()
    for start in range(0, arr.shape[0], _BLOCK_FRAMES):
        block = arr[start:start + _BLOCK_FRAMES]
        lo, hi = float(block.min()), float(block.max())
        if not (math.isfinite(lo) and math.isfinite(hi)):
            r, c = np.argwhere(~np.isfinite(block))[0]
            raise ScalesieveError(
                f"sample {start + int(r)} of channel {int(c)} is not a finite number; "
                "nothing was written", source=target)
        if lo < -1.0 or hi >= 1.0:
            loud.add(start)
    return loud


_NO_SPACE = "not enough disk space to write it"
#: room left for a format's header and chunks beyond the samples (WAV/RF64/AIFF/CAF)
_HEADER_BYTES = 1 << 12


def _audio_bytes(fmt: str, sub: str, frames: int, channels: int) -> int | None:
    """Bytes an uncompressed audio file of this size takes; None when compressed."""
    width = _BYTES_PER_SAMPLE.get(sub)
    if width is None or fmt in ("FLAC", "OGG"):
        return None
    return frames * channels * width + _HEADER_BYTES


def _free_bytes(path: str) -> int | None:
    """Bytes free in the folder ``path`` goes in; None when unknown (or no size at all)."""
    from scalesieve.io.folder_room import free_bytes

    try:
        return free_bytes(os.path.dirname(os.path.abspath(path)))
    except ScalesieveError:
        return None


def _check_space(target: str, need: int | None) -> None:
    """Refuse before writing when the target's disk cannot hold ``need`` bytes (None:
    a compressed format, size unknown) or cannot hold files at all."""
    from scalesieve.io.folder_room import free_bytes

    free = free_bytes(os.path.dirname(os.path.abspath(target)), source=target)
    if need is not None and free is not None and free < need:
        raise ScalesieveError(f"{_NO_SPACE} (needs {_megabytes(need)}, "
                              f"{_megabytes(free)} free)", source=target)


def _megabytes(n: int) -> str:
    return f"{n / 1e6:.3g} MB" if n >= 1e5 else f"{n} bytes"


def _disk_full(tmp: str, need: int | None) -> bool:
    """After a failed write: is the disk (nearly) full, so that was the cause?"""
    free = _free_bytes(tmp)
    if free is None:
        return False
    try:
        written = os.path.getsize(tmp)
    except OSError:
        written = 0
    # Less room left than the rest of the file needed (or than one block of it).
    rest = (need - written) if need is not None else _BLOCK_FRAMES * 8
    return free < max(rest, 1 << 16)


def write_audio(path: str | os.PathLike[str], samples, rate: float, *,
                subtype: str | None = None, format: str | None = None, force: bool = False,
                protect: Iterable = ()) -> dict:
    """Write samples to an audio file with soundfile.

    Parameters
    ----------
    path : str or os.PathLike
        Target; its extension gives the format unless ``format`` is given.
    samples : array_like, shape (n,) or (n, channels), float
        In soundfile's normalised scale (full scale is ±1).
    rate : float
        Hz. Audio headers hold whole numbers: a rate within 1e-5 (relative)
        of one is rounded to it, any other is an error.
    subtype : str, optional
        A soundfile subtype (``PCM_16``, ``PCM_24``, ``FLOAT``...). Default:
        ``FLOAT`` for WAV/AIFF-like formats, ``PCM_24`` for FLAC, ``VORBIS``
        for Ogg.
    format : str, optional
        A soundfile format name, overriding the extension.
    force : bool
        Replace an existing file.
    protect : iterable of paths
        Files never written (the inputs), even with ``force``.

    Returns
    -------
    dict
        ``path``, ``kind`` ("audio"), ``format``, ``subtype``, ``rate`` (as
        written), ``channels``, ``frames`` and ``clipped``: how many samples lay
        outside [-1, 1) and were clipped to full scale (always 0 for
        ``FLOAT``/``DOUBLE``, which keep them).

    Raises
    ------
    ScalesieveError
        Unknown format or subtype, unusable rate, NaN/inf samples, a refused
        target (see :func:`~scalesieve.io.atomic.atomic_write`) or a write error.
    """
    target = os.fspath(path)
    arr = _as_2d(samples)
    n, channels = arr.shape
    if n == 0 or channels == 0:
        raise ScalesieveError("no samples to write", source=target)
    fmt = _audio_format(target, format)
    sub = _check_subtype(fmt, subtype or _DEFAULT_SUBTYPE.get(fmt) or sf.default_subtype(fmt),
                         target)
    sr = _whole_rate(rate, target)
    loud = _finite_and_loud(arr, target)
    most = _MAX_CHANNELS.get(fmt)
    if most is not None and channels > most:
        raise ScalesieveError(f"{fmt} holds at most {most} channels and this signal has "
                              f"{channels}; write .wav (or .csv) instead", source=target)
    if fmt == "WAV" and n * channels * _BYTES_PER_SAMPLE.get(sub, 8) > _WAV_DATA_LIMIT:
        fmt = "RF64"  # same .wav name, 64-bit sizes; soundfile reads it back
    clips = sub not in _FLOAT_SUBTYPES
    clipped = 0
    need = _audio_bytes(fmt, sub, n, channels)
    _check_space(target, need)

    def write(tmp: str) -> None:
        nonlocal clipped
        try:
            with sf.SoundFile(tmp, "w", samplerate=sr, channels=channels, format=fmt,
                              subtype=sub) as f:
                for start in range(0, n, _BLOCK_FRAMES):
                    block = arr[start:start + _BLOCK_FRAMES]
                    if clips and start in loud:
                        out = (block < -1.0) | (block >= 1.0)
                        count = int(np.count_nonzero(out))
                        if count:
                            clipped += count
                            block = np.clip(block, -1.0, 1.0)
                    f.write(block)
        except _SF_ERRORS as exc:
            # libsndfile says only "System error." when the disk fills: look at the disk.
            if _disk_full(tmp, need):
                raise ScalesieveError(_NO_SPACE, source=target) from None
            # libsndfile names the temporary file; the user knows only the target.
            reason = " ".join(str(exc).replace(tmp, os.path.basename(target)).split())
            if reason.startswith("Error opening") and ": " in reason:
                reason = reason.split(": ", 1)[1]
            raise ScalesieveError(f"could not write {fmt} {sub}: {reason}",
                                  source=target) from None

    atomic_write(target, write, force=force, protect=protect)
    return {"path": target, "kind": "audio", "format": fmt, "subtype": sub, "rate": float(sr),
            "channels": int(channels), "frames": int(n), "clipped": int(clipped)}


def _header_line(names: list[str]) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(names)
    return buf.getvalue()


def write_csv(path: str | os.PathLike[str], samples, rate: float, channel_names, *,
              force: bool = False, protect: Iterable = (), start_time=None,
              clock: dict | None = None) -> dict:
    """Write samples as a CSV table: ``time_s`` first, then one column per channel.

    With ``start_time`` (a datetime: the input's own clock) the first column
    is ``timestamp`` instead, ISO 8601 continuing that clock, written as
    ``clock`` (the input's ``meta["clock"]``: separator, digits, offset) says.

    Comma delimiter, ``.`` decimal, LF line ends, a header row, time from 0
    in steps of ``1/rate``, values with ``%.17g`` (enough digits to read back
    the same float64). Written in chunks, so millions of rows stay fast.

    Returns
    -------
    dict
        ``path``, ``kind`` ("csv"), ``format`` and ``subtype`` (``None``),
        ``rate``, ``channels``, ``frames``, ``clipped`` (0).
    """
    target = os.fspath(path)
    arr = _as_2d(samples)
    n, channels = arr.shape
    names = [str(c) for c in channel_names]
    if len(names) != channels:
        raise ValueError(f"{len(names)} channel names for {channels} channels")
    r = float(rate)
    if not math.isfinite(r) or r <= 0:
        raise ScalesieveError(f"sampling rate must be positive, got {rate!r}", source=target)
    row_format = ",".join(["%.17g"] * (channels + 1)) + "\n"

    if start_time is not None:
        from scalesieve.io.time_column import ClockForm, format_timestamps

        form = ClockForm(**clock) if clock else None
        values_format = ",".join(["%.17g"] * channels) + "\n"

    def write(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(_header_line(["time_s" if start_time is None else "timestamp"] + names))
            for start in range(0, n, _CSV_CHUNK_ROWS):
                stop = min(n, start + _CSV_CHUNK_ROWS)
                if start_time is not None:
                    stamps = format_timestamps(start_time, r, start, stop - start, form)
                    body = arr[start:stop].tolist()
                    fh.write("".join(s + "," + values_format % tuple(row)
                                     for s, row in zip(stamps, body)))
                    continue
                chunk = np.empty((stop - start, channels + 1), dtype=np.float64)
                chunk[:, 0] = np.arange(start, stop, dtype=np.float64) / r
                chunk[:, 1:] = arr[start:stop]
                # One %-format over the whole chunk runs in C, unlike a per-row loop.
                fh.write((row_format * (stop - start)) % tuple(chunk.ravel().tolist()))

    atomic_write(target, write, force=force, protect=protect)
    return {"path": target, "kind": "csv", "format": None, "subtype": None, "rate": r,
            "channels": int(channels), "frames": int(n), "clipped": 0}


def _choose_subtype(fmt: str, like_subtype: str | None) -> str | None:
    """The input's subtype if ``fmt`` holds it, else its nearest stand-in, else ``None``."""
    if not like_subtype:
        return None
    for sub in [like_subtype] + _NEAREST_SUBTYPE.get(like_subtype, []):
        if sf.check_format(fmt, sub):
            return sub
    return None


def write_signal(path: str | os.PathLike[str], samples, rate: float, channel_names, *,
                 like: Recording | None = None, subtype: str | None = None,
                 force: bool = False, protect: Iterable = ()) -> dict:
    """Write a signal in the format its extension names.

    ``.wav .flac .aiff .aif .ogg`` (and ``.au .caf .w64 .rf64``) are written as
    audio by :func:`write_audio`; ``.csv`` and ``.txt`` as a table by
    :func:`write_csv` (``subtype`` does not apply to them and is ignored).

    Parameters
    ----------
    like : Recording, optional
        The input this signal came from. Its ``subtype`` is kept when the
        target format holds it (else the nearest one it holds, e.g. 32-bit
        float into FLAC becomes PCM_24, else the format's default), and its
        ``source`` is never overwritten.
    subtype : str, optional
        Wins over ``like``'s subtype.
    protect : iterable of paths
        More files never to write (``like.source`` is added).

    Returns
    -------
    dict
        As :func:`write_audio` or :func:`write_csv` return.

    Raises
    ------
    ScalesieveError
        An extension that names no supported output format, and everything
        the two writers raise.
    """
    target = os.fspath(path)
    ext = os.path.splitext(target)[1].lower()
    guard = [os.fspath(p) for p in protect]
    if like is not None and like.source:
        guard.append(like.source)
    if ext in CSV_EXTENSIONS:
        clocked = like is not None and like.start_time is not None
        return write_csv(target, samples, rate, channel_names, force=force, protect=guard,
                         start_time=like.start_time if clocked else None,
                         clock=like.meta.get("clock") if clocked else None)
    if ext not in AUDIO_FORMAT_BY_EXTENSION:
        raise ScalesieveError(
            f"cannot tell the output format from the extension {ext or '(none)'!r}; "
            "use .wav, .flac, .aiff, .ogg or .csv", source=target)
    fmt = AUDIO_FORMAT_BY_EXTENSION[ext]
    like_format = like.format if like is not None else None
    if like_format and like_format in _FAMILY.get(fmt, ()):
        fmt = like_format
    sub = subtype
    if sub is None and like is not None:
        sub = _choose_subtype(fmt, like.subtype)
    rep = write_audio(target, samples, rate, subtype=sub, format=fmt, force=force,
                      protect=guard)
    if subtype is None and like is not None and like.subtype and rep["subtype"] != like.subtype:
        rep["subtype_from"] = like.subtype     # the input's, which this format cannot hold
    return rep


#: share of clipped samples from which the warning says how to avoid it
CLIP_ADVICE_SHARE = 0.01


def output_warnings(rep: dict) -> list[str]:
    """One-line warnings about an output report: ``"OUT: what"`` each (CONTRACT form).

    A sample format other than the input's that the caller did not ask for
    (``subtype_from``, e.g. FLOAT into FLAC becomes PCM_24), and clipped
    samples; from ``CLIP_ADVICE_SHARE`` of all samples on, how to avoid them.
    """
    out = []
    path = rep.get("path")
    if rep.get("subtype_from"):
        out.append(f"{path}: written as {rep['subtype']}, not the input's "
                   f"{rep['subtype_from']} ({rep.get('format') or 'this format'} cannot hold "
                   f"it); use a .wav output or --subtype to choose")
    clipped = int(rep.get("clipped") or 0)
    if clipped:
        total = int(rep.get("frames") or 0) * int(rep.get("channels") or 1)
        share = clipped / total if total else 0.0
        text = f"{path}: {clipped} samples clipped to full scale"
        if total:
            text += f" ({100 * share:.2g} % of {total})"
        if share > CLIP_ADVICE_SHARE:
            text += ("; to keep them write a float WAV (--subtype FLOAT, .wav) or .csv, "
                     "or lower the level with a gain edit")
        out.append(text)
    return out


def write_recording(path: str | os.PathLike[str], recording: Recording, *,
                    subtype: str | None = None, force: bool = False,
                    protect: Iterable = ()) -> dict:
    """Write a :class:`Recording` keeping its rate, channels and (where possible) subtype."""
    return write_signal(path, recording.samples, recording.rate, recording.channel_names,
                        like=recording, subtype=subtype, force=force, protect=protect)


def write_npz(path: str | os.PathLike[str], arrays: Mapping[str, object], force: bool = False,
              *, protect: Iterable = ()) -> dict:
    """Write named arrays to an uncompressed ``.npz`` (``numpy.load`` reads it)."""
    target = os.fspath(path)
    for key in arrays:
        if not isinstance(key, str) or not key:
            raise ValueError(f"npz array names must be non-empty strings, got {key!r}")
    data = {k: np.asarray(v) for k, v in arrays.items()}

    def write(tmp: str) -> None:
        # A file object, so numpy does not append a second '.npz' to the name.
        with open(tmp, "wb") as fh:
            np.savez(fh, **data)

    atomic_write(target, write, force=force, protect=protect)
    return {"path": target, "kind": "npz", "arrays": sorted(data)}


def _plain(obj):
    """JSON-ready copy: numpy values to Python ones, NaN/inf to null, paths to str."""
    if isinstance(obj, Mapping):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _plain(obj.tolist())
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    if obj is None or isinstance(obj, str):
        return obj
    raise TypeError(f"cannot write {type(obj).__name__} to JSON")


def write_json(path: str | os.PathLike[str], obj, force: bool = False, *,
               protect: Iterable = ()) -> dict:
    """Write ``obj`` as UTF-8 JSON (indented, newline at the end).

    NumPy scalars and arrays become plain numbers and lists; NaN and
    infinity, which JSON cannot hold, become ``null``.
    """
    target = os.fspath(path)
    text = json.dumps(_plain(obj), indent=2, ensure_ascii=False, allow_nan=False) + "\n"

    def write(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)

    atomic_write(target, write, force=force, protect=protect)
    return {"path": target, "kind": "json"}


def _cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)  # shortest text that reads back as the same float
    if isinstance(value, (list, tuple, dict)):
        return json.dumps(_plain(value))
    return str(value)


def write_table_csv(path: str | os.PathLike[str], rows: Iterable[Mapping], force: bool = False,
                    *, fieldnames: Iterable[str] | None = None,
                    protect: Iterable = ()) -> dict:
    """Write a list of dicts as a CSV table with a header row.

    The header is ``fieldnames`` when given (so an empty table still has
    one), followed by any other keys in the order they first appear. Comma
    delimiter, LF line ends, floats as their shortest exact text, ``None``
    as an empty cell.
    """
    target = os.fspath(path)
    rows = [dict(r) for r in rows]
    names: list[str] = [str(f) for f in fieldnames] if fieldnames is not None else []
    seen = set(names)
    for r in rows:
        for key in r:
            if str(key) not in seen:
                seen.add(str(key))
                names.append(str(key))

    def write(tmp: str) -> None:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(names)
            for r in rows:
                plain = {str(k): v for k, v in r.items()}
                w.writerow([_cell(plain.get(name)) for name in names])

    atomic_write(target, write, force=force, protect=protect)
    return {"path": target, "kind": "csv", "rows": len(rows), "columns": names}
