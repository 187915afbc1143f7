"""Measurement formats: every file is written by the format's own library and read
back through Scalesieve (rate, channel count, names, units, samples equal).

References: npTDMS, edfio, h5py, scipy.io.savemat, asammdf and openpyxl write
the files; the expected values are what was handed to them.
"""

from __future__ import annotations

import datetime
import subprocess
import sys
import warnings

import numpy as np
import pytest

from scalesieve.errors import ScalesieveError
from scalesieve.io.readers import probe, read_recording

nptdms = pytest.importorskip("nptdms")
edfio = pytest.importorskip("edfio")
h5py = pytest.importorskip("h5py")
asammdf = pytest.importorskip("asammdf")
openpyxl = pytest.importorskip("openpyxl")
scipy_io = pytest.importorskip("scipy.io")

RNG = np.random.default_rng(20260301)


def _signals(n=3000, k=2):
    return RNG.normal(0.0, 1.0, (n, k))


def test_tdms_round_trip_with_group_names_units_rate_and_clock(tmp_path):
    x = _signals()
    start = np.datetime64("2026-03-01T08:15:30.250000")
    p = tmp_path / "rig.tdms"
    with nptdms.TdmsWriter(str(p)) as w:
        w.write_segment([
            nptdms.ChannelObject("run_a", "strain_1", x[:, 0],
                                 properties={"wf_increment": 1 / 2000, "unit_string": "um/m",
                                             "wf_start_time": start}),
            nptdms.ChannelObject("run_a", "strain_2", x[:, 1],
                                 properties={"wf_increment": 1 / 2000, "unit_string": "um/m",
                                             "wf_start_time": start}),
            nptdms.ChannelObject("run_b", "load", x[:500, 0],
                                 properties={"wf_increment": 0.01, "unit_string": "kN"})])
    with pytest.raises(ScalesieveError, match="--group"):
        read_recording(p)
    rec = read_recording(p, group="run_a")
    assert rec.rate == 2000.0 and rec.channels == 2
    assert rec.channel_names == ["strain_1", "strain_2"] and rec.units == ["um/m", "um/m"]
    np.testing.assert_array_equal(rec.samples, x)
    # npTDMS reports wf_start_time as UTC
    assert rec.start_time == datetime.datetime.fromisoformat("2026-03-01T08:15:30.250+00:00")
    one = read_recording(p, group="run_a", channel="strain_2")
    np.testing.assert_array_equal(one.samples[:, 0], x[:, 1])
    facts = probe(p)
    assert facts["kind"] == "measurement" and facts["frames"] == 3000


def test_edf_round_trip_and_rates_that_differ(tmp_path):
    # edfio stores 16-bit digital values: compare with what edfio itself reads back.
    a = np.sin(np.arange(2500) / 7.0) * 100
    b = np.cos(np.arange(10000) / 11.0) * 20
    edf = edfio.Edf([edfio.EdfSignal(a, 250, label="trace_a", physical_dimension="uV"),
                     edfio.EdfSignal(b, 1000, label="trace_b", physical_dimension="mV")],
                    starttime=datetime.time(22, 30, 5),
                    recording=edfio.Recording(startdate=datetime.date(2026, 1, 31)))
    p = tmp_path / "lab.edf"
    edf.write(p)
    back = edfio.read_edf(p)
    with pytest.raises(ScalesieveError, match="different rates.*--channel"):
        read_recording(p)
    rec = read_recording(p, channel="trace_b")
    assert rec.rate == 1000.0 and rec.channel_names == ["trace_b"] and rec.units == ["mV"]
    np.testing.assert_array_equal(rec.samples[:, 0], back.signals[1].data)
    rec0 = read_recording(p, channel=0)
    assert rec0.rate == 250.0 and rec0.n == 2500
    np.testing.assert_allclose(rec0.samples[:, 0], a, atol=(200 / 65535) * 2)
    assert rec0.start_time == datetime.datetime.fromisoformat("2026-01-31T22:30:05")
    assert probe(p)["channels"] == 2
    # the EDF header alone (without edfio) gives the longest signal's samples
    assert probe(p)["frames"] == 10000


def test_bdf_round_trip(tmp_path):
    a = np.linspace(-1, 1, 2048)
    p = tmp_path / "lab.bdf"
    edfio.Bdf([edfio.BdfSignal(a, 512, label="x", physical_dimension="V")]).write(p)
    rec = read_recording(p)
    assert rec.rate == 512.0 and rec.channel_names == ["x"] and rec.units == ["V"]
    np.testing.assert_array_equal(rec.samples[:, 0], edfio.read_bdf(p).signals[0].data)


