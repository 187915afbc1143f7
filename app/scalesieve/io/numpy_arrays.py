"""NumPy files as a measurement ``Source``: a ``.npy`` array, or one array of a ``.npz``.

Part of the measurement readers (``scalesieve.io.measurement_readers``).  Only the
``.npy`` header is read to know an array's shape and type; its samples are read
by range: a ``.npy`` file, and a ``.npz`` member stored uncompressed, by plain
file reads at the array's offset (no memory map: each read checks the file's
size first, so a file shortened meanwhile is a message, never a bus error); a
compressed member by inflating it as a stream (a range before the stream's
position starts it again).  A stored member's CRC-32 (the zip entry's own
checksum, which range reads never reach) is checked once when the archive
is opened, up to ``CRC_CHECK_BYTES``: a mismatch is a warning that some
samples are damaged (a compressed member's is checked by ``zipfile`` as it
is inflated to its end).  A file shorter than its header declares is read up
to the whole frames it holds, with a warning, as a shortened WAV is.  A 2-D array's
longer axis is time, as for HDF5; ``--dataset`` picks the member of a ``.npz``
when it holds several numeric arrays, a scalar member named ``fs``, ``rate`` or
``sample_rate`` gives the rate, and a text member ``channel_names`` the names.
Nothing is unpickled.
"""

from __future__ import annotations

import os
import struct
import zipfile
import zlib

import numpy as np

from scalesieve.errors import ScalesieveError
from scalesieve.io.measurement_readers import RATE_NAMES, Source, _choose, _reason

#: bytes inflated at a time while a compressed member is skipped forward
_SKIP_BYTES = 1 << 22
#: a stored member up to this size has its CRC-32 checked at open (about 1 s of reading
#: here; a larger one is read by range unchecked, its ``detail["crc_checked"]`` False)
CRC_CHECK_BYTES = 2 << 30


class _Layout:
    """Where an array's samples lie: shape, dtype, which axis is time, and the byte order."""

    def __init__(self, shape: tuple, dtype: np.dtype, fortran: bool, what: str, source: str):
        if dtype.hasobject or dtype.kind not in "iufb" or dtype.fields is not None:
            raise ScalesieveError(f"{what} holds {dtype} values, not numbers", source=source)
        if len(shape) not in (1, 2):
            raise ScalesieveError(f"{what} is {len(shape)}-D (shape "
                                  f"{'x'.join(map(str, shape))}), not 1-D or 2-D",
                                  source=source)
        self.shape, self.dtype, self.fortran = tuple(int(s) for s in shape), dtype, fortran
        if len(shape) == 1:
            self.frames, self.width, self.time_axis = self.shape[0], 1, 0
        else:
            self.time_axis = 0 if shape[0] >= shape[1] else 1
            self.frames, self.width = self.shape[self.time_axis], self.shape[1 - self.time_axis]
        # a frame's samples lie side by side (C order with time first, or F with time last)
        self.frame_major = len(shape) == 1 or (self.time_axis == 0) != fortran
        self.nbytes = int(np.prod(self.shape)) * dtype.itemsize


def _header(fh, what: str, source: str) -> _Layout:
    shape, fortran, dtype = _raw_header(fh, what, source)
    return _Layout(shape, dtype, fortran, what, source)


def _raw_header(fh, what: str, source: str) -> tuple[tuple, bool, np.dtype]:
    fmt = np.lib.format
    try:
        version = fmt.read_magic(fh)
        if version == (1, 0):
            shape, fortran, dtype = fmt.read_array_header_1_0(fh)
        elif version == (2, 0):
            shape, fortran, dtype = fmt.read_array_header_2_0(fh)
        else:
            raise ValueError(f"NumPy format version {version[0]}.{version[1]} is not read")
    except (ValueError, OSError, EOFError, SyntaxError, struct.error) as exc:
        raise ScalesieveError(f"{what} is not a readable NumPy array ({_reason(exc)})",
                              source=source) from None
    return tuple(shape), bool(fortran), np.dtype(dtype)


