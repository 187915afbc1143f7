"""Files shorter than their headers declare, files that shrink while they are read,
and MATLAB elements SciPy would read unchecked: one clear message, never a dead process.

Each case that could kill the interpreter (a bus error from a memory map of a file
shortened under it, a segmentation fault inside SciPy's MAT v5 reader) runs in a
child process with a time limit, so a crash is a failing test, not a dead test run.

References: NumPy's format documentation (``numpy.lib.format``: the header's
``shape``, ``fortran_order`` and ``descr`` declare the ``prod(shape) * itemsize``
bytes that follow it); MathWorks, "MAT-File Format", Level 5 (the data type codes
and the miMATRIX layout: flags, dimensions, name, values); SciPy's own test data
(``scipy/io/matlab/tests/data``, files written by MATLAB and by SciPy).
"""

from __future__ import annotations

import glob
import io
import json
import os
import struct
import subprocess
import sys
import zipfile

import numpy as np
import pytest
import soundfile as sf

from scalesieve.io.readers import read_recording

CHILD_TIMEOUT_S = 120


def _child(args: list[str]) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    p = subprocess.run([sys.executable, *args], capture_output=True, text=True,
                       timeout=CHILD_TIMEOUT_S, env=env)
    assert p.returncode >= 0, f"the child was killed by signal {-p.returncode}: {p.stderr[-500:]}"
    return p


def _bands(path, *extra) -> subprocess.CompletedProcess:
    return _child(["-m", "scalesieve", "bands", str(path), "--json", *extra])


def _one_error_line(p: subprocess.CompletedProcess, path) -> str:
    lines = p.stderr.splitlines()
    assert p.returncode == 2 and len(lines) == 1, p.stderr
    assert lines[0].startswith(f"scalesieve: error: {path}: "), lines[0]
    return lines[0]


def _signal(frames=1000, channels=2, seed=3):
    return np.random.default_rng(seed).standard_normal((frames, channels))


def _npy_bytes(x: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, x)
    return buf.getvalue()


def _header_length(raw: bytes) -> int:
    # numpy.lib.format, version 1.0: magic (6), version (2), a little-endian uint16
    # header length, then the header itself
    assert raw[:6] == b"\x93NUMPY" and raw[6] == 1
    return 10 + struct.unpack("<H", raw[8:10])[0]


# ------------------------------------------------------------- shorter than declared

def test_truncated_npy_reads_the_frames_it_holds_with_a_warning(tmp_path):
    x = _signal()
    raw = _npy_bytes(x)
    head = _header_length(raw)
    path = tmp_path / "short.npy"
    # the header still declares 1000 frames of 2 float64 channels (16 bytes a frame)
    path.write_bytes(raw[:head + 640 * 16 + 5])
    p = _bands(path, "--rate", "1000")
    assert p.returncode == 0, p.stderr
    assert json.loads(p.stdout)["samples"] == 640
    assert p.stderr.splitlines() == [
        f"scalesieve: warning: {path}: the header declares 1000 frames but the file holds "
        "640; the recording is incomplete (read what is there)"]
    rec = read_recording(str(path), rate=1000.0)
    np.testing.assert_array_equal(rec.samples, x[:640])


@pytest.mark.parametrize("blocks", [False, True])
def test_truncated_npy_cleans_the_same_whole_and_in_blocks(tmp_path, capsys, monkeypatch,
                                                           blocks):
    from scalesieve import memory_guard
    from scalesieve.cli import main

    x = _signal(20_000)
    raw = _npy_bytes(x)
    path = tmp_path / "short.npy"
    path.write_bytes(raw[:_header_length(raw) + 12_345 * 16 + 9])
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16 if blocks else 1 << 40)
    out = tmp_path / "out.csv"
    code = main(["clean", str(path), "-o", str(out), "--zero", "1", "--rate", "1000"])
    err = [ln for ln in capsys.readouterr().err.splitlines()
           if not ln.startswith("scalesieve: note:")]      # in blocks: how it ran
    assert code == 0 and err == [
        f"scalesieve: warning: {path}: the header declares 20000 frames but the file holds "
        "12345; the recording is incomplete (read what is there)"], err
    # the csv module reads the output back: a header row, then one row per frame held
    import csv

    with open(out, newline="") as fh:
        rows = list(csv.reader(fh))
    assert len(rows) == 1 + 12_345


