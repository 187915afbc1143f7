"""Open any supported recording: audio through soundfile, text tables through csv_reader.

The file's content decides before its name: a WAV named ``.txt`` is read as
audio. Every problem becomes one :class:`~scalesieve.errors.ScalesieveError`
with a plain message; no soundfile or numpy traceback reaches the user.
"""

from __future__ import annotations

import os

import numpy as np
import soundfile as sf

from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
# csv_reader (and its time-column and dialect modules) is imported where a text table is
# read: an audio file's commands do not pay for it at start.
from scalesieve.io import measurement_readers
from scalesieve.io.input_check import check_channel, check_rate
from scalesieve.io.gaps import check_fill_method, describe_runs, fill_linear
from scalesieve.io.input_check import (MAX_ABS_SAMPLE, check_readable, first_unusable,
                                       os_error_message)
from scalesieve.io.quiet_native import quiet_native_stderr

#: Extensions always read as text tables (unless the content is audio).
TEXT_EXTENSIONS = frozenset({".csv", ".tsv", ".txt", ".dat", ".tab", ".asc"})

# First bytes of the audio containers soundfile reads.
_AUDIO_MAGIC = (b"RIFF", b"RIFX", b"RF64", b"BW64", b"FORM", b"fLaC", b"OggS", b".snd",
                b"dns.", b"caff", b"riff", b"ID3", b"NIST_1A", b"MATLAB 5.0", b"2BIT",
                b"Creative Voice File")

# Bytes per sample of subtypes whose size follows from the frame count.
_FIXED_WIDTH = {"PCM_S8": 1, "PCM_U8": 1, "ULAW": 1, "ALAW": 1, "PCM_16": 2,
                "PCM_24": 3, "PCM_32": 4, "FLOAT": 4, "DOUBLE": 8}

# Integer subtypes: soundfile reads them as value / 2**(bits - 1), never beyond ±1,
# never NaN or infinite.
_BOUNDED_SUBTYPES = frozenset({"PCM_S8", "PCM_U8", "PCM_16", "PCM_24", "PCM_32", "ULAW",
                               "ALAW"})

# Containers whose samples are compressed whatever the subtype says.
_COMPRESSED_FORMATS = frozenset({"FLAC", "OGG", "MP3", "MPEG"})

# Samples per byte of a compressed stream up to which its header's frame
# count is trusted for one allocation: ordinary audio compresses 2-4 times
# (FLAC, ADPCM); silence far more, and those files, like every header claiming
# more, are read block by block, so memory follows what the file really holds.
_MAX_SAMPLES_PER_BYTE = 16

# No codec packs more samples into a byte than this (FLAC of digital silence
# comes to a few hundred): the most frames a compressed file can hold, for probe().
_MOST_SAMPLES_PER_BYTE = 4096

# Samples (frames x channels) per block read: a header with many channels
# must not turn one block into a huge buffer.
_BLOCK_SAMPLES = 1 << 18

# soundfile >= 0.11 raises SoundFileError; older releases plain RuntimeError.
_SF_ERRORS = (getattr(sf, "SoundFileError", RuntimeError), RuntimeError, ValueError, TypeError)
_HEAD_BYTES = 1 << 16



def truncation(source: str, info, held: int) -> tuple[int, str | None]:
    """(frames the header declares, a warning when the file holds fewer, else None)."""
    declared = int(info.frames)
    if info.format in ("WAV", "WAVEX", "RF64"):
        from scalesieve.io.wav_header import declared_frames

        declared = max(declared, declared_frames(source) or 0)
    if held < declared:
        return declared, (f"the header declares {declared} frames but the file holds "
                          f"{held}; the recording is incomplete (read what is there)")
    return declared, None


def truncation_warnings(path: str, held: int) -> list[str]:
    """The reader's warnings for an audio file read in blocks, where ``held`` frames were."""
    import soundfile as sf

    warning = truncation(path, sf.info(path), held)[1]
    return [warning] if warning else []

