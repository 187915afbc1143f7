"""The element tree of a MATLAB v5 file, walked in the order SciPy reads it, before it does.

SciPy's v5 reader (``scipy.io.loadmat``) takes a value element's data type
code from the file and looks it up in a table of its own without checking the
code first: an unknown code (0, 8, 10, 11, 14, 15 or beyond 18 where values
belong) is a pointer into nowhere, and the process dies (a segmentation fault
or a bus error), which no ``except`` can catch.  A damaged byte in a tag is
enough.  This walk follows every variable as SciPy will (array flags,
dimensions, name, then the values, cells, fields or object the class calls
for), reading only the tags and skipping the values, and names the first
element SciPy could not read safely.  Element layout and codes: MathWorks,
"MAT-File Format", Level 5 (data types table and the miMATRIX layout).
"""

from __future__ import annotations

import struct
import zlib

#: value data types SciPy's table holds (miINT8..miUINT32, miSINGLE, miDOUBLE,
#: miINT64, miUINT64, miUTF8, miUTF16, miUTF32)
VALUE_TYPES = frozenset({1, 2, 3, 4, 5, 6, 7, 9, 12, 13, 16, 17, 18})
_MATRIX, _COMPRESSED = 14, 15
# array classes (mxCELL_CLASS = 1 ... mxOPAQUE_CLASS = 17)
_CELL, _STRUCT, _OBJECT, _CHAR, _SPARSE, _FUNCTION, _OPAQUE = 1, 2, 3, 4, 5, 16, 17
_NUMBERS = frozenset(range(6, 16))           # mxDOUBLE_CLASS .. mxUINT64_CLASS
#: arrays nested deeper than this are taken for damage (SciPy recurses in C)
_MOST_DEPTH = 64
#: bytes of a tag's values read to look at (dimensions, a field-name length)
_MOST_LOOKED_AT = 4096
_CHUNK = 1 << 16


class _Damaged(Exception):
    pass


class _FileStretch:
    """Bytes ``start .. end`` of an open file, read or skipped in order."""

    def __init__(self, fh, start: int, end: int):
        self.fh, self.pos, self.end = fh, start, end
        fh.seek(start)

    def left(self) -> int:
        return self.end - self.pos

    def take(self, n: int) -> bytes:
        if n > self.left():
            raise _Damaged("runs past the end of its variable")
        data = self.fh.read(n)
        if len(data) < n:
            raise _Damaged("runs past the end of the file")
        self.pos += n
        return data

    def skip(self, n: int) -> None:
        if n > self.left():
            raise _Damaged("runs past the end of its variable")
        self.pos += n
        self.fh.seek(self.pos)


class _Inflated:
    """A compressed element's bytes inflated in order, never more than a chunk held at once."""

    def __init__(self, fh, start: int, size: int):
        fh.seek(start)
        self.fh, self.compressed_left = fh, size
        self.z = zlib.decompressobj()
        self.buf, self.pos, self.end = b"", 0, None

    def left(self) -> int:
        return (self.end - self.pos) if self.end is not None else 1 << 62

    def _fill(self, want: int) -> None:
        while len(self.buf) < want:
            data = self.z.unconsumed_tail
            if not data:
                if self.z.eof or self.compressed_left <= 0:
                    raise _Damaged("runs past the end of its compressed variable")
                data = self.fh.read(min(self.compressed_left, _CHUNK))
                if not data:
                    raise _Damaged("runs past the end of the file")
                self.compressed_left -= len(data)
            try:
                self.buf += self.z.decompress(data, max(want - len(self.buf), _CHUNK))
            except zlib.error:
                raise _Damaged("is in a compressed variable that does not inflate") from None

    def take(self, n: int) -> bytes:
        if n > self.left():
            raise _Damaged("runs past the end of its variable")
        self._fill(n)
        out, self.buf = self.buf[:n], self.buf[n:]
        self.pos += n
        return out

    def skip(self, n: int) -> None:
        if n > self.left():
            raise _Damaged("runs past the end of its variable")
        while n > 0:
            step = min(n, _CHUNK)
            self.take(step)
            n -= step