def test_edf_with_annotations_only_is_refused(tmp_path):
    p = tmp_path / "notes.edf"
    edfio.Edf([], annotations=[edfio.EdfAnnotation(1.0, None, "lights off")]).write(p)
    with pytest.raises(ScalesieveError, match="annotations only"):
        read_recording(p)


def test_mat_v5_round_trip_picks_dataset_and_rate(tmp_path):
    x = _signals(1200, 3)
    p = tmp_path / "bench.mat"
    scipy_io.savemat(p, {"fs": 5000.0, "accel": x, "speed": x[:, 0] * 2, "label": "run 4"})
    with pytest.raises(ScalesieveError, match="--dataset"):
        read_recording(p)
    rec = read_recording(p, dataset="accel")
    assert rec.rate == 5000.0 and rec.channels == 3
    np.testing.assert_array_equal(rec.samples, x)
    assert probe(p)["frames"] == 1200
    speed = read_recording(p, dataset="speed")
    np.testing.assert_array_equal(speed.samples[:, 0], x[:, 0] * 2)


def test_mat_without_rate_needs_rate_option(tmp_path):
    p = tmp_path / "norate.mat"
    scipy_io.savemat(p, {"y": np.arange(100.0)})
    with pytest.raises(ScalesieveError, match="--rate"):
        read_recording(p)
    assert read_recording(p, rate=10).rate == 10.0


def test_mat_nan_run_named_or_filled(tmp_path):
    y = np.arange(200.0)
    y[50:54] = np.nan
    p = tmp_path / "nan.mat"
    scipy_io.savemat(p, {"rate": 100.0, "y": y})
    with pytest.raises(ScalesieveError, match="NaN from sample 50 to 53"):
        read_recording(p)
    rec = read_recording(p, fill_gaps="linear")
    # linear interpolation between 49 and 54 gives the line itself back
    np.testing.assert_allclose(rec.samples[:, 0], np.arange(200.0))
    assert any("filled 4 NaN samples" in w for w in rec.warnings)


def test_mat_v73_through_h5py(tmp_path):
    # A v7.3 file is HDF5 behind a 512-byte MATLAB header, column-major.
    x = _signals(800, 2)
    p = tmp_path / "v73.mat"
    with h5py.File(p, "w", userblock_size=512) as f:
        f.create_dataset("sig", data=x.T).attrs["MATLAB_class"] = np.bytes_("double")
        f.create_dataset("fs", data=np.array([[250.0]]))
    with open(p, "r+b") as fh:
        fh.write(b"MATLAB 7.3 MAT-file, Platform: GLNXA64".ljust(116, b" "))
    rec = read_recording(p)
    assert rec.rate == 250.0 and rec.channels == 2
    np.testing.assert_array_equal(rec.samples, x)


def test_hdf5_round_trip_and_unusable_datasets(tmp_path):
    x = _signals(1000, 2)
    p = tmp_path / "script.h5"
    with h5py.File(p, "w") as f:
        d = f.create_dataset("run1/vibration", data=x)
        d.attrs["sample_rate"] = 25600.0
        d.attrs["unit"] = "m/s^2"
        f.create_dataset("run1/cube", data=np.zeros((3, 3, 3)))
        f.create_group("empty")
    rec = read_recording(p)
    assert rec.rate == 25600.0 and rec.units == ["m/s^2", "m/s^2"]
    np.testing.assert_array_equal(rec.samples, x)
    assert probe(p)["frames"] == 1000
    with pytest.raises(ScalesieveError, match="not a 1-D or 2-D"):
        read_recording(p, dataset="run1/cube")
    q = tmp_path / "bad.h5"
    with h5py.File(q, "w") as f:
        f.create_dataset("cube", data=np.zeros((3, 3, 3)))
        f.create_dataset("names", data=np.array([b"a", b"b"]))
        f.create_group("nothing")
    with pytest.raises(ScalesieveError) as err:
        read_recording(q)
    assert "3-D" in err.value.message and "empty groups" in err.value.message