def _audio_extensions() -> frozenset[str]:
    exts = {"." + name.lower() for name in sf.available_formats()}
    exts |= {".aif", ".aiff", ".aifc", ".oga", ".opus", ".mp3", ".wave", ".snd", ".bwf"}
    return frozenset(exts - TEXT_EXTENSIONS)


AUDIO_EXTENSIONS = _audio_extensions()
#: every extension the readers take by name: what a folder given as a batch INPUT
#: contributes.  Headerless ``.raw`` audio is left out: no header gives its rate or format.
RECORDING_EXTENSIONS = frozenset((AUDIO_EXTENSIONS | TEXT_EXTENSIONS
                                  | frozenset(measurement_readers.EXTENSIONS)) - {".raw"})


def _read_head(source: str) -> bytes:
    try:
        with open(source, "rb") as fh:
            return fh.read(_HEAD_BYTES)
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None


def _has_audio_magic(head: bytes) -> bool:
    if head.startswith(_AUDIO_MAGIC):
        return True
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return False  # UTF-16 text, whose byte-order mark looks like an MPEG sync
    # An MPEG audio frame starts with 11 set sync bits.
    return len(head) >= 2 and head[0] == 0xFF and (head[1] & 0xE0) == 0xE0


def _kind(source: str) -> str:
    """``"audio"``, ``"text"`` or a measurement format: content first, then the extension."""
    head = _read_head(source)
    ext = os.path.splitext(source)[1].lower()
    measured = measurement_readers.kind_of(head, ext)
    if measured is not None:
        return measured
    if _has_audio_magic(head):
        return "audio"
    ext = os.path.splitext(source)[1].lower()
    if ext in TEXT_EXTENSIONS:
        return "text"
    if ext in AUDIO_EXTENSIONS:
        return "audio"
    from scalesieve.io import csv_reader

    if csv_reader.looks_like_text(head):
        return "text"
    return "audio"


# libsndfile reasons that mislead or mean nothing to a user, and what they mean here
# (the file exists and is regular: check_readable said so).
_PLAIN_REASONS = (
    ("File does not exist or is not a regular file", "format not recognised"),
    ("Unspecified internal error", "damaged header or data"),
    ("Internal error : SF_INFO struct incomplete", "damaged header"),
    ("Internal psf_fseek() failed", "the data ends before the header says"),
    ("unknown error in flac decoder", "damaged FLAC data"),
)


def _sf_reason(exc: Exception) -> str:
    """libsndfile's own reason, without the 'Error opening <path>:' prefix, in plain words."""
    text = " ".join(str(exc).split())
    if ": " in text and text.startswith("Error opening"):
        text = text.split(": ", 1)[1]
    for raw, plain in _PLAIN_REASONS:
        if raw in text:
            return plain
    text = text.strip().rstrip(".")
    if len(text) > 120:
        text = text[:119] + "…"
    return text or type(exc).__name__


def _audio_info(source: str, ext: str):
    try:
        with quiet_native_stderr():
            return sf.info(source)
    except _SF_ERRORS as exc:
        reason = _sf_reason(exc)
        if ext in AUDIO_EXTENSIONS:
            msg = f"is not a readable audio file ({reason})"
        else:
            msg = f"is neither a text table nor an audio format soundfile can read ({reason})"
        raise ScalesieveError(msg, source=source) from None
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None


def _plausible_frames(info, size: int) -> tuple[int, bool]:
    """Frames to allocate for, and whether the header's count was kept.

    A header can claim more frames than the file holds (a recorder that lost
    power, a damaged file); for fixed-width samples the file size bounds it.
    """
    frames = int(info.frames)
    width = None if info.format in _COMPRESSED_FORMATS else _FIXED_WIDTH.get(info.subtype)
    if width is not None:
        most = size // (width * max(info.channels, 1))
        if frames > most:
            return most, False
    return frames, True


def _check_dtype(dtype) -> np.dtype:
    dt = np.dtype(dtype)
    if dt not in (np.float64, np.float32):
        raise ValueError(f"dtype must be float64 or float32, got {dt}")
    return dt


