"""Measurement files and NumPy arrays in blocks, and gaps filled block by block.

Every file is written by its format's own library (npTDMS, h5py, edfio, NumPy's
``save``/``savez``/``savez_compressed``); the samples read in blocks are compared
with what that library reads back, and the outputs of ``clean``, ``bands`` and
``events`` forced into many small blocks with those of the whole-array path
(itself held to PyWavelets in tests/stream/test_stream_clean.py, and here once
more: VisuShrink of the whole recording by PyWavelets, Donoho & Johnstone 1994).
Filled gaps are compared, sample for sample, with ``numpy.interp`` over the row
index, which is how ``io.gaps.fill_linear`` is defined.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.errors import ScalesieveError
from scalesieve.io.readers import read_recording
from scalesieve.stream import sources
from scalesieve.stream.sources import open_source

from test_stream_clean import _visushrink

nptdms = pytest.importorskip("nptdms")
h5py = pytest.importorskip("h5py")
edfio = pytest.importorskip("edfio")
asammdf = pytest.importorskip("asammdf")

RATE = 1001                       # EDF keeps whole records of one second: 21 of them
N = 21 * RATE                     # 21 021 samples, an odd length
BLOCK = 1009                      # frames per block: some twenty blocks, none a power of 2


@pytest.fixture(autouse=True)
def small_blocks(monkeypatch):
    monkeypatch.setattr(sources, "READ_FRAMES", BLOCK)


def _signal(channels: int, seed: int = 0) -> np.ndarray:
    """A gearbox test rig: a shaft tone, a slow drift, noise, and a train of impacts."""
    rng = np.random.default_rng(seed)
    t = np.arange(N) / RATE
    x = np.stack([0.4 * np.sin(2 * np.pi * (37 + 11 * k) * t) + 0.3 * t / t[-1]
                  + 0.05 * rng.standard_normal(N) for k in range(channels)], axis=1)
    for i in range(700, N - 100, 2900):
        for k in range(channels):
            x[i + 41 * k:i + 41 * k + 6, k] += 1.5
    return x


def _tdms(path, x):
    with nptdms.TdmsWriter(str(path)) as w:
        w.write_segment([nptdms.ChannelObject("rig", f"strain_{k + 1}", x[:, k],
                                              properties={"wf_increment": 1 / RATE})
                         for k in range(x.shape[1])])
    return [f"strain_{k + 1}" for k in range(x.shape[1])]


def _hdf5(path, x):
    with h5py.File(path, "w") as f:
        f.create_dataset("run/vibration", data=x, chunks=(512, x.shape[1])) \
            .attrs["sample_rate"] = float(RATE)
    return ["vibration"] if x.shape[1] == 1 else [f"vibration[{k}]" for k in range(x.shape[1])]


def _mat73(path, x):
    # a v7.3 file is HDF5 behind a 512-byte MATLAB header, stored column-major
    with h5py.File(path, "w", userblock_size=512) as f:
        f.create_dataset("sig", data=x.T.copy()).attrs["MATLAB_class"] = np.bytes_("double")
        f.create_dataset("fs", data=np.array([[float(RATE)]]))
    with open(path, "r+b") as fh:
        fh.write(b"MATLAB 7.3 MAT-file, Platform: GLNXA64".ljust(116, b" "))
    return ["sig"] if x.shape[1] == 1 else [f"sig[{k}]" for k in range(x.shape[1])]


def _edf(path, x):
    names = [f"trace_{k}" for k in range(x.shape[1])]
    edfio.Edf([edfio.EdfSignal(x[:, k], RATE, label=names[k], physical_dimension="mV")
               for k in range(x.shape[1])]).write(path)
    return names


def _mdf(path, x):
    names = ["accel", "torque"][:x.shape[1]]
    t = np.arange(N) / RATE
    m = asammdf.MDF(version="4.10")
    m.append([asammdf.Signal(x[:, k], t, name=names[k], unit="g") for k in range(x.shape[1])],
             acq_name="drive")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m.save(path, overwrite=True)
    m.close()
    return names


def _npy(path, x):
    np.save(path, x)
    return [f"ch{k}" for k in range(x.shape[1])]


def _npy_fortran(path, x):
    np.save(path, np.asfortranarray(x))        # a column-major array: channel by channel
    return [f"ch{k}" for k in range(x.shape[1])]


def _npz(path, x):
    np.savez(path, accel=x, fs=np.float64(RATE))                    # stored: memory-mapped
    return ["accel"] if x.shape[1] == 1 else [f"accel[{k}]" for k in range(x.shape[1])]


def _npz_compressed(path, x):
    names = [f"mic_{k}" for k in range(x.shape[1])]
    # channels by rows (time the longer axis), deflated: inflated as a stream per channel
    np.savez_compressed(path, takes=x.T.copy(), fs=np.int64(RATE),
                        channel_names=np.array(names))
    return names


def _npz_compressed_rows(path, x):
    np.savez_compressed(path, takes=x, rate=np.float64(RATE))    # frames side by side
    return ["takes"] if x.shape[1] == 1 else [f"takes[{k}]" for k in range(x.shape[1])]


MAKERS = {"tdms": (_tdms, ".tdms", []), "hdf5": (_hdf5, ".h5", []),
          "mat73": (_mat73, ".mat", []), "edf": (_edf, ".edf", []), "mdf": (_mdf, ".mf4", []),
          "npy": (_npy, ".npy", ["--rate", str(RATE)]),
          "npy-fortran": (_npy_fortran, ".npy", ["--rate", str(RATE)]),
          "npz": (_npz, ".npz", []), "npz-compressed": (_npz_compressed, ".npz", []),
          "npz-compressed-rows": (_npz_compressed_rows, ".npz", [])}


def _library_read(kind, path, x):
    """What the format's own library reads back (EDF keeps 16-bit digital values)."""
    if kind == "edf":
        sigs = edfio.read_edf(path).signals
        return np.stack([s.data for s in sigs], axis=1)
    if kind == "mdf":
        with asammdf.MDF(path) as m:
            return np.stack([m.get(c).samples for c in ("accel", "torque")[:x.shape[1]]],
                            axis=1)
    if kind == "tdms":
        g = nptdms.TdmsFile.read(str(path))["rig"]
        return np.stack([c[:] for c in g.channels()], axis=1)
    if kind.startswith("npz"):
        with np.load(path) as z:
            a = z["accel"] if "accel" in z else z["takes"]
        return a if a.shape[0] >= a.shape[1] else a.T
    if kind.startswith("npy"):
        return np.load(path)
    with h5py.File(path, "r") as f:
        return f["run/vibration"][()] if kind == "hdf5" else f["sig"][()].T