def test_truncated_npy_stored_channel_after_channel_is_refused(tmp_path):
    x = np.asfortranarray(_signal())              # each channel's 1000 frames side by side
    raw = _npy_bytes(x)
    path = tmp_path / "columns.npy"
    path.write_bytes(raw[:-8])
    line = _one_error_line(_bands(path, "--rate", "1000"), path)
    assert "declares 1000 frames of 2 channels (16000 bytes) but the file holds 15992" in line
    assert "last ones are missing" in line


def _stored_npz(path, members: dict[str, bytes]) -> None:
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_STORED) as zf:
        for name, data in members.items():
            zf.writestr(name, data)


def test_truncated_uncompressed_npz_member_reads_what_it_holds(tmp_path):
    x = _signal()
    raw = _npy_bytes(x)
    head = _header_length(raw)
    path = tmp_path / "short.npz"
    # an archive whose member's header declares 1000 frames but whose entry holds 500
    _stored_npz(path, {"accel.npy": raw[:head + 500 * 16], "fs.npy": _npy_bytes(np.float64(250))})
    p = _bands(path)
    assert p.returncode == 0, p.stderr
    assert json.loads(p.stdout)["samples"] == 500
    assert p.stderr.splitlines() == [
        f"scalesieve: warning: {path}: the header of array 'accel' declares 1000 frames but "
        "the archive holds 500; the recording is incomplete (read what is there)"]
    np.testing.assert_array_equal(read_recording(str(path)).samples, x[:500])


def test_npz_member_holding_no_whole_frame_is_refused(tmp_path):
    raw = _npy_bytes(_signal())
    path = tmp_path / "empty.npz"
    _stored_npz(path, {"accel.npy": raw[:_header_length(raw) + 10]})
    line = _one_error_line(_bands(path, "--rate", "100"), path)
    assert "array 'accel' holds fewer than two samples" in line


# ------------------------------------------------------- shrinking while it is read

_SHRINK = """
import os, sys
from scalesieve.errors import ScalesieveError
path, how, cut = sys.argv[1], sys.argv[2], int(sys.argv[3])
if how == "wav":
    from scalesieve.longview.samples import SampleReader
    r = SampleReader(path)
    assert r.direct
    frames = r.frames
    read = lambda a, b: r.read(a, b)
else:
    from scalesieve.io.measurement_readers import open_source
    src = open_source(path, how)
    r = src.opened()
    frames = src.frames
    read = lambda a, b: r.read(a, b, [0])
read(0, 100)                       # the first block, while the file is whole
os.truncate(path, cut)             # another program cuts the file short
try:
    read(frames - 100, frames)     # a block past the new end
except ScalesieveError as err:
    print(err.one_line())
    sys.exit(3)
finally:
    r.close()
print("read on without a message")
"""


def _shrinks(path, how: str, cut: int) -> str:
    p = _child(["-c", _SHRINK, str(path), how, str(cut)])
    assert p.returncode == 3, (p.returncode, p.stdout, p.stderr[-500:])
    line = p.stdout.strip()
    assert "\n" not in line and line.startswith(f"{path}: the file became shorter"), line
    return line


def test_npy_shortened_after_it_was_opened_gives_one_message(tmp_path):
    path = tmp_path / "long.npy"
    np.save(path, _signal(200_000))
    line = _shrinks(path, "npy", 64 * 1024)
    assert f"need its first {128 + 200_000 * 16} bytes, it now holds {64 * 1024}" in line


def test_stored_npz_shortened_after_it_was_opened_gives_one_message(tmp_path):
    path = tmp_path / "long.npz"
    np.savez(path, x=_signal(200_000), fs=np.float64(1000))
    _shrinks(path, "npz", 64 * 1024)


def test_wav_shortened_under_the_long_view_gives_one_message(tmp_path):
    path = tmp_path / "long.wav"
    sf.write(path, _signal(200_000) * 0.1, 8000, subtype="PCM_16")
    _shrinks(path, "wav", 64 * 1024)


