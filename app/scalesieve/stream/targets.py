"""Outputs written block by block (audio or CSV), and the join of every channel's blocks."""

from __future__ import annotations

import contextlib
import os
from typing import Sequence

import numpy as np
import soundfile as sf

from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.stream.sources import _Source

class _AudioTarget:
    """One audio output written block by block into a temporary file, published at the end.

    Format and subtype are chosen as ``io.writers.write_signal`` chooses them.
    """

    def __init__(self, stack: contextlib.ExitStack, target: str, src: _Source, n: int,
                 subtype: str | None, force: bool, protect: Sequence[str]):
        from scalesieve.io import writers as W
        from scalesieve.io.atomic import atomic_target

        ext = os.path.splitext(target)[1].lower()
        fmt = W.AUDIO_FORMAT_BY_EXTENSION[ext]
        if src.format in W._FAMILY.get(fmt, ()):
            fmt = src.format
        sub = subtype or W._choose_subtype(fmt, src.subtype)
        sub = W._check_subtype(fmt, sub or W._DEFAULT_SUBTYPE.get(fmt) or sf.default_subtype(fmt),
                               target)
        sr = W._whole_rate(src.rate, target)
        most = W._MAX_CHANNELS.get(fmt)
        if most is not None and src.channels > most:
            raise ScalesieveError(f"{fmt} holds at most {most} channels and this signal has "
                                  f"{src.channels}; write .wav instead", source=target)
        if fmt == "WAV" and n * src.channels * W._BYTES_PER_SAMPLE.get(sub, 8) > W._WAV_DATA_LIMIT:
            fmt = "RF64"
        self.clips = sub not in W._FLOAT_SUBTYPES
        self.clipped = 0
        self.report = {"path": target, "kind": "audio", "format": fmt, "subtype": sub,
                       "rate": float(sr), "channels": int(src.channels), "frames": int(n)}
        if subtype is None and src.subtype and sub != src.subtype:
            self.report["subtype_from"] = src.subtype   # as io.writers.write_signal says it
        tmp = stack.enter_context(atomic_target(target, force=force, protect=protect))
        try:
            self.file = stack.enter_context(sf.SoundFile(tmp, "w", samplerate=sr,
                                                         channels=src.channels, format=fmt,
                                                         subtype=sub))
        except W._SF_ERRORS as exc:
            raise ScalesieveError(f"could not write {fmt} {sub}: {exc}", source=target) from None
        self.target = target

    def write(self, block: np.ndarray) -> None:
        if not np.isfinite(block).all():
            raise ScalesieveError("the cleaned signal holds NaN or infinite values",
                                  source=self.target)
        if self.clips:
            out = (block < -1.0) | (block >= 1.0)
            count = int(np.count_nonzero(out))
            if count:
                self.clipped += count
                block = np.clip(block, -1.0, 1.0)
        self.file.write(block)

    def finished(self) -> dict:
        return dict(self.report, clipped=int(self.clipped))


class _CsvTarget:
    """One CSV output written block by block as ``io.writers.write_csv`` writes it whole:
    a ``time_s`` column from 0 in steps of 1/rate (or ``timestamp`` continuing the input's
    clock), then one column per channel named as in the input, ``%.17g``."""

    def __init__(self, stack: contextlib.ExitStack, target: str, src: _Source, n: int,
                 force: bool, protect: Sequence[str]):
        from scalesieve.io import writers as W
        from scalesieve.io.atomic import atomic_target
        from scalesieve.io.time_column import ClockForm

        self.rate = float(src.rate)
        self.row = ",".join(["%.17g"] * (src.channels + 1)) + "\n"
        self.values_row = ",".join(["%.17g"] * src.channels) + "\n"
        self.start_time = src.start_time
        self.form = ClockForm(**src.clock) if src.clock else None
        self.report = {"path": target, "kind": "csv", "format": None, "subtype": None,
                       "rate": self.rate, "channels": int(src.channels), "frames": int(n)}
        tmp = stack.enter_context(atomic_target(target, force=force, protect=protect))
        self.file = stack.enter_context(open(tmp, "w", encoding="utf-8", newline=""))
        first = "time_s" if self.start_time is None else "timestamp"
        self.file.write(W._header_line([first] + [str(c) for c in src.names]))
        self.target, self.done = target, 0

    def write(self, block: np.ndarray) -> None:
        from scalesieve.io.time_column import format_timestamps
        from scalesieve.io.writers import _CSV_CHUNK_ROWS

        if not np.isfinite(block).all():
            raise ScalesieveError("the cleaned signal holds NaN or infinite values",
                                  source=self.target)
        for a in range(0, block.shape[0], _CSV_CHUNK_ROWS):
            part = block[a:a + _CSV_CHUNK_ROWS]
            start = self.done
            if self.start_time is not None:
                stamps = format_timestamps(self.start_time, self.rate, start, part.shape[0],
                                           self.form)
                self.file.write("".join(s + "," + self.values_row % tuple(row)
                                        for s, row in zip(stamps, part.tolist())))
            else:
                chunk = np.empty((part.shape[0], part.shape[1] + 1), dtype=np.float64)
                chunk[:, 0] = np.arange(start, start + part.shape[0], dtype=np.float64) / self.rate
                chunk[:, 1:] = part
                self.file.write((self.row * part.shape[0]) % tuple(chunk.ravel().tolist()))
            self.done += part.shape[0]

    def finished(self) -> dict:
        return dict(self.report, clipped=0)


def _target(stack, out: str, src: _Source, n: int, subtype, force: bool, protect):
    """The writer of one output in blocks: CSV for .csv/.txt, else audio."""
    from scalesieve.io.writers import CSV_EXTENSIONS

    if os.path.splitext(out)[1].lower() in CSV_EXTENSIONS:
        return _CsvTarget(stack, out, src, n, force, protect)
    return _AudioTarget(stack, out, src, n, subtype, force, protect)


class _Join:
    """Cleaned blocks of every channel put side by side, with the input they came from."""

    def __init__(self, channels: int, targets: list[_AudioTarget], removed: bool):
        self.orig = [tf._Carry(0, np.float64) for _ in range(channels)]
        self.clean = [tf._Carry(0, np.float64) for _ in range(channels)]
        self.targets, self.removed = targets, removed
        self.written = 0
        self.energy = 0.0
        self.removed_energy = 0.0

    def add_input(self, block: np.ndarray) -> None:
        for k, c in enumerate(self.orig):
            c.append(block[:, k])

    def put(self, k: int, s0: int, seg: np.ndarray) -> None:
        self.clean[k].append(seg)

    def flush(self) -> None:
        r = min(min(c.hi for c in self.clean), min(c.hi for c in self.orig))
        w = self.written
        if r <= w:
            return
        cleaned = np.stack([c.view(w, r) for c in self.clean], axis=1)
        x = np.stack([c.view(w, r) for c in self.orig], axis=1)
        gone = x - cleaned
        self.energy += float(np.sum(x * x))
        self.removed_energy += float(np.sum(gone * gone))
        self.targets[0].write(cleaned)
        if self.removed:
            self.targets[1].write(gone)
        for c in self.orig + self.clean:
            c.drop_below(r)
        self.written = r