@pytest.fixture(params=sorted(MAKERS))
def kind(request):
    return request.param


def _file(tmp_path, kind, channels, x=None):
    make, ext, opts = MAKERS[kind]
    x = _signal(channels) if x is None else x
    path = tmp_path / f"rig{ext}"
    names = make(path, x)
    return path, names, opts, x


def _run(capsys, monkeypatch, args, blocks):
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16 if blocks else 1 << 40)
    code = main(args)
    out = capsys.readouterr()
    assert code == 0, out.err
    said = "in blocks" in out.err
    assert said == blocks, out.err
    return out


@pytest.mark.parametrize("channels", [1, 2])
def test_blocks_are_what_the_library_reads(tmp_path, kind, channels):
    path, names, opts, x = _file(tmp_path, kind, channels)
    rate = float(RATE) if opts else None
    src = open_source(str(path), rate=rate)
    assert src.frames == N and src.rate == RATE and src.names == names
    want = _library_read(kind, path, x)
    got = np.concatenate(list(src.blocks()))
    np.testing.assert_array_equal(got, want)                            # bit for bit
    np.testing.assert_array_equal(got, read_recording(path, rate=rate).samples)
    # any stretch, in blocks of any size, the wrap's tail read first (stream.wrap)
    np.testing.assert_array_equal(np.concatenate(list(src.blocks(333, N - 2000))),
                                  want[N - 2000:])
    np.testing.assert_array_equal(np.concatenate(list(src.blocks(100, 5000, 5777))),
                                  want[5000:5777])
    pick = open_source(str(path), channel=names[-1], rate=rate)
    np.testing.assert_array_equal(np.concatenate(list(pick.blocks())), want[:, -1:])
    assert pick.names == [names[-1]] and pick.pick == channels - 1