class _Walk:
    def __init__(self, end: str):
        self.end = end

    def u32(self, raw: bytes, at: int = 0) -> int:
        return struct.unpack_from(self.end + "I", raw, at)[0]

    def element(self, s, look: bool = False, skip: bool = True) -> tuple[int, int, bytes | None]:
        """One element (a full tag or a small one): ``(data type, bytes, values if looked at)``;
        ``skip=False`` leaves the stream at its values (nothing after them is read)."""
        raw = s.take(8)
        first = self.u32(raw)
        if first >> 16:                      # small data element: 1..4 bytes in the tag
            n = first >> 16
            if n > 4:
                raise _Damaged(f"is a small element of {n} bytes (at most 4)")
            return first & 0xFFFF, n, raw[4:4 + n]
        n = self.u32(raw, 4)
        if not skip:
            return first, n, None
        if look:
            if n > _MOST_LOOKED_AT:
                raise _Damaged(f"declares {n} bytes where a few are expected")
            data = s.take(n)
        else:
            data = None
            s.skip(n)
        s.skip((-n) % 8)
        return first, n, data

    def values(self, s, skip: bool = True) -> None:
        kind, _n, _ = self.element(s, skip=skip)
        if kind not in VALUE_TYPES:
            raise _Damaged(f"holds values of data type {kind}, which is no MATLAB value type")

    def nested(self, s, depth: int) -> None:
        kind, n = struct.unpack(self.end + "II", s.take(8))
        if kind != _MATRIX:
            raise _Damaged(f"has an element of data type {kind} where an array belongs")
        if n:
            self.matrix(s, depth + 1)

    def count(self, dims_raw: bytes, n: int) -> int:
        dims = struct.unpack(self.end + f"{n // 4}i", dims_raw[:n - n % 4])
        total = 1
        for d in dims:
            if d < 0:
                raise _Damaged(f"has a negative dimension ({d})")
            total *= d
        return total

    def matrix(self, s, depth: int) -> None:
        """An array's content, after its miMATRIX tag, as SciPy reads it."""
        if depth > _MOST_DEPTH:
            raise _Damaged(f"nests arrays more than {_MOST_DEPTH} deep")
        flags = s.take(16)                   # the flags' tag (not checked by SciPy) and flags
        word = self.u32(flags, 8)
        cls, is_complex = word & 0xFF, (word >> 11) & 1
        if cls == _OPAQUE:                   # name, type system, class name, then one array
            for _ in range(3):
                self.element(s)
            self.nested(s, depth)
            return
        kind, n, dims = self.element(s, look=True)
        if kind not in (5, 6):
            raise _Damaged(f"has dimensions of data type {kind}")
        count = self.count(dims, n)
        self.element(s)                      # the name (SciPy checks its type)
        if cls in (_CHAR, _SPARSE) or cls in _NUMBERS:
            parts = (4 if is_complex else 3) if cls == _SPARSE else \
                (2 if is_complex and cls != _CHAR else 1)
            for k in range(parts):
                # a variable's last values need not be inflated to be walked past: SciPy
                # reads nothing of it after them
                self.values(s, skip=depth > 0 or k < parts - 1)
        elif cls == _CELL:
            self.arrays(s, count, depth)
        elif cls in (_STRUCT, _OBJECT):
            if cls == _OBJECT:
                self.element(s)              # the class name
            kind, n, raw = self.element(s, look=True)
            if kind not in (5, 6) or n != 4:
                raise _Damaged("has a damaged field-name length")
            width = struct.unpack(self.end + "i", raw)[0]
            if width <= 0:
                raise _Damaged(f"declares field names {width} bytes wide")
            _kind, n, _ = self.element(s)
            self.arrays(s, count * (n // width), depth)
        elif cls == _FUNCTION:
            self.nested(s, depth)
        else:
            raise _Damaged(f"is of array class {cls}, which MATLAB does not have")

    def arrays(self, s, count: int, depth: int) -> None:
        if count * 8 > s.left():             # every array takes a tag of 8 bytes at least
            raise _Damaged(f"declares {count} arrays inside, more than its bytes can hold")
        for _ in range(count):
            self.nested(s, depth)


def mat5_damage(source: str) -> str | None:
    """Why SciPy could not read a MATLAB v5 file's elements safely, or ``None`` when it can.

    Call it after the top-level sizes are known to fit the file: each top-level
    element is walked within the bytes its tag declares (a compressed one
    within its inflated array's declared size).
    """
    with open(source, "rb") as fh:
        head = fh.read(128)
        if len(head) < 128:
            return None
        end = "<" if head[126:128] == b"IM" else ">"
        walk = _Walk(end)
        fh.seek(0, 2)
        size = fh.tell()
        pos = 128
        while pos + 8 <= size:
            fh.seek(pos)
            kind, nbytes = struct.unpack(end + "II", fh.read(8))
            try:
                if kind == _COMPRESSED:
                    s = _Inflated(fh, pos + 8, nbytes)
                    inner, inner_bytes = struct.unpack(end + "II", s.take(8))
                    if inner != _MATRIX:
                        raise _Damaged(f"holds data type {inner}, not an array")
                    s.end = s.pos + inner_bytes
                else:
                    s = _FileStretch(fh, pos + 8, pos + 8 + nbytes)
                if kind in (_MATRIX, _COMPRESSED) and s.left():
                    walk.matrix(s, 0)
            except _Damaged as why:
                return f"the variable at byte {pos} {why}"
            except struct.error:
                return f"the variable at byte {pos} is cut short"
            pos += 8 + nbytes + ((-nbytes) % 8 if kind != _COMPRESSED else 0)
    return None