class _FileReads:
    """Samples read with ordinary file reads at ``offset`` (a file or a stored member).

    No memory map: a map of a file that another program shortens afterwards kills
    the process with a bus error when a page past the new end is touched, and a
    map buys nothing here (every range is one contiguous read per lane).  Each read
    checks the file's size first, and a short read is one clear message too.
    """

    def __init__(self, path: str, offset: int, lay: _Layout):
        self.path, self.offset, self.lay = path, offset, lay
        self.fh = open(path, "rb", buffering=0)

    def _bytes(self, start: int, into: np.ndarray, frames: tuple) -> None:
        from scalesieve.io.exact_reads import read_range

        read_range(self.fh, self.offset + start, into, frames, self.path)

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        lay = self.lay
        out = np.empty((max(0, b - a), len(cols)), dtype=np.float64)
        if b <= a:
            return out
        size = lay.dtype.itemsize
        if lay.frame_major:
            rows = np.empty((b - a, lay.width), dtype=lay.dtype)
            self._bytes(a * lay.width * size, rows, (a, b))
            out[:] = rows[:, cols]
        else:
            lane = np.empty(b - a, dtype=lay.dtype)
            for j, k in enumerate(cols):
                self._bytes((k * lay.frames + a) * size, lane, (a, b))
                out[:, j] = lane
        return out

    def close(self) -> None:
        self.fh.close()


class _Inflating:
    """Samples of a compressed ``.npz`` member, inflated as a stream: one stream for an
    array whose frames lie side by side, else one per channel (each its own stretch)."""

    def __init__(self, path: str, member: str, lay: _Layout, what: str):
        self.path, self.member, self.lay, self.what = path, member, lay, what
        self.zf = zipfile.ZipFile(path)
        self.streams: dict[int, list] = {}          # lane -> [file, frame position]

    def _open(self, lane: int):
        old = self.streams.pop(lane, None)
        if old is not None:
            old[0].close()
        fh = self.zf.open(self.member)
        _header(fh, self.what, self.path)
        lay = self.lay
        skip = 0 if lay.frame_major else lane * lay.frames * lay.dtype.itemsize
        self._skip(fh, skip)
        self.streams[lane] = [fh, 0]
        return self.streams[lane]

    def _skip(self, fh, count: int) -> None:
        while count > 0:
            got = fh.read(min(count, _SKIP_BYTES))
            if not got:
                raise ScalesieveError(f"{self.what} ends before its samples do",
                                      source=self.path)
            count -= len(got)

    def _lane(self, lane: int, a: int, b: int, per_frame: int) -> np.ndarray:
        s = self.streams.get(lane)
        if s is None or s[1] > a:
            s = self._open(lane)
        self._skip(s[0], (a - s[1]) * per_frame)
        want = (b - a) * per_frame
        raw = s[0].read(want)
        if len(raw) != want:
            raise ScalesieveError(f"{self.what} ends before its samples do", source=self.path)
        s[1] = b
        return np.frombuffer(raw, dtype=self.lay.dtype)

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        lay = self.lay
        out = np.empty((max(0, b - a), len(cols)), dtype=np.float64)
        if b <= a:
            return out
        if lay.frame_major:
            rows = self._lane(0, a, b, lay.dtype.itemsize * lay.width).reshape(b - a, lay.width)
            out[:] = rows[:, cols]
        else:
            for j, k in enumerate(cols):
                out[:, j] = self._lane(k, a, b, lay.dtype.itemsize)
        return out

    def close(self) -> None:
        for fh, _ in self.streams.values():
            fh.close()
        self.streams = {}
        self.zf.close()


def _stored_offset(path: str, info: zipfile.ZipInfo) -> int:
    """Where a stored member's bytes start in the archive (after its local header)."""
    with open(path, "rb") as fh:
        fh.seek(info.header_offset)
        local = fh.read(30)
    if len(local) < 30 or local[:4] != b"PK\x03\x04":
        raise ValueError("a member's local header is damaged")
    name_len, extra_len = struct.unpack("<HH", local[26:30])
    return info.header_offset + 30 + name_len + extra_len


