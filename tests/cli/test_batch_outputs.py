"""`batch` outputs per docs/reference.md: what a failed file claims, measurement inputs
written as WAV, and the writers' warnings as `clean` prints them.

Outside references: ``scipy.io.savemat`` writes the MATLAB input, soundfile
(libsndfile) writes the Ogg Vorbis input and reads the outputs' formats back,
and ``scalesieve clean`` itself for "each output equals what clean writes" and
for the wording of its warnings.
"""

import json
import os

import numpy as np
import pytest
import soundfile as sf

from scalesieve.cli import main

RECIPE = {"scalesieve_recipe": 1,
          "transform": {"kind": "dwt", "wavelet": "db4", "level": 4, "mode": "symmetric"},
          "edits": [{"op": "gain", "levels": [1], "gain": 0.0}]}


def _warnings(err: str) -> list[str]:
    return [ln for ln in err.splitlines() if ln.startswith("scalesieve: warning: ")]


@pytest.fixture
def recipe(tmp_path):
    p = tmp_path / "recipe.json"
    p.write_text(json.dumps(RECIPE))
    return p


def _signal(n=4000):
    t = np.arange(n) / 8000
    return 0.3 * np.sin(2 * np.pi * 200 * t) + 0.01 * np.random.default_rng(3).standard_normal(n)


def _report(out):
    with open(out / "batch-report.json", encoding="utf-8") as fh:
        return json.load(fh)


def test_failed_file_claims_no_output(tmp_path, recipe, capsys):
    good, bad = tmp_path / "good.wav", tmp_path / "bad.csv"
    sf.write(good, _signal(), 8000, subtype="PCM_16")
    bad.write_text("a,b\n1,x\n")
    out = tmp_path / "out"
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "1",
                 str(good), str(bad)]) == 1
    err = capsys.readouterr().err
    files = {os.path.basename(e["input"]): e for e in _report(out)["files"]}
    assert files["good.wav"]["output"] == str(out / "good.wav")
    # the contract keeps the key; a failed file's is null (nothing was written)
    assert "output" in files["bad.csv"] and files["bad.csv"]["output"] is None
    assert not (out / "bad.csv").exists()
    assert str(out / "bad.csv") not in err


def test_measurement_input_becomes_a_wav_named_after_it(tmp_path, recipe, capsys):
    scipy_io = pytest.importorskip("scipy.io")
    src = tmp_path / "bench.mat"
    x = _signal()
    scipy_io.savemat(src, {"fs": 8000.0, "accel": x})
    out = tmp_path / "out"
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "1",
                 str(src)]) == 0
    err = capsys.readouterr().err
    target = out / "bench.wav"
    assert sorted(os.listdir(out)) == ["batch-report.json", "bench.wav"]
    info = sf.info(target)
    assert (info.samplerate, info.frames, info.subtype) == (8000, x.size, "FLOAT")
    entry = _report(out)["files"][0]
    assert entry["status"] == "ok" and entry["output"] == str(target)
    note = [w for w in entry["output_warnings"] if "written as WAV" in w]
    assert len(note) == 1 and note[0].startswith(str(target)) and ".mat" in note[0]
    assert f"scalesieve: warning: {note[0]}" in _warnings(err)
    # the same file `clean` writes for that input and recipe
    ref = tmp_path / "ref.wav"
    assert main(["clean", str(src), "-o", str(ref), "--recipe", str(recipe)]) == 0
    assert np.array_equal(sf.read(ref)[0], sf.read(target)[0])


def test_measurement_output_name_never_replaces_a_file(tmp_path, recipe, capsys):
    scipy_io = pytest.importorskip("scipy.io")
    src = tmp_path / "bench.mat"
    scipy_io.savemat(src, {"fs": 8000.0, "accel": _signal()})
    out = tmp_path / "out"
    out.mkdir()
    (out / "bench.wav").write_bytes(b"keep me")
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), str(src)]) == 2
    assert "--force" in capsys.readouterr().err
    assert (out / "bench.wav").read_bytes() == b"keep me"
    # and two inputs whose outputs would share a name are refused before any work
    other = tmp_path / "bench.wav"
    sf.write(other, _signal(), 8000)
    (out / "bench.wav").unlink()
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), str(src), str(other)]) == 2
    assert "output name" in capsys.readouterr().err
    assert os.listdir(out) == []