def test_edf_shortened_while_read_in_ranges_gives_one_message(tmp_path):
    edfio = pytest.importorskip("edfio")
    path = tmp_path / "long.edf"
    x = np.sin(np.arange(100 * 600) / 7.0)
    edfio.Edf([edfio.EdfSignal(x, 100, label="a", physical_range=(-1, 1))]).write(path)
    _shrinks(path, "edf", 64 * 1024)


# ------------------------------------------------- MAT v5 elements SciPy reads unchecked

def _mat(tmp_path, name, variables, patch) -> str:
    scipy_io = pytest.importorskip("scipy.io")
    path = tmp_path / name
    scipy_io.savemat(path, variables)
    raw = bytearray(path.read_bytes())
    patch(raw)
    path.write_bytes(bytes(raw))
    return path


def _values_tag(raw: bytearray, count: int) -> int:
    # the full tag of a miDOUBLE (9) values element of ``count`` numbers, little-endian
    at = raw.find(struct.pack("<II", 9, 8 * count))
    assert at > 128
    return at


@pytest.mark.parametrize("code", [68, 8, 0, 14, 15])
def test_mat_values_of_an_unknown_data_type_are_refused_in_one_line(tmp_path, code):
    # 68 beyond the table, 8 a reserved code, 0 none, 14 and 15 an array and a
    # compressed element where values belong: each was a dead process in SciPy
    def patch(raw):
        at = _values_tag(raw, 64)
        raw[at:at + 4] = struct.pack("<I", code)
    path = _mat(tmp_path, f"type{code}.mat", {"fs": 100.0, "x": np.arange(64.0)}, patch)
    line = _one_error_line(_bands(path), path)
    assert "is not a readable MATLAB file (the variable at byte" in line
    assert f"data type {code}" in line


def test_mat_complex_flag_without_its_imaginary_part_is_refused(tmp_path):
    # a complex array reads two values elements; with one, SciPy read the next
    # variable's miMATRIX tag (code 14) as values
    def patch(raw):
        # x's flags word lies 24 bytes before its name (a small element: miINT8, 1 byte)
        at = raw.find(b"\x01\x00\x01\x00x\x00\x00\x00") - 24
        flags = struct.unpack_from("<I", raw, at)[0]
        assert flags & 0xFF == 6                   # mxDOUBLE_CLASS
        struct.pack_into("<I", raw, at, flags | 1 << 11)
    path = _mat(tmp_path, "complex.mat", {"x": np.arange(64.0), "fs": 100.0}, patch)
    line = _one_error_line(_bands(path), path)
    assert "is not a readable MATLAB file" in line


def test_every_mat_v5_file_scipy_ships_and_reads_passes_the_walk():
    import warnings

    scipy_io = pytest.importorskip("scipy.io")
    from scalesieve.io.mat5_elements import mat5_damage

    folder = os.path.join(os.path.dirname(scipy_io.matlab.__file__), "tests", "data")
    files = sorted(glob.glob(os.path.join(folder, "*.mat")))
    if not files:
        pytest.skip("this SciPy was installed without its test data")
    walked = 0
    for f in files:
        with open(f, "rb") as fh:
            if fh.read(10) != b"MATLAB 5.0":
                continue
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                scipy_io.loadmat(f)
        except Exception:  # noqa: BLE001 - files SciPy itself refuses are not the point
            continue
        assert mat5_damage(f) is None, os.path.basename(f)
        walked += 1
    assert walked >= 20


def test_mat_files_scipy_writes_pass_the_walk(tmp_path):
    scipy_io = pytest.importorskip("scipy.io")
    from scipy import sparse

    from scalesieve.io.mat5_elements import mat5_damage

    variables = {"fs": 100.0, "x": np.arange(12.0).reshape(3, 4), "z": np.arange(3) + 1j,
                 "i": np.arange(5, dtype=np.int16), "s": "a label", "b": np.array([True]),
                 "c": np.array([np.arange(3.0), "text"], dtype=object),
                 "st": {"gain": 2.0, "names": ["a", "b"]}, "sp": sparse.eye(4, format="csc"),
                 "e": np.zeros((0, 3))}
    for compress in (False, True):
        path = tmp_path / f"all{compress}.mat"
        scipy_io.savemat(path, variables, do_compression=compress)
        scipy_io.loadmat(path)
        assert mat5_damage(str(path)) is None