@pytest.mark.parametrize("channels,channel", [(1, None), (2, None), (2, "1"), (2, "name")])
def test_clean_bands_and_events_in_blocks_are_the_whole_array_ones(tmp_path, kind, channels,
                                                                   channel, capsys,
                                                                   monkeypatch):
    path, names, opts, x = _file(tmp_path, kind, channels)
    if channel == "name":
        opts = opts + ["--channel", names[1]]
    elif channel is not None:
        opts = opts + ["--channel", channel]
    spec = ["--wavelet", "db4", "--level", "5"]
    outs = {}
    for blocks in (False, True):
        out = tmp_path / f"clean-{blocks}.wav"
        _run(capsys, monkeypatch, ["clean", str(path), "-o", str(out), "--threshold",
                                   "universal", "--subtype", "DOUBLE", *spec, *opts], blocks)
        y, sr = sf.read(out, always_2d=True)
        assert sr == RATE
        bands = json.loads(_run(capsys, monkeypatch, ["bands", str(path), "--json", *spec,
                                                      *opts], blocks).out)
        events = json.loads(_run(capsys, monkeypatch, ["events", str(path), "--json",
                                                       "--wavelet", "db4", *opts],
                                 blocks).out)
        outs[blocks] = (y, bands, events)
    (y0, b0, e0), (y1, b1, e1) = outs[False], outs[True]
    np.testing.assert_allclose(y1, y0, rtol=0, atol=1e-12)
    assert [c["name"] for c in b1["channels"]] == [c["name"] for c in b0["channels"]]
    assert [c["index"] for c in b1["channels"]] == [c["index"] for c in b0["channels"]]
    for c0, c1 in zip(b0["channels"], b1["channels"]):
        for r0, r1 in zip(c0["bands"], c1["bands"]):
            assert r1["name"] == r0["name"] and r1["count"] == r0["count"]
            for field in ("energy", "energy_fraction", "coef_energy", "rms", "peak"):
                assert r1[field] == pytest.approx(r0[field], rel=1e-9, abs=1e-300)
    assert b1["warnings"] == b0["warnings"] and b1["rate"] == b0["rate"] == RATE
    assert e1 == e0 and e0["events"]                     # the impacts are found, the same
    if kind == "hdf5" and channels == 1:
        # and both are PyWavelets' VisuShrink on the whole recording
        np.testing.assert_allclose(y1[:, 0], _visushrink(x[:, 0], "db4", 5, "symmetric"),
                                   rtol=0, atol=1e-12)


def _holes(x):
    """Logger drop-outs: a leading gap, gaps within a block, one longer than three blocks,
    one across a block edge, and a trailing gap; channel 1 has its own."""
    x = x.copy()
    x[:5, 0] = np.nan
    x[2000:2011, 0] = np.nan
    x[BLOCK * 4 - 3:BLOCK * 4 + 4, 0] = np.nan
    x[6000:6000 + 3 * BLOCK + 17, 0] = np.nan
    x[-9:, 0] = np.nan
    if x.shape[1] > 1:
        x[BLOCK * 2 - 1:BLOCK * 2 + 1, 1] = np.nan
        x[15_000:15_400, 1] = np.nan
    return x


def _fill_reference(x):
    """numpy.interp over the row index, per column (the definition of a linear fill)."""
    y = x.copy()
    index = np.arange(x.shape[0], dtype=np.float64)
    for k in range(x.shape[1]):
        gap = np.isnan(y[:, k])
        y[gap, k] = np.interp(index[gap], index[~gap], y[~gap, k])
    return y