def test_subtype_the_output_cannot_keep_warns_once_as_clean_does(tmp_path, recipe, capsys):
    # an Ogg Vorbis recording saved under a .wav name: WAV cannot hold VORBIS
    # (libsndfile's check_format), so the writer falls back to the format's default
    assert not sf.check_format("WAV", "VORBIS")
    src = tmp_path / "field.wav"
    sf.write(src, _signal(), 8000, format="OGG", subtype="VORBIS")
    ref = tmp_path / "ref" / "field.wav"
    ref.parent.mkdir()
    assert main(["clean", str(src), "-o", str(ref), "--recipe", str(recipe)]) == 0
    clean_lines = _warnings(capsys.readouterr().err)
    assert len(clean_lines) == 1 and "VORBIS" in clean_lines[0]
    out = tmp_path / "out"
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "1",
                 str(src)]) == 0
    lines = _warnings(capsys.readouterr().err)
    target = out / "field.wav"
    assert lines == [clean_lines[0].replace(str(ref), str(target))]
    entry = _report(out)["files"][0]
    assert entry["output_warnings"] == [lines[0].removeprefix("scalesieve: warning: ")]


def _measurement_folder(folder, x):
    """One small recording per measurement format, each written by its own library
    (npTDMS, edfio, scipy.io.savemat, h5py, asammdf, openpyxl), plus a TSV table and
    files no reader takes; returns the names a folder INPUT must take."""
    import datetime
    import warnings

    nptdms = pytest.importorskip("nptdms")
    edfio = pytest.importorskip("edfio")
    h5py = pytest.importorskip("h5py")
    asammdf = pytest.importorskip("asammdf")
    openpyxl = pytest.importorskip("openpyxl")
    scipy_io = pytest.importorskip("scipy.io")

    folder.mkdir()
    with nptdms.TdmsWriter(str(folder / "rig.tdms")) as w:
        w.write_segment([nptdms.ChannelObject("run", "strain", x,
                                              properties={"wf_increment": 1 / 8000})])
    edfio.Edf([edfio.EdfSignal(x, 8000, label="trace", physical_dimension="uV")],
              starttime=datetime.time(9, 0, 0)).write(folder / "lab.edf")
    scipy_io.savemat(folder / "bench.mat", {"fs": 8000.0, "accel": x})
    with h5py.File(folder / "script.h5", "w") as f:
        f.create_dataset("vibration", data=x).attrs["sample_rate"] = 8000.0
    m = asammdf.MDF(version="4.10")
    m.append([asammdf.Signal(x, np.arange(x.size) / 8000.0, name="accel", unit="g")])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m.save(folder / "drive.mf4", overwrite=True)
    m.close()
    wb = openpyxl.Workbook()
    wb.active.append(["time [s]", "pressure [bar]"])
    for i, v in enumerate(x[:400]):
        wb.active.append([i / 8000.0, float(v)])
    wb.save(folder / "logger.xlsx")
    with open(folder / "loop.tsv", "w", encoding="utf-8") as fh:
        fh.write("time_s\tflow\n")
        fh.writelines(f"{i / 8000.0!r}\t{float(v)!r}\n" for i, v in enumerate(x))
    sf.write(folder / "pump.wav", x, 8000, subtype="FLOAT")
    # not recordings: a recipe, a picture, a hidden file, a headerless .raw
    (folder / "notes.json").write_text("{}")
    (folder / "look.png").write_bytes(b"\x89PNG\r\n\x1a\n")
    (folder / ".hidden.wav").write_bytes(b"")
    (folder / "dump.raw").write_bytes(b"\x00" * 64)
    return sorted(["rig.tdms", "lab.edf", "bench.mat", "script.h5", "drive.mf4",
                   "logger.xlsx", "loop.tsv", "pump.wav"])


def test_a_folder_input_takes_every_format_the_readers_take(tmp_path, recipe, capsys):
    from scalesieve.batch.plan import expand_inputs

    x = _signal(8000)                  # 1 s: edfio writes whole 1 s data records
    folder = tmp_path / "campaign"
    names = _measurement_folder(folder, x)
    assert [os.path.basename(p) for p in expand_inputs([str(folder)])] == names
    out = tmp_path / "out"
    assert main(["batch", "--recipe", str(recipe), "-o", str(out), "--workers", "1",
                 str(folder)]) == 0, capsys.readouterr().err
    files = _report(out)["files"]
    assert sorted(os.path.basename(e["input"]) for e in files) == names
    assert all(e["status"] == "ok" for e in files)
    # each output is what `clean` writes for that input (docs/reference.md, batch)
    for e in files:
        ref = tmp_path / ("ref-" + os.path.basename(e["output"]))
        assert main(["clean", e["input"], "-o", str(ref), "--recipe", str(recipe)]) == 0
        if ref.suffix == ".wav":
            assert np.array_equal(sf.read(ref)[0], sf.read(e["output"])[0])
        else:
            assert ref.read_bytes() == open(e["output"], "rb").read()


def test_a_folder_with_no_recordings_is_one_line(tmp_path, recipe, capsys):
    folder = tmp_path / "empty"
    folder.mkdir()
    (folder / "notes.json").write_text("{}")
    assert main(["batch", "--recipe", str(recipe), "-o", str(tmp_path / "out"),
                 str(folder)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "folder holds no recordings" in err and ".tdms" in err
