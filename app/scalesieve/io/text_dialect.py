"""Text tables at the level of cells: decoding, lines, the dialect, one cell's number.

Part of the text-table reader (``scalesieve.io.csv_reader``): the file's
bytes decoded (BOMs, UTF-16, Latin-1) with LF line ends; comment and blank
lines; the delimiter (comma, semicolon, tab, whitespace) and decimal comma
detected from the first rows (clevercsv where it is installed, else the
standard library's ``csv.Sniffer`` and our own candidates); a cell's value.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass

from scalesieve.errors import ScalesieveError
from scalesieve.io import time_column as tc

#: Cells that mean "no value here" (case-insensitive, after stripping).
GAP_TOKENS = frozenset({"", "nan", "-nan", "+nan", "na", "n/a", "null", "none"})
_SAMPLE_CHARS = 1 << 16      # text looked at to find the dialect and the header, at most
_CLEVER_CHARS = 8192         # clevercsv is thorough but slow on long samples


@dataclass
class Dialect:
    """How cells are separated and written."""

    delimiter: str | None      # None: runs of whitespace
    decimal: str = "."         # "." or ","
    trailing: bool = False     # every row ends with a delimiter (an empty last cell)

    def describe(self) -> str:
        names = {",": "comma", ";": "semicolon", "\t": "tab", "|": "bar", None: "whitespace"}
        return names.get(self.delimiter, repr(self.delimiter))


# ----------------------------------------------------------------------------- text

def decode_text(raw: bytes, source: str) -> tuple[str, str]:
    """Decode file bytes to text with LF line ends; return ``(text, encoding)``.

    Tries UTF-16 when a UTF-16 byte-order mark is present, then UTF-8 (BOM
    allowed), then Latin-1 (which decodes any bytes; binary data is caught by
    looking for NUL and other control characters).
    """
    if is_utf16(raw):
        try:
            text, encoding = raw.decode("utf-16"), "utf-16"
        except UnicodeDecodeError:
            raise ScalesieveError("is not readable text (broken UTF-16)", source=source) from None
    else:
        check_no_nul(raw[:_SAMPLE_CHARS], raw[-_SAMPLE_CHARS:], source)
        try:
            text, encoding = raw.decode("utf-8-sig"), "utf-8"
        except UnicodeDecodeError:
            text, encoding = raw.decode("latin-1"), "latin-1"
    check_text_head(text[:_SAMPLE_CHARS], source)
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    return text, encoding


def is_utf16(raw_head: bytes) -> bool:
    """A UTF-16 byte-order mark starts the file."""
    return raw_head.startswith((b"\xff\xfe", b"\xfe\xff"))


def check_no_nul(raw_head: bytes, raw_tail: bytes, source: str) -> None:
    """A file not in UTF-16 holds no NUL byte in its first and last ``_SAMPLE_CHARS``."""
    if b"\x00" in raw_head or b"\x00" in raw_tail:
        raise ScalesieveError("contains binary data, not a text table", source=source)


def check_text_head(head: str, source: str) -> None:
    """The first ``_SAMPLE_CHARS`` decoded characters (before line ends are made LF)
    hold no NUL and few other control characters."""
    controls = sum(1 for ch in head if ord(ch) < 32 and ch not in "\t\n\r\f\v")
    if "\x00" in head or controls > max(2, len(head) // 100):
        raise ScalesieveError("contains binary data, not a text table", source=source)


def looks_like_text(head: bytes) -> bool:
    """Cheap guess whether the first bytes of a file are a text table."""
    if not head:
        return False
    if head.startswith((b"\xff\xfe", b"\xfe\xff", b"\xef\xbb\xbf")):
        return True
    if b"\x00" in head:
        return False
    try:
        text = head.decode("utf-8")
    except UnicodeDecodeError as exc:
        # A multi-byte character cut by the end of the sample is still text.
        if exc.start < len(head) - 4:
            text = head.decode("latin-1")
        else:
            text = head[:exc.start].decode("utf-8")
    controls = sum(1 for ch in text if ord(ch) < 32 and ch not in "\t\n\r\f\v")
    return controls <= max(2, len(text) // 100)


def _lines(text: str, start: int = 0, lineno: int = 1):
    """Yield ``(line number, offset, line)`` from ``start`` without splitting the whole text."""
    n = len(text)
    pos = start
    while pos < n:
        end = text.find("\n", pos)
        if end < 0:
            end = n
        yield lineno, pos, text[pos:end]
        pos = end + 1
        lineno += 1


def _is_comment_or_blank(line: str) -> bool:
    s = line.strip()
    return not s or s.startswith("#")


def _data_part(line: str) -> str:
    """A data row without its ``#`` comment; empty when nothing is left."""
    cut = line.find("#")
    if cut >= 0:
        line = line[:cut]
    return line.strip()