def _read_blocks(f: sf.SoundFile, pick: int | None, dtype: np.dtype) -> np.ndarray:
    """Every frame, read in blocks: memory grows only with what is really there."""
    parts = []
    frames = max(1, _BLOCK_SAMPLES // max(f.channels, 1))
    while True:
        block = f.read(frames, dtype=dtype.name, always_2d=True)
        if block.shape[0] == 0:
            break
        parts.append(block if pick is None else block[:, pick:pick + 1].copy())
    width = f.channels if pick is None else 1
    if not parts:
        return np.empty((0, width), dtype=dtype)
    return np.concatenate(parts, axis=0)


def _read_audio_samples(source: str, info, frames: int, trusted: bool, size: int,
                        pick: int | None, dtype: np.dtype) -> np.ndarray:
    channels = info.channels
    width = channels if pick is None else 1
    compressed = info.format in _COMPRESSED_FORMATS or info.subtype not in _FIXED_WIDTH
    suspicious = not trusted or (compressed
                                 and frames * channels > _MAX_SAMPLES_PER_BYTE * size)
    if suspicious:
        try:
            with sf.SoundFile(source) as f:
                return _read_blocks(f, pick, dtype)
        except _SF_ERRORS:
            # soundfile seeks past what it read, which fails beyond the real end.
            raise ScalesieveError(
                f"the header claims {info.frames} frames, more than this {size}-byte file "
                "can hold, and the samples cannot be read; the file looks damaged",
                source=source) from None
        except MemoryError:
            raise ScalesieveError("is too large to load into memory", source=source) from None
    try:
        with sf.SoundFile(source) as f:
            out = np.empty((frames, width), dtype=dtype)
            if pick is None:
                got = f.read(frames, dtype=dtype.name, always_2d=True, out=out)
                return out[:got.shape[0]]
            done = 0
            step = max(1, _BLOCK_SAMPLES // max(channels, 1))
            while done < frames:
                block = f.read(min(step, frames - done), dtype=dtype.name, always_2d=True)
                if block.shape[0] == 0:
                    break
                out[done:done + block.shape[0], 0] = block[:, pick]
                done += block.shape[0]
            return out[:done]
    except MemoryError:
        gib = frames * width * dtype.itemsize / 2**30
        raise ScalesieveError(
            f"needs {gib:.1f} GiB of memory for {frames} frames x {width} channels; "
            "choose one channel or a shorter file", source=source) from None
    except _SF_ERRORS as exc:
        raise ScalesieveError(f"could not read the audio samples ({_sf_reason(exc)})",
                              source=source) from None
    except OSError as exc:
        raise ScalesieveError(os_error_message(exc), source=source) from None


def _read_audio(source: str, size: int, *, rate, channel, fill_gaps, dtype) -> Recording:
    ext = os.path.splitext(source)[1].lower()
    info = _audio_info(source, ext)
    if info.frames <= 0:
        raise ScalesieveError("holds no audio samples (0 frames)", source=source)
    if info.channels <= 0 or info.samplerate <= 0:  # pragma: no cover - libsndfile refuses
        raise ScalesieveError("has a damaged header (no channels or no rate)", source=source)
    file_rate = float(info.samplerate)
    given = check_rate(rate, source)
    if given is not None and abs(given - file_rate) > 1e-9 * file_rate:
        raise ScalesieveError(
            f"the file's header says {file_rate:g} Hz; --rate {given:g} does not match "
            "(the rate of an audio file comes from its header; leave out --rate)",
            source=source)
    pick = check_channel(channel, info.channels, source,
                         [f"ch{k}" for k in range(info.channels)])
    frames, trusted = _plausible_frames(info, size)
    with quiet_native_stderr():
        samples = _read_audio_samples(source, info, frames, trusted, size, pick, dtype)
    if samples.shape[0] == 0:
        raise ScalesieveError("holds no readable audio samples (truncated?)", source=source)

    meta: dict = {"format_info": info.format_info, "subtype_info": info.subtype_info,
                  "file_channels": int(info.channels), "filled_gaps": 0}
    warns: list[str] = []
    declared, warning = truncation(source, info, samples.shape[0])
    if warning:
        meta["header_frames"] = declared
        meta["truncated"] = True
        warns.append(warning)
    if pick is not None:
        meta["channel_index"] = pick

    # Integer samples read as floats lie in [-1, 1]: only float subtypes need the scan.
    first = None if info.subtype in _BOUNDED_SUBTYPES else first_unusable(samples)
    if first is not None and np.isnan(samples[first]) and fill_gaps is not None:
        # Gaps are filled on request; an infinity or a huge value is still refused.
        if np.isinf(samples).any():
            first = tuple(int(v) for v in np.argwhere(np.isinf(samples))[0])
        else:
            try:
                meta["filled_gaps"] = int(fill_linear(samples).sum())
            except ValueError:
                raise ScalesieveError("a channel holds only NaN samples",
                                      source=source) from None
            first = first_unusable(samples)
    if first is not None:
        # Only float subtypes can hold these; a broken export, usually.
        r, c = first
        value = float(samples[r, c])
        where = (f"sample {r} (at {r / file_rate:.6g} s) of channel "
                 f"{pick if pick is not None else c}")
        if np.isnan(value):
            raise ScalesieveError(f"{where} is NaN; use --fill-gaps linear to fill gaps",
                                  source=source)
        if np.isinf(value):
            raise ScalesieveError(f"{where} is infinite", source=source)
        raise ScalesieveError(f"{where} is {value:.3g}, beyond ±{MAX_ABS_SAMPLE:g}; the file "
                              "looks damaged", source=source)
    # The model need not scan these samples again (api.build_model reads this).
    meta["samples_checked"] = True

    names = [f"ch{k}" for k in range(info.channels)]
    if pick is not None:
        names = [names[pick]]
    return Recording(samples, file_rate, names, source=source, format=info.format,
                     subtype=info.subtype, meta=meta, warnings=tuple(warns))


def _nan_runs(col: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) sample of each run of NaN in one channel."""
    bad = np.isnan(col).astype(np.int8)
    edges = np.diff(np.concatenate(([0], bad, [0])))
    return list(zip(np.flatnonzero(edges == 1).tolist(),
                    (np.flatnonzero(edges == -1) - 1).tolist()))


def measurement_channel_rate(src, channel, rate, source: str) -> tuple:
    """The channel picked, the rate and the frame count of a measurement Source.

    Shared by the whole-file reader and the reader in blocks
    (``stream.measurement_source``): signals at different rates need one chosen, a
    file with no rate needs ``--rate``, and a ``--rate`` unlike the file's is refused.
    """
    label = src.format
    pick = check_channel(channel, len(src.names), source, src.names)
    file_rate, frames = src.rate, src.frames
    rates = src.detail.get("rates")
    if rates is not None and len(set(rates)) > 1:
        if pick is None:
            listed = ", ".join(f"{n!r} {r:g} Hz" for n, r in zip(src.names, rates))
            raise ScalesieveError(f"holds signals at different rates ({listed}); choose one "
                                  "with --channel NAME", source=source)
        file_rate, frames = rates[pick], src.detail["lengths"][pick]
    given = check_rate(rate, source)
    if file_rate is None:
        if given is None:
            raise ScalesieveError(f"this {label} file stores no sampling rate (no scalar "
                                  "fs, rate or sample_rate); give --rate HZ", source=source)
        file_rate = given
    elif given is not None and abs(given - file_rate) > 1e-9 * file_rate:
        raise ScalesieveError(f"the file says {file_rate:g} Hz; --rate {given:g} does not "
                              "match (leave out --rate)", source=source)
    return pick, file_rate, frames


def _read_measurement(source: str, kind: str, *, rate, channel, fill_gaps, dtype, group,
                      dataset) -> Recording:
    """A TDMS, EDF/BDF, MATLAB, HDF5 or MDF file through its own library."""
    src = measurement_readers.open_source(source, kind, group=group, dataset=dataset,
                                          channel=channel)
    label = src.format
    pick, file_rate, frames = measurement_channel_rate(src, channel, rate, source)
    cols = list(range(len(src.names))) if pick is None else [pick]
    # checked as float64 first: a value beyond float32's range is refused, not made inf
    samples = np.asarray(src.read(0, frames, cols), dtype=np.float64)
    if samples.shape[0] == 0:
        raise ScalesieveError(f"this {label} file holds no samples", source=source)
    names = [src.names[k] for k in cols]
    notes = list(src.warnings)
    filled = 0
    if np.isnan(samples).any():
        col = int(np.flatnonzero(np.isnan(samples).any(axis=0))[0])
        runs = _nan_runs(samples[:, col])
        where = describe_runs(names[col], runs[0], len(runs), file_rate)
        if fill_gaps is None:
            raise ScalesieveError(f"{where}; use --fill-gaps linear to fill gaps",
                                  source=source)
        if np.isnan(samples).all(axis=0).any():
            raise ScalesieveError("a channel holds only NaN samples", source=source)
        filled = int(fill_linear(samples).sum())
        notes.append(f"filled {filled} NaN samples by linear interpolation ({where})")
    first = first_unusable(samples)
    if first is not None:
        r, c = first
        v = float(samples[r, c])
        raise ScalesieveError(f"sample {r} of channel {names[c]!r} is "
                              + ("infinite" if np.isinf(v) else
                                 f"{v:.3g}, beyond ±{MAX_ABS_SAMPLE:g}"), source=source)
    samples = np.ascontiguousarray(samples, dtype=dtype)
    meta = {"measurement_format": label, "file_channels": len(src.names),
            "filled_gaps": filled, "samples_checked": True, **src.detail}
    if pick is not None:
        meta["channel_index"] = pick
    if src.start_time is not None:
        meta["clock"] = {"sep": "T", "digits": 6, "offset": None}
    return Recording(samples, float(file_rate), names, source=source, meta=meta,
                     start_time=src.start_time, warnings=tuple(notes),
                     units=[src.units[k] for k in cols])


def read_recording(path: str | os.PathLike[str], *, rate: float | None = None,
                   channel: int | str | None = None, fill_gaps: str | None = None,
                   dtype=np.float64, group: str | None = None,
                   dataset: str | None = None) -> Recording:
    """Read an audio file or a numeric text table into a :class:`Recording`.

    Parameters
    ----------
    path : str or os.PathLike
        WAV, FLAC, AIFF, OGG or any other format soundfile reads (every
        subtype it reads: 8/16/24/32-bit PCM, float, double, u-law, ...), or a
        CSV/TSV/TXT/DAT table. Content decides first (audio signatures), then
        the extension, then whether the bytes look like text.
    rate : float, optional
        For text input: the sampling rate in Hz, required without a time
        column and overriding one. For audio input the rate comes from the
        header; a ``rate`` that differs from it is an error (equal is accepted),
        so a wrong ``--rate`` never silently retimes a recording.
    channel : int or str, optional
        0-based channel index (for text: among the columns after the time
        column) or a channel's name; ``None`` keeps all. Out of range is an
        error naming how many channels there are.
    fill_gaps : {None, "linear"}
        Opt-in interpolation of empty/NaN cells (text) or NaN samples (float
        audio). Without it they are an error naming the line (text) or the
        sample (audio).
    dtype : float64 or float32
        Sample type; float32 halves memory for very long recordings.
    group : str, optional
        TDMS group or MDF channel group (name or number) when a file holds several.
    dataset : str, optional
        MATLAB variable or HDF5 dataset when a file holds several numeric ones.

    Returns
    -------
    Recording
        Audio samples in soundfile's normalised float scale (integer PCM
        divided by 2**(bits-1), 8-bit unsigned centred on 128), ``format`` and
        ``subtype`` as ``soundfile.info`` names them; channel names ``ch0``,
        ``ch1``... for audio, from the header for text. ``meta`` holds details
        (``file_channels``, ``filled_gaps``, ``truncated`` when the header
        promised more frames than the file holds, ``text`` for text tables).

    Raises
    ------
    ScalesieveError
        For every problem with the file or the options, with ``source`` the
        path as given (and ``line`` for text files).
    """
    dt = _check_dtype(dtype)
    given = os.fspath(path)
    try:
        fill_gaps = check_fill_method(fill_gaps)
    except ValueError as exc:
        raise ScalesieveError(str(exc), source=given) from None
    source, size = check_readable(path)
    kind = _kind(source)
    if kind in ("text", "xlsx"):
        from scalesieve.io import csv_reader
    if kind == "text":
        return csv_reader.read_text(source, rate=rate, channel=channel, fill_gaps=fill_gaps,
                                    dtype=dt)
    if kind == "xlsx":
        rec = csv_reader.read_text(source, rate=rate, channel=channel, fill_gaps=fill_gaps,
                                   dtype=dt, _text=measurement_readers.xlsx_as_text(source))
        rec.meta["measurement_format"] = "Excel"
        return rec
    if kind != "audio":
        return _read_measurement(source, kind, rate=rate, channel=channel,
                                 fill_gaps=fill_gaps, dtype=dt, group=group, dataset=dataset)
    return _read_audio(source, size, rate=rate, channel=channel, fill_gaps=fill_gaps, dtype=dt)


def probe(path: str | os.PathLike[str]) -> dict:
    """Cheap facts about a recording without reading its samples.

    Returns
    -------
    dict
        ``path``, ``kind`` (``"audio"``, ``"text"`` or ``"measurement"``), ``frames``,
        ``frames_exact`` (false when estimated from the file size, or when the
        header claimed more than the file holds), ``frames_at_most`` (audio: the
        most frames the file can hold; for a compressed file whose header
        claims more, less than ``frames``, the header's claim, which reading
        will not trust), ``rate`` (``None`` for text
        without a time column), ``channels``, ``channel_names``, ``format``,
        ``subtype`` (``None`` for text), ``duration_s`` (``None`` without a
        rate), ``file_bytes`` and ``estimated_bytes``: memory for all samples
        as float64 (halve it for float32).

    Raises
    ------
    ScalesieveError
        When the file cannot be opened or recognised.
    """
    source, size = check_readable(path)
    kind = _kind(source)
    if kind == "text":
        from scalesieve.io import csv_reader

        facts = csv_reader.probe_text(source)
    elif kind != "audio":
        found = measurement_readers.probe_facts(source, kind)
        facts = {"path": source, "kind": "measurement", "frames": found["frames"],
                 "frames_exact": kind != "xlsx", "rate": found["rate"],
                 "channels": found["channels"], "channel_names": found["channel_names"],
                 "format": found["format"], "subtype": None, "file_bytes": size,
                 "estimated_bytes": found["frames"] * max(found["channels"], 1) * 8}
    else:
        info = _audio_info(source, os.path.splitext(source)[1].lower())
        frames, trusted = _plausible_frames(info, size)
        most = frames
        if info.format in _COMPRESSED_FORMATS or info.subtype not in _FIXED_WIDTH:
            most = min(frames, _MOST_SAMPLES_PER_BYTE * size // max(info.channels, 1))
            trusted = trusted and most == frames
        facts = {
            "path": source,
            "kind": "audio",
            "frames": frames,
            "frames_exact": trusted,
            "frames_at_most": most,
            "rate": float(info.samplerate),
            "channels": int(info.channels),
            "channel_names": [f"ch{k}" for k in range(info.channels)],
            "format": info.format,
            "subtype": info.subtype,
            "file_bytes": size,
            "estimated_bytes": int(frames) * int(info.channels) * 8,
        }
    rate = facts.get("rate")
    facts["duration_s"] = (facts["frames"] / rate) if rate else None
    return facts