@pytest.mark.parametrize("kind", ["hdf5", "npy", "npz-compressed", "tdms", "mdf"])
@pytest.mark.parametrize("channels", [1, 2])
def test_gaps_are_filled_in_blocks_sample_for_sample(tmp_path, kind, channels):
    path, names, opts, x = _file(tmp_path, kind, channels, _holes(_signal(channels)))
    rate = float(RATE) if opts else None
    whole = read_recording(path, rate=rate, fill_gaps="linear")
    src = open_source(str(path), rate=rate, fill_gaps="linear")
    want = _fill_reference(x)
    np.testing.assert_array_equal(whole.samples, want)
    for frames, start, stop in ((BLOCK, 0, N), (97, 0, N), (BLOCK, 6100, 9000),
                                (250, 3, 6001), (BLOCK, N - 4, N), (4000, 7000, N)):
        got = np.concatenate(list(src.blocks(frames, start, stop)))
        np.testing.assert_array_equal(got, want[start:stop])            # bit for bit
        assert all(b.shape[0] == frames for b in list(src.blocks(frames, start, stop))[:-1])
    assert src.warnings() == list(whole.warnings)
    assert any("filled" in w for w in src.warnings())
    # without --fill-gaps the same one line as the whole-file reader
    with pytest.raises(ScalesieveError) as a:
        read_recording(path, rate=rate)
    with pytest.raises(ScalesieveError) as b:
        open_source(str(path), rate=rate)
    assert b.value.message == a.value.message and "NaN from sample 0 to 4" in a.value.message


@pytest.mark.parametrize("kind", ["npz", "edf"])
def test_the_commands_fill_gaps_in_blocks_as_the_whole_array(tmp_path, kind, capsys,
                                                             monkeypatch):
    x = _holes(_signal(2))
    notes = {}
    if kind == "edf":
        x = np.nan_to_num(x, nan=0.0)         # EDF holds integers: its NaN-free twin
    path, names, opts, x = _file(tmp_path, kind, 2, x)
    outs = {}
    for blocks in (False, True):
        out = tmp_path / f"clean-{blocks}.csv"
        res = _run(capsys, monkeypatch, ["clean", str(path), "-o", str(out), "--zero", "1",
                                         "--fill-gaps", "linear", *opts], blocks)
        warned = [w for w in res.err.splitlines() if "warning" in w]
        bands = json.loads(_run(capsys, monkeypatch, ["bands", str(path), "--json",
                                                      "--fill-gaps", "linear", *opts],
                                blocks).out)
        outs[blocks] = (np.loadtxt(out, delimiter=",", skiprows=1), warned, bands)
        notes[blocks] = [w for w in res.err.splitlines() if "note" in w]
    (y0, w0, b0), (y1, w1, b1) = outs[False], outs[True]
    np.testing.assert_allclose(y1, y0, rtol=0, atol=1e-12)
    assert w1 == w0 and b1["warnings"] == b0["warnings"]
    # the pass that checks the file first is counted: it and the clean's one
    assert "2 passes over the file" in notes[True][0]
    if kind == "npz":
        assert any("filled" in w for w in w0)
    for c0, c1 in zip(b0["channels"], b1["channels"]):
        for r0, r1 in zip(c0["bands"], c1["bands"]):
            assert r1["energy"] == pytest.approx(r0["energy"], rel=1e-9, abs=1e-300)


def test_float_audio_gaps_are_filled_in_blocks(tmp_path, capsys, monkeypatch):
    x = _holes(_signal(2)) * 0.5
    path = tmp_path / "mic.wav"
    sf.write(path, x, RATE, subtype="DOUBLE")
    whole = read_recording(path, fill_gaps="linear")
    src = open_source(str(path), fill_gaps="linear")
    want = _fill_reference(x)
    np.testing.assert_array_equal(whole.samples, want)
    np.testing.assert_array_equal(np.concatenate(list(src.blocks())), want)
    np.testing.assert_array_equal(np.concatenate(list(src.blocks(300, 6500, 9999))),
                                  want[6500:9999])
    one = open_source(str(path), channel=1, fill_gaps="linear")
    np.testing.assert_array_equal(np.concatenate(list(one.blocks())), want[:, 1:])
    outs = []
    for blocks in (False, True):
        out = tmp_path / f"o{blocks}.wav"
        _run(capsys, monkeypatch, ["clean", str(path), "-o", str(out), "--zero", "1,2",
                                   "--fill-gaps", "linear"], blocks)
        outs.append(sf.read(out)[0])
    np.testing.assert_allclose(outs[1], outs[0], rtol=0, atol=1e-12)
    # an infinite sample with gaps to fill: the whole-file reader's one line
    x[100, 1] = np.inf
    sf.write(path, x, RATE, subtype="DOUBLE")
    with pytest.raises(ScalesieveError) as a:
        read_recording(path, fill_gaps="linear")
    with pytest.raises(ScalesieveError) as b:
        open_source(str(path), fill_gaps="linear")
    assert b.value.message == a.value.message and "infinite" in a.value.message


