"""Inputs for the fuzz tests: valid recordings and recipes, and ways to damage them.

Every maker takes a :class:`random.Random`, so one seed reproduces one case;
hypothesis supplies the generator in the bounded tests, ``fuzz_long.py`` a
seeded one.  The valid seeds are written by reference writers outside the
project: Python's ``wave`` module (WAV), soundfile/libsndfile (FLAC, AIFF and
other WAV subtypes) and Python's ``csv`` module (text tables).
"""

from __future__ import annotations

import copy
import csv
import io
import json
import random
import struct
import wave

import numpy as np
import soundfile as sf

# 32-bit values a damaged header field likes to hold: 0, 1, 2^31 frames (the
# brief's example), the top of the signed and unsigned ranges, and small odd ones.
INTERESTING_U32 = (0, 1, 2, 3, 7, 0x7F, 0x80, 0xFF, 0xFFFF, 0x10000, 0x7FFFFFFF, 0x80000000,
                   0xFFFFFFFE, 0xFFFFFFFF, 1 << 24, 44100, 48000)
INTERESTING_U16 = (0, 1, 2, 3, 8, 15, 16, 17, 24, 31, 32, 33, 64, 255, 256, 1024, 1025,
                   0x7FFF, 0x8000, 0xFFFF)

AUDIO_KINDS = ("wav16", "wav8", "wav24", "wavfloat", "wavdouble", "wavex", "flac", "aiff",
               "aifc", "au", "w64", "caf")
_SUFFIX = {"wav16": ".wav", "wav8": ".wav", "wav24": ".wav", "wavfloat": ".wav",
           "wavdouble": ".wav", "wavex": ".wav", "flac": ".flac", "aiff": ".aiff",
           "aifc": ".aifc", "au": ".au", "w64": ".w64", "caf": ".caf"}


def audio_suffix(kind: str) -> str:
    return _SUFFIX[kind]