def _crc_warning(fh, start: int, info: zipfile.ZipInfo, name: str) -> str | None:
    """A warning when the stored member's bytes (from ``start`` in the open archive ``fh``)
    do not give the CRC-32 its zip entry holds."""
    crc, left = 0, info.file_size
    fh.seek(start)
    while left > 0:
        got = fh.read(min(left, _SKIP_BYTES))
        if not got:
            return None            # shorter than the entry: the shortened-file warning says so
        crc = zlib.crc32(got, crc)
        left -= len(got)
    if crc == info.CRC:
        return None
    return (f"array {name!r} fails the archive's checksum (CRC-32 {crc:08x}, its entry "
            f"says {info.CRC:08x}): some of its bytes are damaged, so samples or figures "
            "may be wrong")


def _held(lay: _Layout, held_bytes: int, whose: str, holder: str,
          source: str) -> tuple[int, str | None]:
    """``(frames to read, a warning or None)`` when ``held_bytes`` of the samples are there.

    As for a shortened WAV: the whole frames a short file holds are read, with a
    warning giving both counts.  An array stored channel after channel is refused
    instead (its last channels would be missing, not its last frames).
    """
    if held_bytes >= lay.nbytes:
        return lay.frames, None
    if not lay.frame_major:
        raise ScalesieveError(f"{whose} declares {lay.frames} frames of {lay.width} channels "
                              f"({lay.nbytes} bytes) but {holder} holds {max(0, held_bytes)} "
                              "bytes of them; its channels are stored one after another, so "
                              "the last ones are missing", source=source)
    held = max(0, held_bytes) // (lay.width * lay.dtype.itemsize)
    return held, (f"{whose} declares {lay.frames} frames but {holder} holds {held}; the "
                  "recording is incomplete (read what is there)")


def _npy(source: str) -> Source:
    with open(source, "rb") as fh:
        lay = _header(fh, "the file", source)
        offset = fh.tell()
        size = os.fstat(fh.fileno()).st_size
    # the header's shape and type declare the bytes that follow it (numpy.lib.format)
    frames, warning = _held(lay, size - offset, "the header", "the file", source)
    if frames * lay.width < 2:
        raise ScalesieveError("holds fewer than two samples" + (f" ({warning})" if warning
                                                                 else ""), source=source)
    names = [f"ch{k}" for k in range(lay.width)]
    src = _source(names, None, lay, lambda: _FileReads(source, offset, lay), "npy", "", frames)
    if warning:
        src.warnings.append(warning)
    return src


def _why_unreadable(source: str, exc: Exception) -> str:
    """Why ``zipfile`` could not open an archive; a cut one said so in words."""
    try:
        with open(source, "rb") as fh:
            head = fh.read(4)
            size = os.fstat(fh.fileno()).st_size
    except OSError:
        return _reason(exc)
    if head == b"PK\x03\x04" and isinstance(exc, zipfile.BadZipFile):
        # members start the file, but the table of them that ends every zip archive
        # (its "end of central directory" record) is not there
        return (f"its members begin but the table of contents that ends every archive is "
                f"missing: the file ({size} bytes) looks cut short or still being written")
    return _reason(exc)


def _member_array(zf: zipfile.ZipFile, name: str, source: str) -> np.ndarray:
    """A small member (a rate, the names) read whole, never unpickled."""
    with zf.open(name) as fh:
        return np.lib.format.read_array(fh, allow_pickle=False)


