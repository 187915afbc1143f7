"""Time columns of text tables: ISO 8601, clock time, units, jumps; the clock carried on.

Timestamps are checked against Python's ``datetime.fromisoformat`` (the
standard library's ISO 8601 reader) and csv module; the scipy WAV folder
(scipy/io/tests/data, shipped with SciPy) against soundfile itself.
"""

from __future__ import annotations

import csv
import glob
import json
import os
import subprocess
import sys
from datetime import datetime, timedelta

import numpy as np
import pytest
import soundfile as sf

from scalesieve.errors import ScalesieveError
from scalesieve.io.readers import read_recording


def _write(path, rows, header="timestamp,a,b", sep=","):
    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write(header.replace(",", sep) + "\n")
        for r in rows:
            fh.write(sep.join(r) + "\n")
    return path


def _iso_rows(start: str, step_ms: float, n: int, sep="T", fmt_offset="", skip=()):
    t0 = datetime.fromisoformat(start)
    rows = []
    for i in range(n):
        if i in skip:
            continue
        t = t0 + timedelta(milliseconds=step_ms * i)
        rows.append([t.isoformat(sep=sep, timespec="milliseconds") + fmt_offset,
                     repr(float(i)), repr(float(-i))])
    return rows


@pytest.mark.parametrize("sep", ["T", " "])
def test_iso_timestamps_across_midnight_and_month_end(tmp_path, sep):
    rows = _iso_rows("2026-01-31T23:59:59.900", 10, 40, sep=sep)
    rec = read_recording(_write(tmp_path / "m.csv", rows))
    assert rec.rate == 100.0 and rec.n == 40
    assert rec.start_time == datetime.fromisoformat(rows[0][0])
    # the clock at the last row is what the file says there
    assert rec.clock_at((rec.n - 1) / rec.rate) == datetime.fromisoformat(rows[-1][0])


def test_iso_with_offset_and_semicolon_decimal_comma(tmp_path):
    rows = [[r[0], r[1].replace(".", ","), r[2].replace(".", ",")]
            for r in _iso_rows("2026-03-29T00:59:59.000", 250, 12, fmt_offset="+01:00")]
    rec = read_recording(_write(tmp_path / "o.csv", rows, "Zeit;x;y", sep=";"))
    assert rec.rate == 4.0
    assert rec.start_time == datetime.fromisoformat("2026-03-29T00:59:59+01:00")
    assert rec.start_time.utcoffset() == timedelta(hours=1)


def test_headerless_timestamps_are_a_time_column(tmp_path):
    rows = _iso_rows("2026-06-01T12:00:00", 1, 20)
    p = tmp_path / "h.csv"
    with open(p, "w") as fh:
        fh.writelines(",".join(r) + "\n" for r in rows)
    rec = read_recording(p)
    assert rec.rate == 1000.0 and rec.channels == 2


def test_elapsed_clock_time_and_units_min_h(tmp_path):
    p = _write(tmp_path / "c.csv", [[f"00:00:{i * 0.5:06.3f}", "1", "2"] for i in range(30)],
               "elapsed,a,b")
    rec = read_recording(p)
    assert rec.rate == 2.0 and rec.start_time is None
    # 1 min steps = 1/60 Hz; 0.5 h steps = 1/1800 Hz (the units' definitions)
    p = _write(tmp_path / "m.csv", [[str(i), "1", "2"] for i in range(5)], "time [min],a,b")
    assert read_recording(p).rate == pytest.approx(1 / 60)
    p = _write(tmp_path / "h.csv", [[str(i / 2), "1", "2"] for i in range(5)], "t_h,a,b")
    assert read_recording(p).rate == pytest.approx(1 / 1800)
    p = _write(tmp_path / "u.csv", [[str(i * 50), "1", "2"] for i in range(5)], "time [us],a,b")
    assert read_recording(p).rate == pytest.approx(20000)


def test_clock_jump_is_an_error_naming_the_line_or_a_reported_fill(tmp_path):
    rows = _iso_rows("2026-03-01T08:00:00", 100, 30, skip=range(10, 15))
    p = _write(tmp_path / "j.csv", rows)
    with pytest.raises(ScalesieveError) as err:
        read_recording(p)
    # line 1 is the header, rows 0..9 are lines 2..11, the row after the jump line 12
    assert err.value.line == 12 and "jumps by 0.6 s" in err.value.message
    rec = read_recording(p, fill_gaps="linear")
    assert rec.n == 30 and rec.rate == 10.0
    # the channels held the row index: linear interpolation gives it back exactly
    np.testing.assert_allclose(rec.samples[:, 0], np.arange(30.0))
    assert len(rec.warnings) == 1 and "filled 5 samples" in rec.warnings[0]