def _signal(rng: random.Random, frames: int, channels: int) -> np.ndarray:
    t = np.arange(frames)[:, None]
    phase = np.array([rng.random() for _ in range(channels)])[None, :]
    x = 0.5 * np.sin(2 * np.pi * (t / 17.0 + phase))
    x[frames // 3::max(1, frames // 4)] = 0.9  # a few impacts
    return x


def valid_audio(rng: random.Random, kind: str | None = None) -> tuple[bytes, str]:
    """A small valid audio file's bytes and its suffix."""
    kind = kind or rng.choice(AUDIO_KINDS)
    frames = rng.choice([1, 2, 3, 16, 64, 200, 1000])
    channels = rng.choice([1, 1, 2, 3, 8])
    rate = rng.choice([1, 8000, 22050, 48000, 96000])
    x = _signal(rng, frames, channels)
    buf = io.BytesIO()
    if kind in ("wav16", "wav8"):
        # The standard library's writer: an independent reference for plain WAV.
        width = 2 if kind == "wav16" else 1
        if width == 2:
            data = (x * 32767).astype("<i2").tobytes()
        else:
            data = (x * 127 + 128).astype(np.uint8).tobytes()
        with wave.open(buf, "wb") as w:
            w.setnchannels(channels)
            w.setsampwidth(width)
            w.setframerate(rate)
            w.writeframes(data)
        return buf.getvalue(), ".wav"
    fmt, sub = {"wav24": ("WAV", "PCM_24"), "wavfloat": ("WAV", "FLOAT"),
                "wavdouble": ("WAV", "DOUBLE"), "wavex": ("WAVEX", "PCM_16"),
                "flac": ("FLAC", "PCM_16"), "aiff": ("AIFF", "PCM_16"),
                "aifc": ("AIFF", "FLOAT"), "au": ("AU", "PCM_16"), "w64": ("W64", "PCM_16"),
                "caf": ("CAF", "PCM_16")}[kind]
    sf.write(buf, x, rate, format=fmt, subtype=sub)
    return buf.getvalue(), _SUFFIX[kind]


# ----------------------------------------------------------------- header fields

def _header_fields(raw: bytes) -> list[tuple[int, int, str]]:
    """``(offset, size, endianness)`` of the numeric header fields of a known container.

    WAV/RIFF: fmt and data chunk fields (Microsoft RIFF/WAVE layout); AIFF:
    the COMM chunk (channels, frames, bits, 80-bit rate; Apple AIFF 1.3);
    FLAC: the STREAMINFO block (FLAC format specification).  Offsets from
    memory; a wrong one only makes a damage less targeted, never a false pass.
    """
    fields: list[tuple[int, int, str]] = []
    if raw[:4] in (b"RIFF", b"RF64"):
        fields.append((4, 4, "<"))
        i = raw.find(b"fmt ")
        if i >= 0:
            fields += [(i + 4, 4, "<"), (i + 8, 2, "<"), (i + 10, 2, "<"), (i + 12, 4, "<"),
                       (i + 16, 4, "<"), (i + 20, 2, "<"), (i + 22, 2, "<")]
        i = raw.find(b"data")
        if i >= 0:
            fields.append((i + 4, 4, "<"))
    elif raw[:4] == b"FORM":
        fields.append((4, 4, ">"))
        i = raw.find(b"COMM")
        if i >= 0:
            fields += [(i + 4, 4, ">"), (i + 8, 2, ">"), (i + 10, 4, ">"), (i + 14, 2, ">"),
                       (i + 16, 2, ">"), (i + 18, 4, ">")]
        i = raw.find(b"SSND")
        if i >= 0:
            fields += [(i + 4, 4, ">"), (i + 8, 4, ">")]
    elif raw[:4] == b"fLaC":
        # STREAMINFO body starts at byte 8: block sizes, frame sizes, then the
        # packed rate/channels/bits/total-samples word.
        fields += [(8, 2, ">"), (10, 2, ">"), (12, 2, ">"), (14, 4, ">"), (18, 4, ">"),
                   (22, 4, ">"), (5, 2, ">")]
    return [f for f in fields if f[0] + f[1] <= len(raw)]


def _set_field(raw: bytearray, at: int, size: int, endian: str, value: int) -> None:
    code = {2: "H", 4: "I"}[size]
    raw[at:at + size] = struct.pack(endian + code, value & ((1 << (8 * size)) - 1))


def damage_bytes(rng: random.Random, raw: bytes, header: int = 128) -> bytes:
    """One to four random damages, mostly in the first ``header`` bytes."""
    out = bytearray(raw)
    fields = _header_fields(raw)
    for _ in range(rng.randint(1, 4)):
        if not out:
            out += bytes([rng.randrange(256)])
            continue
        how = rng.randrange(8)
        span = max(1, min(len(out), header) if rng.random() < 0.85 else len(out))
        if how == 0:                                   # truncate
            del out[rng.randrange(len(out) + 1):]
        elif how == 1:                                 # flip one bit
            at = rng.randrange(span)
            out[at] ^= 1 << rng.randrange(8)
        elif how == 2:                                 # set a byte
            out[rng.randrange(span)] = rng.choice([0, 1, 0x7F, 0x80, 0xFE, 0xFF,
                                                   rng.randrange(256)])
        elif how == 3 and fields:                      # a header field to a telling value
            at, size, endian = rng.choice(fields)
            pool = INTERESTING_U32 if size == 4 else INTERESTING_U16
            value = rng.choice(pool) if rng.random() < 0.8 else rng.getrandbits(8 * size)
            _set_field(out, at, size, endian, value)
        elif how == 4:                                 # any 4 bytes to a telling value
            if len(out) >= 4:
                at = rng.randrange(min(span, len(out) - 3))
                _set_field(out, at, 4, rng.choice("<>"), rng.choice(INTERESTING_U32))
        elif how == 5:                                 # insert bytes
            at = rng.randrange(span + 1)
            out[at:at] = bytes(rng.randrange(256) for _ in range(rng.randint(1, 8)))
        elif how == 6:                                 # delete bytes
            at = rng.randrange(span)
            del out[at:at + rng.randint(1, 8)]
        else:                                          # repeat a slice (a doubled chunk)
            a = rng.randrange(len(out))
            b = min(len(out), a + rng.randint(1, 64))
            out[b:b] = out[a:b]
    return bytes(out)


def damaged_audio(rng: random.Random, kind: str | None = None) -> tuple[bytes, str]:
    raw, suffix = valid_audio(rng, kind)
    if rng.random() < 0.1:
        suffix = rng.choice([".wav", ".flac", ".aiff", ".bin", ".csv", ""])
    return damage_bytes(rng, raw), suffix


def random_bytes(rng: random.Random) -> tuple[bytes, str]:
    """Pure noise, sometimes behind a real container's magic bytes."""
    n = rng.choice([1, 2, 4, 11, 12, 44, 64, 300, 4096])
    data = bytes(rng.getrandbits(8) for _ in range(n))
    if rng.random() < 0.5:
        data = rng.choice([b"RIFF", b"RIFX", b"RF64", b"FORM", b"fLaC", b"OggS", b".snd",
                           b"caff", b"\xff\xfb", b"\xef\xbb\xbf", b"\xff\xfe"]) + data
    return data, rng.choice([".wav", ".flac", ".aiff", ".csv", ".txt", ".dat", ".bin", ""])


# --------------------------------------------------------------------- text tables

DELIMITERS = (",", ";", "\t", " ", "  ", "|")
TIME_HEADERS = ("time", "t", "Time [s]", "time (ms)", "t_ms", "time_us", "[s]", "t / ms",
                "seconds", "Zeit [s]", "time [h]", "time [kg]")
CHANNEL_HEADERS = ("strain_1", "strain 2", "accel", "p[bar]", "ch", "ch", "µm/m", "x",
                   "Kanal 3", "\"quoted, name\"", "")


def _number(rng: random.Random, value: float, decimal: str) -> str:
    text = rng.choice(["%.6g", "%.17g", "%r", "%.3f", "%e"])
    s = repr(value) if text == "%r" else text % value
    return s.replace(".", ",") if decimal == "," else s


def _odd_cell(rng: random.Random) -> str:
    return rng.choice(["", "nan", "NaN", "inf", "-inf", "Infinity", "1e999", "-1e400",
                       "1e308", "x", "--", "1,2,3", "1.2.3", "0x10", "1_000", "null", "#",
                       "\"", "\"\"", "'", "١٢", "½", "1e-400", "+", ".", "e5", "nan(ind)"])


def csv_table(rng: random.Random, clean: bool = False) -> tuple[bytes, str, dict]:
    """A text table in a random dialect, written with Python's csv module.

    Returns the bytes, a suffix, and what was written: ``cells`` as written,
    and ``clean``, true when every cell is a valid number, there is a header
    naming a time column and the time axis is uniform, so a reader must load
    exactly these values at rate ``1 / step_s``.  With ``clean=True`` every
    table is such a one (still in a random dialect, encoding and line ending).
    """
    delim = rng.choice(DELIMITERS)
    decimal = "," if delim != "," and rng.random() < 0.4 else "."
    rows = rng.choice([2, 3, 5, 17, 64, 300] if clean else [0, 1, 2, 3, 5, 17, 64, 300])
    chans = rng.choice([1, 1, 2, 3, 6, 32])
    has_time = clean or rng.random() < 0.6
    header = clean or rng.random() < 0.7
    time_header = rng.choice(TIME_HEADERS[:9]) if clean or rng.random() < 0.85 else \
        rng.choice(TIME_HEADERS)
    step = rng.choice([1.0, 0.001, 0.5, 1e-6, 2.5e-5])
    ms = header and ("ms" in time_header)
    us = header and ("us" in time_header)
    scale = 1e3 if ms else (1e6 if us else 1.0)
    values = [[round(rng.uniform(-5.0, 5.0), 6) for _ in range(chans)] for _ in range(rows)]
    clean = True
    body: list[list[str]] = []
    for r in range(rows):
        cells = []
        if has_time:
            # Shortest exact text: a rounded time axis would not be uniform.
            t = repr(round(r * step * scale, 9))
            cells.append(t.replace(".", ",") if decimal == "," else t)
        cells += [_number(rng, float(v), decimal) for v in values[r]]
        if not clean and rng.random() < 0.03:
            cells[rng.randrange(len(cells))] = _odd_cell(rng)
            clean = False
        body.append(cells)
    names = []
    if header:
        names = ([time_header] if has_time else []) + \
            [rng.choice(CHANNEL_HEADERS) for _ in range(chans)]
        if delim in (" ", "  ") and (clean or rng.random() < 0.9):
            # Mostly names a whitespace table can hold (no spaces, none empty).
            names = [n.replace(" / ", "/").replace(" ", "_").replace('"', "") or "x"
                     for n in names]
    buf = io.StringIO()
    quoting = rng.choice([csv.QUOTE_MINIMAL, csv.QUOTE_MINIMAL, csv.QUOTE_ALL,
                          csv.QUOTE_NONNUMERIC])
    if delim in (" ", "  "):
        # csv writes one delimiter character; runs of spaces are joined by hand.
        lines = [delim.join(r) for r in ([names] if names else []) + body]
        text = "\n".join(lines) + ("\n" if lines else "")
    else:
        w = csv.writer(buf, delimiter=delim, quoting=quoting if quoting != csv.QUOTE_NONNUMERIC
                       else csv.QUOTE_MINIMAL, lineterminator="\n")
        if names:
            w.writerow(names)
        for r in body:
            w.writerow(r)
        text = buf.getvalue()
    if rng.random() < 0.2:
        text = "# logger export, invented test rig\n# units: ms\n" + text
    if rng.random() < 0.1:
        text = text.replace("\n", delim + "\n") if delim.strip() else text
    if not clean and rng.random() < 0.3:
        text = damage_text(rng, text)
        clean = False
    ending = rng.choice(["\n", "\n", "\r\n", "\r"])
    if ending != "\n":
        text = text.replace("\n", ending)
    encoding = rng.choice(["utf-8", "utf-8", "utf-8-sig", "utf-16", "latin-1"])
    try:
        raw = text.encode(encoding)
    except UnicodeEncodeError:
        raw = text.encode("utf-8")
    if not clean and rng.random() < 0.05:
        raw = damage_bytes(rng, raw, header=len(raw))
        clean = False
    suffix = rng.choice([".csv", ".csv", ".txt", ".tsv", ".dat", ""])
    spaced = delim in (" ", "  ") and any(not n or " " in n or '"' in n for n in names)
    facts = {"clean": clean and rows >= 2 and header and has_time and not spaced
             and "[h]" not in time_header and "kg" not in time_header,
             "cells": body, "step_s": step, "channels": chans, "rows": rows,
             "decimal": decimal, "delimiter": delim}
    return raw, suffix, facts


def damage_text(rng: random.Random, text: str) -> str:
    """Damages a text table meets: cut lines, stray characters, doubled or swapped rows."""
    lines = text.split("\n")
    for _ in range(rng.randint(1, 3)):
        how = rng.randrange(6)
        if not lines:
            break
        i = rng.randrange(len(lines))
        if how == 0:
            lines[i] = lines[i][:rng.randrange(len(lines[i]) + 1)]
        elif how == 1:
            at = rng.randrange(len(lines[i]) + 1)
            lines[i] = lines[i][:at] + rng.choice(list(",;\t |#\"'x.-e\x00\x1a\u00a0")) + lines[i][at:]
        elif how == 2:
            lines.insert(i, lines[i])
        elif how == 3 and len(lines) > 1:
            j = rng.randrange(len(lines))
            lines[i], lines[j] = lines[j], lines[i]
        elif how == 4:
            del lines[i]
        else:
            lines.insert(i, rng.choice(["", "#", "end of data", ";;;", "1;2;3;4;5;6;7"]))
    return "\n".join(lines)


def random_text(rng: random.Random) -> tuple[bytes, str]:
    """Text from an alphabet of digits, signs, delimiters, quotes and line ends."""
    alphabet = "0123456789.,;\t |-+eE#\"'\n\r nNaAiIfFtTsm[]()_µ"
    n = rng.choice([1, 2, 5, 20, 100, 1000])
    text = "".join(rng.choice(alphabet) for _ in range(n))
    return text.encode(rng.choice(["utf-8", "utf-16", "latin-1"]), "replace"), \
        rng.choice([".csv", ".txt", ".tsv", ".dat", ""])


# ------------------------------------------------------------------------- recipes

def valid_recipe(rng: random.Random) -> dict:
    """A recipe of the CONTRACT's version-1 form with a few edits."""
    edits = []
    for _ in range(rng.randint(0, 4)):
        op = rng.choice(["gain", "threshold", "region"])
        levels = rng.choice([[1], [1, 2], [2, 3], ["a"], "details", "all", [4]])
        e: dict = {"op": op, "levels": levels}
        if op == "gain":
            e["gain"] = rng.choice([0.0, 0.5, 1, 2.0])
        elif op == "threshold":
            e["rule"] = rng.choice(["universal", "sure", "bayes", "minimax", "manual"])
            if e["rule"] == "manual":
                e["value"] = rng.choice([0.0, 0.01, 0.1])
            e["shape"] = rng.choice(["hard", "soft", "garrote"])
            e["noise"] = rng.choice(["finest", "level"])
        else:
            t0 = rng.choice([0.0, 0.01, 0.05, 0.1])
            e["start_s"], e["stop_s"] = t0, t0 + rng.choice([0.001, 0.01, 0.05])
            e["gain"] = 0.0
        if rng.random() < 0.2:
            e["channels"] = [0]
        if rng.random() < 0.1:
            e["enabled"] = False
        edits.append(e)
    r: dict = {"scalesieve_recipe": 1, "edits": edits}
    if rng.random() < 0.7:
        r["transform"] = {"kind": rng.choice(["dwt", "swt"]),
                          "wavelet": rng.choice(["db4", "haar", "sym8", "coif3", "bior3.5"]),
                          "level": rng.choice([1, 2, 3, 4, None]),
                          "mode": rng.choice(["symmetric", "periodization", "zero"])}
    return r


_WEIRD_VALUES = (None, True, False, 0, -1, 1, 2, 99, 2 ** 31, 2 ** 63, -2 ** 63, 10 ** 30,
                 1e308, -0.0, 0.5, "", "a", "1", "details", "all", "NaN", [], {}, [1, "a"],
                 ["a", "a"], [0], [-1], [1.5], [[1]], {"op": "gain"}, "\u0000", "é" * 3)
_WEIRD_KEYS = ("op", "levels", "gain", "rule", "shape", "noise", "value", "scale",
               "start_s", "stop_s", "channels", "enabled", "level", "kind", "wavelet", "mode",
               "transform", "edits", "scalesieve_recipe", "zero", "Gain", "", "op ")


def _weird(rng: random.Random):
    # A copy: the same list inserted twice could end up inside itself.
    return copy.deepcopy(rng.choice(_WEIRD_VALUES))


def _mutate_json(rng: random.Random, obj):
    if isinstance(obj, dict) and obj and rng.random() < 0.7:
        key = rng.choice(list(obj))
        how = rng.randrange(4)
        if how == 0:
            obj[key] = _weird(rng)
        elif how == 1:
            del obj[key]
        elif how == 2:
            obj[rng.choice(_WEIRD_KEYS)] = _weird(rng)
        else:
            obj[key] = _mutate_json(rng, obj[key])
        return obj
    if isinstance(obj, list) and obj and rng.random() < 0.7:
        i = rng.randrange(len(obj))
        how = rng.randrange(3)
        if how == 0:
            obj[i] = _weird(rng)
        elif how == 1:
            obj.insert(i, _weird(rng))
        else:
            obj[i] = _mutate_json(rng, obj[i])
        return obj
    return _weird(rng)


def recipe_bytes(rng: random.Random) -> tuple[bytes, str]:
    """A recipe file: valid, structurally mutated, textually damaged, or not JSON at all."""
    doc = valid_recipe(rng)
    how = rng.randrange(10)
    if how <= 4:
        for _ in range(rng.randint(1, 3)):
            doc = _mutate_json(rng, doc)
    text = json.dumps(doc)
    if how == 5:
        # Non-standard numbers Python's json module writes but JSON forbids.
        text = text.replace(rng.choice(["0.0", "0.5", "1", "2"]),
                            rng.choice(["NaN", "Infinity", "-Infinity", "1e400", "-1e999",
                                        "1" + "0" * 5000]), 1)
    elif how == 6:
        text = damage_text(rng, text.replace(",", ",\n"))
    elif how == 7:
        depth = rng.choice([10, 1000, 100000])
        text = text[:-1] + ', "edits": ' + "[" * depth + "]" * depth + "}"
    elif how == 8:
        data, _ = random_bytes(rng)
        return data, ".json"
    raw = text.encode(rng.choice(["utf-8", "utf-8", "utf-8-sig", "utf-16", "latin-1"]),
                      "replace")
    return raw, ".json"


# ------------------------------------------------------------ measurement formats
# Each valid seed is written by the format's own library (npTDMS, edfio, h5py,
# scipy.io.savemat, asammdf, openpyxl); the unusual ones are the cases a reader
# must refuse plainly (3-D or text datasets, empty groups, annotations only,
# NaN runs, channels at different rates).

MEASUREMENT_KINDS = ("tdms", "edf", "bdf", "mat5", "mat5_nan", "h5", "h5_3d", "h5_text",
                     "h5_empty", "mf4", "mf4_two_rates", "xlsx", "edf_annotations",
                     "edf_two_rates")


def _via_file(suffix: str, write) -> bytes:
    import os
    import tempfile

    fd, path = tempfile.mkstemp(suffix=suffix)
    os.close(fd)
    try:
        write(path)
        with open(path, "rb") as fh:
            return fh.read()
    finally:
        os.unlink(path)


def valid_measurement(rng: random.Random, kind: str | None = None) -> tuple[bytes, str]:
    """A small measurement file's bytes and suffix, written by the format's library."""
    import datetime
    import warnings

    kind = kind or rng.choice(MEASUREMENT_KINDS)
    frames = rng.choice([16, 64, 200])
    channels = rng.choice([1, 2, 3])
    x = _signal(rng, frames, channels)
    rate = float(rng.choice([100, 1000, 2000]))
    if kind == "tdms":
        from nptdms import ChannelObject, TdmsWriter

        def write(p):
            with TdmsWriter(p) as w:
                w.write_segment([ChannelObject("rig", f"s{k}", x[:, k],
                                               properties={"wf_increment": 1 / rate})
                                 for k in range(channels)])
        return _via_file(".tdms", write), ".tdms"
    if kind in ("edf", "bdf", "edf_annotations", "edf_two_rates"):
        import edfio

        cls = edfio.Bdf if kind == "bdf" else edfio.Edf
        sig = edfio.BdfSignal if kind == "bdf" else edfio.EdfSignal
        secs = 2
        sigs = [sig(np.resize(x[:, 0], secs * 100), 100, label="a")]
        if kind == "edf_two_rates":
            sigs.append(sig(np.resize(x[:, 0], secs * 250), 250, label="b"))
        if kind == "edf_annotations":
            sigs = []
        notes = [edfio.EdfAnnotation(0.5, None, "marker")]
        rec = cls(sigs, annotations=notes)
        suffix = ".bdf" if kind == "bdf" else ".edf"
        return _via_file(suffix, rec.write), suffix
    if kind in ("mat5", "mat5_nan"):
        import scipy.io

        data = x.copy()
        if kind == "mat5_nan":
            data[frames // 4: frames // 4 + 3, 0] = np.nan
        return _via_file(".mat", lambda p: scipy.io.savemat(p, {"fs": rate, "x": data})), ".mat"
    if kind.startswith("h5"):
        import h5py

        def write(p):
            with h5py.File(p, "w") as f:
                if kind == "h5":
                    d = f.create_dataset("run/x", data=x)
                    d.attrs["fs"] = rate
                elif kind == "h5_3d":
                    f.create_dataset("cube", data=np.zeros((4, 3, 2)))
                elif kind == "h5_text":
                    f.create_dataset("labels", data=np.array([b"a", b"b", b"c"]))
                else:
                    f.create_group("nothing")
        return _via_file(".h5", write), ".h5"
    if kind in ("mf4", "mf4_two_rates"):
        from asammdf import MDF, Signal

        def write(p):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                m = MDF(version="4.10")
                t = np.arange(frames) / rate
                m.append([Signal(x[:, k], t, name=f"s{k}", unit="g") for k in range(channels)])
                if kind == "mf4_two_rates":
                    t2 = np.arange(8) / 2.0
                    m.append([Signal(np.ones(8), t2, name="slow")])
                m.save(p, overwrite=True)
                m.close()
        return _via_file(".mf4", write), ".mf4"
    import openpyxl

    def write(p):
        wb = openpyxl.Workbook()
        ws = wb.active
        ws.append(["timestamp"] + [f"s{k}" for k in range(channels)])
        t0 = datetime.datetime(2026, 5, 4, 9, 30)
        for i in range(frames):
            ws.append([t0 + datetime.timedelta(milliseconds=10 * i)] + x[i].tolist())
        wb.save(p)
    return _via_file(".xlsx", write), ".xlsx"


def damaged_measurement(rng: random.Random, kind: str | None = None) -> tuple[bytes, str]:
    """A measurement file, unusual by construction or damaged in its bytes."""
    raw, suffix = valid_measurement(rng, kind)
    if rng.random() < 0.35:
        return raw, suffix
    return damage_bytes(rng, raw, header=512), suffix


def numpy_file(rng: random.Random) -> tuple[bytes, str]:
    """A ``.npy`` or ``.npz`` file written by NumPy (1-D or 2-D, C or Fortran order, several
    types, an archive stored or compressed, with a rate or not), then often damaged or cut."""
    frames = rng.choice([3, 64, 200])
    x = _signal(rng, frames, rng.choice([1, 2, 3]))
    x = x.astype(rng.choice(["<f8", ">f8", "<f4", "<i2", ">i4", "u1", "?"]))
    if rng.random() < 0.3:
        x = np.asfortranarray(x)
    if rng.random() < 0.2:
        x = x.T.copy() if rng.random() < 0.5 else x[:, 0].copy()
    buf = io.BytesIO()
    if rng.random() < 0.4:
        np.save(buf, x)
        suffix = ".npy"
    else:
        arrays = {"x": x}
        if rng.random() < 0.6:
            arrays["fs"] = np.float64(rng.choice([100.0, 1000.0, -1.0, float("nan")]))
        if rng.random() < 0.2:
            arrays["channel_names"] = np.array([f"c{k}" for k in range(x.shape[-1])])
        (np.savez_compressed if rng.random() < 0.4 else np.savez)(buf, **arrays)
        suffix = ".npz"
    raw = buf.getvalue()
    how = rng.random()
    if how < 0.3:
        return raw, suffix
    if how < 0.55:                      # cut short anywhere: a header that declares more
        return raw[:rng.randrange(len(raw) + 1)], suffix
    return damage_bytes(rng, raw, header=256), suffix