def test_a_channel_of_gaps_only_is_refused_as_whole(tmp_path):
    x = _signal(2)
    x[:, 1] = np.nan
    path = tmp_path / "dead.npy"
    np.save(path, x)
    with pytest.raises(ScalesieveError, match="only NaN") as a:
        read_recording(path, rate=RATE, fill_gaps="linear")
    with pytest.raises(ScalesieveError, match="only NaN") as b:
        open_source(str(path), rate=RATE, fill_gaps="linear")
    assert a.value.message == b.value.message


def _damage(path, kind):
    data = bytearray(path.read_bytes())
    if kind == "npz-compressed":
        # the deflated bytes of the samples garbled in the middle: found while inflating
        mid = len(data) // 2
        data[mid:mid + 64] = bytes(64)
    elif kind == "edf":
        data[252:256] = b"x9 ?"                # the header's count of signals garbled
    elif kind == "tdms":
        del data[len(data) * 3 // 4:]          # the last segment cut short
    elif kind == "npy":
        # the header's text garbled (a .npy cut short is read up to what it holds, with
        # a warning: tests/robustness/test_shortened_files.py)
        data[12:24] = b"\xff" * 12
    else:
        del data[len(data) // 2:]
    path.write_bytes(bytes(data))


@pytest.mark.parametrize("kind", ["npz-compressed", "npy", "hdf5", "tdms", "edf", "mdf"])
def test_a_damaged_file_is_one_line_in_blocks(tmp_path, kind, capsys, monkeypatch):
    path, names, opts, x = _file(tmp_path, kind, 2)
    _damage(path, kind)
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    out = tmp_path / "out.wav"
    code = main(["clean", str(path), "-o", str(out), "--zero", "1", *opts])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and err[0].startswith("scalesieve: error: "), err
    assert "Traceback" not in err[0]
    assert not out.exists()


def test_formats_read_whole_are_refused_in_blocks_saying_why(tmp_path, capsys, monkeypatch):
    scipy_io = pytest.importorskip("scipy.io")
    path = tmp_path / "bench.mat"
    scipy_io.savemat(path, {"fs": float(RATE), "accel": _signal(1)})
    p = tmp_path / "lab.bdf"
    edfio.Bdf([edfio.BdfSignal(_signal(1)[:, 0], RATE, label="x")]).write(p)
    monkeypatch.setattr(memory_guard, "available_memory", lambda: 8 << 20)
    for f, why in ((path, "scipy.io reads a MATLAB v5 variable whole"),
                   (p, "edfio reads BDF files whole")):
        code = main(["clean", str(f), "-o", str(tmp_path / "o.wav"), "--zero", "1"])
        err = capsys.readouterr().err.strip().splitlines()
        assert code == 2 and len(err) == 1 and why in err[0], err


@pytest.mark.parametrize("clock", ["jitter", "jump", "backwards"])
def test_an_mdf_clock_is_checked_in_blocks_as_whole(tmp_path, clock):
    # the time stamps' steps checked as io.time_column.analyse_steps checks them whole
    t = np.arange(N) / RATE
    if clock == "jitter":
        t[7000] += 0.3 / RATE
    elif clock == "jump":
        t[9000:] += 2.0
    else:
        t[BLOCK * 3] = t[BLOCK * 3 - 1]
    m = asammdf.MDF(version="4.10")
    m.append([asammdf.Signal(_signal(1)[:, 0], t, name="accel")], acq_name="drive")
    path = tmp_path / "drive.mf4"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m.save(path, overwrite=True)
    m.close()
    with pytest.raises(ScalesieveError) as a:
        read_recording(path)
    with pytest.raises(ScalesieveError) as b:
        open_source(str(path))
    assert b.value.message == a.value.message and "time" in a.value.message