def test_daylight_saving_jump_without_offsets_is_named(tmp_path):
    rows = [["2026-03-29 01:59:58", "1", "1"], ["2026-03-29 01:59:59", "1", "1"],
            ["2026-03-29 03:00:00", "1", "1"], ["2026-03-29 03:00:01", "1", "1"]]
    with pytest.raises(ScalesieveError, match="jumps by 1.00028 h"):
        read_recording(_write(tmp_path / "d.csv", rows))


def test_cli_json_start_time_and_csv_output_continue_the_clock(tmp_path):
    rows = _iso_rows("2026-03-31T23:59:59.000", 10, 256, skip=(100,))
    p = _write(tmp_path / "log.csv", rows)
    exe = [sys.executable, "-m", "scalesieve"]
    res = subprocess.run(exe + ["bands", str(p), "--json", "--fill-gaps", "linear"],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    doc = json.loads(res.stdout)
    assert datetime.fromisoformat(doc["start_time"]) == datetime.fromisoformat(rows[0][0])
    assert len(doc["warnings"]) == 1
    assert res.stderr.strip() == f"scalesieve: warning: {p}: {doc['warnings'][0]}"
    out = tmp_path / "out.csv"
    res = subprocess.run(exe + ["clean", str(p), "-o", str(out), "--zero", "1",
                                "--fill-gaps", "linear"], capture_output=True, text=True,
                         timeout=120)
    assert res.returncode == 0, res.stderr
    with open(out, newline="") as fh:
        table = list(csv.reader(fh))
    assert table[0][0] == "timestamp"
    t0 = datetime.fromisoformat(rows[0][0])
    for i in (0, 100, 255):
        assert datetime.fromisoformat(table[1 + i][0]) == t0 + timedelta(milliseconds=10 * i)
    assert table[1][0] == rows[0][0]  # the same ISO form as the input


SCIPY_WAVS = os.path.join(os.path.dirname(__import__("scipy").__file__), "io", "tests", "data")


def _readable_scipy_wavs():
    out = []
    for path in sorted(glob.glob(os.path.join(SCIPY_WAVS, "*.wav"))):
        try:
            sf.info(path)
        except Exception:  # soundfile refuses it: not ours to read either
            continue
        out.append(path)
    return out


@pytest.mark.skipif(not _readable_scipy_wavs(), reason="scipy ships no test WAVs here")
@pytest.mark.parametrize("path", _readable_scipy_wavs(), ids=os.path.basename)
def test_every_scipy_wav_soundfile_reads_gives_the_same_samples(path):
    want, rate = sf.read(path, dtype="float64", always_2d=True)
    rec = read_recording(path)
    assert rec.rate == rate
    np.testing.assert_array_equal(rec.samples, want)
    if "early-eof" in path:
        # the header's data chunk promises 4410 frames of 4 bytes; the file holds 236
        assert any("declares 4410 frames" in w and "holds 236" in w for w in rec.warnings)
    else:
        assert rec.warnings == ()


def test_truncated_wav_warning_in_json_and_on_stderr():
    path = os.path.join(SCIPY_WAVS, "test-44100Hz-le-1ch-4bytes-early-eof.wav")
    if not os.path.exists(path):
        pytest.skip("scipy's early-eof WAV is not installed")
    res = subprocess.run([sys.executable, "-m", "scalesieve", "bands", path, "--json",
                          "--wavelet", "haar"], capture_output=True, text=True, timeout=120)
    assert res.returncode == 0
    doc = json.loads(res.stdout)
    assert doc["start_time"] is None and "4410" in doc["warnings"][0]
    assert res.stderr.startswith("scalesieve: warning: ")


def test_whitespace_table_keeps_date_and_time_together(tmp_path):
    p = tmp_path / "ws.txt"
    p.write_text("# logger\n2026-03-01 08:00:00.00 1.0 2.0\n2026-03-01 08:00:00.10 1.5 2.5\n"
                 "2026-03-01 08:00:00.20 1.7 2.7\n")
    rec = read_recording(p)
    assert rec.rate == 10.0 and rec.channels == 2
    assert rec.start_time == datetime.fromisoformat("2026-03-01 08:00:00.00")


def test_channel_by_name_in_a_text_table(tmp_path):
    p = _write(tmp_path / "n.csv", [[str(i / 10), str(i), str(-i)] for i in range(8)],
               "time [s],strain_1 [µm/m],strain_2 [µm/m]")
    rec = read_recording(p, channel="strain_2")          # the name without its unit
    assert rec.channel_names == ["strain_2 [µm/m]"] and rec.units == ["µm/m"]
    np.testing.assert_array_equal(rec.samples[:, 0], -np.arange(8.0))
    with pytest.raises(ScalesieveError, match="names no channel"):
        read_recording(p, channel="strain_9")
