"""Damaged NumPy ``.npz`` archives: a changed byte is a warning, a cut archive one message.

References: the zip format (PKWARE's APPNOTE: every entry holds the CRC-32 of
its uncompressed bytes; the "end of central directory" record ends every
archive), computed here with Python's ``zlib.crc32`` and ``zipfile``; NumPy's
own ``numpy.savez`` writes the archives and ``numpy.load`` reads the samples
they hold, and ``numpy.lib.format`` the bytes of a member as they are now.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys
import zipfile
import zlib

import numpy as np

from scalesieve.io.readers import read_recording


def _bands(path, *extra):
    return subprocess.run([sys.executable, "-m", "scalesieve", "bands", str(path), "--json",
                           *extra], capture_output=True, text=True, timeout=120)


def _archive(tmp_path, name="rig.npz"):
    x = np.random.default_rng(11).standard_normal(4000)
    path = tmp_path / name
    np.savez(path, strain=x, fs=np.float64(500.0))     # stored, not compressed
    return path, x


def _data_offset(path, member="strain.npy") -> tuple[int, int]:
    """Where a stored member's bytes start in the file, and how many there are (APPNOTE:
    a 30-byte local header, then the name and the extra field)."""
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo(member)
    raw = path.read_bytes()
    local = raw[info.header_offset:info.header_offset + 30]
    name_len, extra_len = int.from_bytes(local[26:28], "little"), int.from_bytes(local[28:30],
                                                                                 "little")
    return info.header_offset + 30 + name_len + extra_len, info.file_size


def test_an_intact_stored_archive_passes_its_checksum_without_a_word(tmp_path):
    path, x = _archive(tmp_path)
    p = _bands(path)
    assert p.returncode == 0 and p.stderr == "", p.stderr
    assert json.loads(p.stdout)["warnings"] == []
    rec = read_recording(str(path))
    np.testing.assert_array_equal(rec.samples[:, 0], x)


def test_a_changed_byte_in_a_stored_member_is_a_warning_with_both_checksums(tmp_path):
    path, x = _archive(tmp_path)
    start, size = _data_offset(path)
    raw = bytearray(path.read_bytes())
    raw[start + size // 2] ^= 0x40                      # one bit of one sample
    path.write_bytes(bytes(raw))
    with zipfile.ZipFile(path) as zf:
        stated = zf.getinfo("strain.npy").CRC
    actual = zlib.crc32(bytes(raw[start:start + size]))
    assert actual != stated
    p = _bands(path)
    assert p.returncode == 0, p.stderr
    warning = (f"array 'strain' fails the archive's checksum (CRC-32 {actual:08x}, its entry "
               f"says {stated:08x}): some of its bytes are damaged, so samples or figures "
               "may be wrong")
    assert p.stderr.splitlines() == [f"scalesieve: warning: {path}: {warning}"]
    assert json.loads(p.stdout)["warnings"] == [warning]
    # what is read is what the file holds now (the member's bytes read by numpy.lib.format)
    held = np.lib.format.read_array(io.BytesIO(bytes(raw[start:start + size])))
    np.testing.assert_array_equal(read_recording(str(path)).samples[:, 0], held)
    assert not np.array_equal(held, x)


def test_an_archive_cut_short_says_so_in_one_line(tmp_path):
    path, _ = _archive(tmp_path)
    raw = path.read_bytes()
    cut = tmp_path / "cut.npz"
    cut.write_bytes(raw[:len(raw) // 2])               # the end of central directory is gone
    p = _bands(cut)
    assert p.returncode == 2
    assert p.stderr.splitlines() == [
        f"scalesieve: error: {cut}: is not a readable NumPy .npz archive (its members begin "
        "but the table of contents that ends every archive is missing: the file "
        f"({len(raw) // 2} bytes) looks cut short or still being written)"]