def _npz(source: str, dataset: str | None) -> Source:
    try:
        zf = zipfile.ZipFile(source)
    except (zipfile.BadZipFile, OSError, ValueError) as exc:
        why = _why_unreadable(source, exc)
        raise ScalesieveError(f"is not a readable NumPy .npz archive ({why})",
                              source=source) from None
    with zf:
        found, small, refused = {}, {}, []
        for info in zf.infolist():
            if not info.filename.endswith(".npy"):
                continue
            key = info.filename[:-4]
            if info.flag_bits & 0x1:
                refused.append(f"{key!r} (encrypted)")
                continue
            if key.lower() in RATE_NAMES or key == "channel_names":
                small[key] = info
                continue
            with zf.open(info) as fh:
                try:
                    lay = _header(fh, f"array {key!r}", source)
                except ScalesieveError as exc:
                    refused.append(exc.message)
                    continue
            if lay.frames * lay.width >= 2:
                found[key] = (info, lay)
        if not found:
            extra = f" (not usable: {', '.join(refused[:6])})" if refused else ""
            raise ScalesieveError(f"holds no 1-D or 2-D array of numbers to analyse{extra}",
                                  source=source)
        name = _choose(sorted(found), dataset, "--dataset", "numeric arrays", source)
        info, lay = found[name]
        rate, names = None, None
        for key, sinfo in small.items():
            try:
                value = _member_array(zf, sinfo.filename, source)
            except (ValueError, OSError, EOFError):
                continue
            if key.lower() in RATE_NAMES and value.size == 1 and value.dtype.kind in "iuf":
                v = float(value.ravel()[0])
                if v > 0 and np.isfinite(v):
                    rate = v
            elif key == "channel_names" and value.dtype.kind in "US" and value.size == lay.width:
                names = [x.decode() if isinstance(x, bytes) else str(x) for x in value.ravel()]
        stored = info.compress_type == zipfile.ZIP_STORED
        if stored:
            start = _stored_offset(source, info)
            with open(source, "rb") as fh:
                fh.seek(start)
                _header(fh, f"array {name!r}", source)
                offset = fh.tell()
                size = os.fstat(fh.fileno()).st_size
                # what the member's zip entry holds, and no more than the file itself does
                held_bytes = min(start + info.file_size, size) - offset
                frames, warning = _held(lay, held_bytes, f"the header of array {name!r}",
                                        "the archive", source)
                if frames * lay.width < 2:
                    raise ScalesieveError(f"array {name!r} holds fewer than two samples "
                                          f"({warning})", source=source)
                checked = warning is None and info.file_size <= CRC_CHECK_BYTES
                if checked:
                    warning = _crc_warning(fh, start, info, name)
        else:
            frames, warning = lay.frames, None
    if names is None:
        names = [name] if lay.width == 1 else [f"{name}[{k}]" for k in range(lay.width)]
    what = f"array {name!r}"
    opener = (lambda: _FileReads(source, offset, lay)) if stored else \
        (lambda: _Inflating(source, info.filename, lay, what))
    src = _source(names, rate, lay, opener, "npz", name, frames)
    src.detail["compressed"] = not stored
    if stored:
        src.detail["crc_checked"] = checked
    if warning:
        src.warnings.append(warning)
    return src


def _source(names, rate, lay: _Layout, opener, kind: str, member: str, frames: int) -> Source:
    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        r = opener()
        try:
            return r.read(a, b, cols)
        finally:
            r.close()

    detail = {"dataset": member} if member else {}
    src = Source(names, [""] * len(names), rate, frames, read, format="NumPy",
                 detail=detail)
    src.session = opener
    return src


def numpy_source(source: str, kind: str, dataset: str | None) -> Source:
    """The :class:`Source` of a ``.npy`` file or of one array of a ``.npz`` archive."""
    return _npy(source) if kind == "npy" else _npz(source, dataset)


def probe_numpy(source: str, kind: str) -> tuple[int, list[str], float | None]:
    """``(frames, channel names, rate)`` from the headers alone (the largest array of a .npz)."""
    if kind == "npy":
        with open(source, "rb") as fh:
            lay = _header(fh, "the file", source)
        return lay.frames, [f"ch{k}" for k in range(lay.width)], None
    best = None
    with zipfile.ZipFile(source) as zf:
        for info in zf.infolist():
            if not info.filename.endswith(".npy") or info.flag_bits & 0x1:
                continue
            with zf.open(info) as fh:
                try:
                    lay = _header(fh, info.filename, source)
                except ScalesieveError:
                    continue
            key = info.filename[:-4]
            if key.lower() in RATE_NAMES or key == "channel_names":
                continue
            if best is None or lay.frames * lay.width > best[1].frames * best[1].width:
                best = (key, lay)
    if best is None:
        return 0, [], None
    key, lay = best
    return lay.frames, [key] if lay.width == 1 else [f"{key}[{k}]" for k in range(lay.width)], None