def test_mdf4_round_trip_groups_units_and_clock(tmp_path):
    t = np.arange(4000) / 4000.0
    x = _signals(4000, 2)
    m = asammdf.MDF(version="4.10")
    m.append([asammdf.Signal(x[:, 0], t, name="accel", unit="g"),
              asammdf.Signal(x[:, 1], t, name="torque", unit="Nm")], acq_name="fast")
    m.append([asammdf.Signal(np.arange(10.0), np.arange(10.0), name="temp", unit="degC")],
             acq_name="slow")
    m.header.start_time = datetime.datetime(2026, 2, 28, 23, 59, 58,
                                            tzinfo=datetime.timezone.utc)
    p = tmp_path / "drive.mf4"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m.save(p, overwrite=True)
    m.close()
    with pytest.raises(ScalesieveError, match="different time bases"):
        read_recording(p)
    rec = read_recording(p, group="fast")
    assert rec.rate == 4000.0 and rec.channel_names == ["accel", "torque"]
    assert rec.units == ["g", "Nm"]
    np.testing.assert_array_equal(rec.samples, x)
    assert rec.start_time == datetime.datetime.fromisoformat("2026-02-28T23:59:58+00:00")
    assert probe(p)["frames"] == 4000


def test_xlsx_first_sheet_as_a_text_table(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["timestamp", "pressure [bar]", "flow [l/min]"])
    t0 = datetime.datetime(2026, 4, 30, 23, 59, 59)
    x = _signals(50, 2)
    for i in range(50):
        ws.append([t0 + datetime.timedelta(milliseconds=20 * i), *x[i].tolist()])
    wb.create_sheet("notes").append(["ignored"])
    p = tmp_path / "logger.xlsx"
    wb.save(p)
    rec = read_recording(p)
    assert rec.rate == 50.0 and rec.channel_names == ["pressure [bar]", "flow [l/min]"]
    assert rec.units == ["bar", "l/min"]
    # the values as openpyxl itself reads them back (xlsx stores decimal text)
    got = [r[1:] for r in openpyxl.load_workbook(p).active.iter_rows(min_row=2,
                                                                       values_only=True)]
    np.testing.assert_array_equal(rec.samples, np.array(got, dtype=float))
    np.testing.assert_allclose(rec.samples, x, rtol=1e-15)
    assert rec.start_time == datetime.datetime.fromisoformat("2026-04-30T23:59:59")


def test_missing_library_is_one_line_naming_the_extra(tmp_path):
    p = tmp_path / "rig.tdms"
    with nptdms.TdmsWriter(str(p)) as w:
        w.write_segment([nptdms.ChannelObject("g", "a", np.arange(64.0),
                                              properties={"wf_increment": 0.01})])
    code = ("import sys; sys.modules['nptdms'] = None\n"
            "from scalesieve.cli import main\n"
            f"sys.exit(main(['bands', {str(p)!r}, '--wavelet', 'haar']))")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120)
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "scalesieve[formats]" in lines[0] and "npTDMS" in lines[0]


def test_memory_guard_estimates_a_measurement_file_before_reading(tmp_path):
    from scalesieve import memory_guard

    p = tmp_path / "big.h5"
    with h5py.File(p, "w") as f:
        f.create_dataset("x", shape=(2_000_000, 4), dtype="f8")   # declared, not written
        f["x"].attrs["fs"] = 1000.0
    with pytest.raises(ScalesieveError, match=r"needs about .* [MG]iB") as err:
        memory_guard.check(p, available=32 << 20)
    assert "2,000,000 samples x 4 channels" in err.value.message


def test_mat_whose_dimensions_claim_more_than_the_file_is_refused_before_reading(tmp_path):
    # MAT-File Format (MathWorks, Level 5): 128-byte header, then the miMATRIX tag,
    # the array-flags element (16 bytes) and the dimensions element (tag, then int32s).
    import struct
    import tracemalloc

    p = tmp_path / "claim.mat"
    scipy_io.savemat(p, {"fs": 100.0, "x": np.arange(64.0)[:, None]})
    raw = bytearray(p.read_bytes())
    assert struct.unpack("<II", raw[128:136])[0] == 14          # miMATRIX
    assert struct.unpack("<II", raw[152:160]) == (5, 8)           # miINT32 dims, 2 of them
    raw[160:164] = struct.pack("<i", 1 << 30)
    p.write_bytes(bytes(raw))
    tracemalloc.start()
    try:
        with pytest.raises(ScalesieveError, match="declares more values"):
            read_recording(p)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 64 << 20