# ------------------------------------------------------------------------- cells

def split_cells(line: str, dialect: Dialect) -> list[str]:
    """Cells of one row, stripped, quotes removed."""
    d = dialect.delimiter
    if d is None:
        cells = line.split()
    elif '"' in line:
        cells = next(csv.reader([line], delimiter=d, quotechar='"', skipinitialspace=True))
    else:
        cells = line.split(d)
    cells = [c.strip().strip('"').strip() for c in cells]
    if dialect.trailing and cells and cells[-1] == "":
        cells.pop()
    if d is None:
        cells = tc.split_date_time(cells)
    return cells


_NOT_A_NUMBER = object()


def cell_value(cell: str, decimal: str):
    """Float of ``cell``; ``nan`` for a gap; ``_NOT_A_NUMBER`` when it is neither."""
    c = cell.strip()
    if c.lower() in GAP_TOKENS:
        return math.nan
    if decimal == ",":
        if "." in c:
            return _NOT_A_NUMBER
        c = c.replace(",", ".")
    if "_" in c:  # float() accepts 1_000; a table cell with it is more likely a name
        return _NOT_A_NUMBER
    try:
        return float(c)
    except ValueError:
        return _NOT_A_NUMBER


def _is_numeric(cell: str, decimal: str) -> bool:
    return cell_value(cell, decimal) is not _NOT_A_NUMBER


# ---------------------------------------------------------------------- dialect

_CANDIDATES = [(",", "."), (";", "."), (";", ","), ("\t", "."), ("\t", ","),
               (None, "."), (None, ","), ("|", "."), ("|", ",")]


def _clevercsv_delimiter(rows: list[str]) -> str | None | bool:
    """clevercsv's guess of the delimiter (``None`` = whitespace), or ``False``."""
    try:
        import clevercsv
    except ImportError:  # pragma: no cover - a declared dependency
        return False
    sample = "\n".join(rows)[:_CLEVER_CHARS]
    try:
        d = clevercsv.Sniffer().sniff(sample, delimiters=[",", ";", "\t", " ", "|"])
    except Exception:  # clevercsv raises several kinds on odd samples; its guess is optional
        return False
    if d is None:
        return False
    if d.delimiter == " ":
        return None
    if d.delimiter in (",", ";", "\t", "|"):
        return d.delimiter
    return False


def detect_dialect(rows: list[str]) -> tuple[Dialect, int]:
    """Find delimiter and decimal mark of a numeric table; return ``(dialect, cells per row)``.

    Every candidate (delimiter, decimal mark) pair is scored on the sample
    rows: the share of rows with the most common cell count times the share
    of cells (after the first row, which may be a header) that read as
    numbers. A general CSV sniffer picks the delimiter alone, which misreads
    a decimal comma in whitespace- or single-column tables, so the decimal
    mark is scored together with it; clevercsv's guess only breaks ties.
    """
    scored = []
    for delim, decimal in _CANDIDATES:
        trailing = delim is not None and all(r.rstrip().endswith(delim) for r in rows)
        dialect = Dialect(delim, decimal, trailing)
        split = [split_cells(r, dialect) for r in rows]
        counts = [len(c) for c in split]
        body_counts = counts[1:] if len(rows) > 1 else counts
        k = max(set(body_counts), key=lambda v: (body_counts.count(v), v))
        consistency = sum(1 for c in counts if c == k) / len(counts)
        cells = [c for cs in (split[1:] if len(rows) > 1 else split) if len(cs) == k for c in cs]
        numeric = (sum(1 for c in cells if _is_numeric(c, decimal) or tc.cell_kind(c))
                   / len(cells)) if cells else 0.0
        # A decimal comma must be seen to be chosen; otherwise '.' is the same reading.
        if decimal == "," and not any("," in c for c in cells):
            numeric *= 0.999
        scored.append(((round(consistency * numeric, 9), k), dialect, k))
    top = max(s for s, _, _ in scored)
    tied = [(d, k) for s, d, k in scored if s == top]
    if len({d.delimiter for d, _ in tied}) > 1:
        # Only a tie asks clevercsv (slow to import): its delimiter goes first.
        clever = _clevercsv_delimiter(rows)
        if clever is not False:
            tied.sort(key=lambda dk: dk[0].delimiter != clever)  # stable
    dialect, k = tied[0]
    return dialect, k


# ------------------------------------------------------------------------ header
