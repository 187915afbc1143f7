"""`bands` and `clean` per docs/reference.md, checked with outside readers."""

import csv
import json
import os
import subprocess
import sys
import wave

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve.cli import main

HERE = os.path.dirname(__file__)
ROOT = os.path.abspath(os.path.join(HERE, "..", ".."))
DEMO = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")
LOGGER = os.path.join(ROOT, "sample_signals", "rig_strain_logger.csv")


def run(*argv):
    return subprocess.run([sys.executable, "-m", "scalesieve", *argv], capture_output=True,
                          text=True, timeout=120)


def _wav16(path, x, rate=8000):
    # written with Python's own wave module: 16-bit PCM, mono
    pcm = np.clip(np.round(x * 32767), -32768, 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(pcm.tobytes())


def test_bands_json_contract(tmp_path):
    x = 0.1 * np.random.default_rng(0).standard_normal(16384)
    f = tmp_path / "noise.wav"
    _wav16(f, x, 48000)
    r = run("bands", str(f), "--json", "--wavelet", "db8", "--level", "8", "--mode",
            "periodization")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["file"] == "noise.wav" and d["rate"] == 48000.0 and d["samples"] == 16384
    assert d["duration_s"] == pytest.approx(16384 / 48000)
    assert d["transform"] == {"kind": "dwt", "wavelet": "db8", "level": 8, "mode": "periodization"}
    bands = d["channels"][0]["bands"]
    assert [b["name"] for b in bands] == [f"d{j}" for j in range(1, 9)] + ["a8"]
    # dyadic edges (common practice): d1 spans fs/4 ... fs/2
    assert (bands[0]["low_hz"], bands[0]["high_hz"]) == (12000.0, 24000.0)
    assert bands[-1]["kind"] == "approx" and bands[-1]["high_hz"] == 93.75
    assert set(bands[0]) >= {"name", "kind", "level", "low_hz", "high_hz", "count", "energy",
                             "energy_fraction", "rms", "peak", "kurtosis"}
    # Gaussian noise: Pearson kurtosis of d1 near 3 (normal distribution)
    assert bands[0]["kurtosis"] == pytest.approx(3.0, abs=0.3)
    # periodized orthonormal DWT keeps the energy (Mallat): fractions sum to 1
    # and energies sum to the signal's sum of squares (of the read samples)
    samples, _ = sf.read(str(f))
    assert sum(b["energy"] for b in bands) == pytest.approx(float(np.dot(samples, samples)))
    assert sum(b["energy_fraction"] for b in bands) == pytest.approx(1.0)
    # coef_energy: sum of squares of PyWavelets' coefficients, band by band
    c = pywt.wavedec(samples, "db8", mode="periodization", level=8)
    for b, coef in zip(bands, c[:0:-1] + [c[0]]):
        assert b["coef_energy"] == pytest.approx(float(np.sum(coef ** 2)), rel=1e-10)
    assert all("coef_energy" in b for b in bands)


def test_clean_wav_read_back_by_wave_module(tmp_path):
    x = 0.3 * np.sin(2 * np.pi * 440 * np.arange(8000) / 8000) + \
        0.01 * np.random.default_rng(1).standard_normal(8000)
    f = tmp_path / "tone.wav"
    _wav16(f, x)
    out = tmp_path / "clean.wav"
    r = run("clean", str(f), "-o", str(out), "--zero", "1")
    assert r.returncode == 0, r.stderr
    with wave.open(str(out), "rb") as w:   # Python's wave module as the outside reader
        assert w.getframerate() == 8000 and w.getnchannels() == 1 and w.getsampwidth() == 2
        frames = np.frombuffer(w.readframes(w.getnframes()), "<i2")
    assert frames.shape == (8000,)
    # PyWavelets alone: the default transform (README: db4, symmetric, level two
    # short of pywt.dwt_max_level, at most 12), d1 set to zero, waverec, 16-bit.
    import pywt

    with wave.open(str(f), "rb") as w:
        x = np.frombuffer(w.readframes(w.getnframes()), "<i2") / 32768.0
    level = min(12, pywt.dwt_max_level(x.shape[0], pywt.Wavelet("db4").dec_len) - 2)
    c = pywt.wavedec(x, "db4", mode="symmetric", level=level)
    c[-1] = np.zeros_like(c[-1])
    y = pywt.waverec(c, "db4", mode="symmetric")[:x.shape[0]]
    expected = np.clip(np.round(y * 32768), -32768, 32767)
    assert np.max(np.abs(frames - expected)) <= 1


def test_clean_csv_output_read_back_by_csv_module(tmp_path):
    out = tmp_path / "logger_clean.csv"
    r = run("clean", LOGGER, "-o", str(out), "--zero", "a")
    assert r.returncode == 0, r.stderr
    with open(out, newline="") as fh:   # Python's csv module as the outside reader
        rows = list(csv.reader(fh))
    assert rows[0] == ["time_s", "strain_A", "strain_B", "strain_C"]
    assert float(rows[1][0]) == 0.0 and float(rows[2][0]) == pytest.approx(0.001)
    assert len(rows) == 24576 + 1
    vals = np.array(rows[1:], dtype=float)
    # drift lives in the approximation: muting it leaves a near-zero-mean trace
    assert abs(vals[:, 1].mean()) < 5.0


def test_clean_from_csv_defaults_to_float_wav(tmp_path):
    out = tmp_path / "logger.wav"
    r = run("clean", LOGGER, "-o", str(out), "--threshold", "universal")
    assert r.returncode == 0, r.stderr
    info = sf.info(str(out))
    assert info.subtype == "FLOAT" and info.channels == 3 and info.samplerate == 1000


def test_clean_recipe_and_removed(tmp_path):
    recipe = {"scalesieve_recipe": 1,
              "transform": {"kind": "dwt", "wavelet": "db4", "level": 6, "mode": "symmetric"},
              "edits": [{"op": "gain", "levels": [1], "gain": 0.0},
                        {"op": "threshold", "levels": "details", "rule": "universal",
                         "shape": "soft", "noise": "finest"},
                        {"op": "region", "levels": [1, 2], "start_s": 1.20, "stop_s": 1.25,
                         "gain": 0.0}]}
    rp = tmp_path / "r.json"
    rp.write_text(json.dumps(recipe))
    out, rem = tmp_path / "c.flac", tmp_path / "r.flac"
    r = run("clean", DEMO, "-o", str(out), "--recipe", str(rp), "--removed", str(rem))
    assert r.returncode == 0, r.stderr
    c, rate = sf.read(str(out))
    rm, _ = sf.read(str(rem))
    x, _ = sf.read(DEMO)
    assert rate == 25600
    # cleaned + removed = original, up to the 16-bit quantisation of both files
    assert np.max(np.abs(c + rm - x)) <= 2.5 / 32768


def test_existing_output_needs_force_and_input_is_never_written(tmp_path):
    x = np.random.default_rng(2).standard_normal(4000) * 0.1
    f = tmp_path / "a.wav"
    _wav16(f, x)
    before = f.read_bytes()
    out = tmp_path / "b.wav"
    out.write_bytes(b"keep me")
    r = run("clean", str(f), "-o", str(out), "--zero", "1")
    assert r.returncode == 2 and "--force" in r.stderr
    assert out.read_bytes() == b"keep me"
    r = run("clean", str(f), "-o", str(f), "--zero", "1", "--force")
    assert r.returncode == 2 and "input" in r.stderr
    assert f.read_bytes() == before
    r = run("clean", str(f), "-o", str(out), "--zero", "1", "--force")
    assert r.returncode == 0 and out.read_bytes() != b"keep me"


@pytest.mark.parametrize("content,needle", [
    (b"", "empty"),
    (b"RIFF\x10\x00\x00\x00WAVEfmt ", None),
    (b"\x00\x01\x02garbage" * 10, None),
])
def test_broken_files_one_line_exit_2(tmp_path, content, needle):
    f = tmp_path / "broken.wav"
    f.write_bytes(content)
    out = tmp_path / "o.wav"
    for argv in (("bands", str(f)), ("clean", str(f), "-o", str(out), "--zero", "1")):
        r = run(*argv)
        assert r.returncode == 2, r.stderr
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("scalesieve: error: ")
        assert str(f) in lines[0] or "broken.wav" in lines[0]
        assert "Traceback" not in r.stderr
        if needle:
            assert needle in lines[0].lower()
    assert not out.exists()


def test_bad_recipe_named(tmp_path):
    rp = tmp_path / "r.json"
    rp.write_text(json.dumps({"scalesieve_recipe": 1, "edits": [{"op": "boost", "levels": [1]}]}))
    r = run("clean", DEMO, "-o", str(tmp_path / "o.wav"), "--recipe", str(rp))
    assert r.returncode == 2 and "boost" in r.stderr and len(r.stderr.strip().splitlines()) == 1
    rp.write_text(json.dumps({"scalesieve_recipe": 1, "transform": {"level": 4},
                              "edits": [{"op": "gain", "levels": [9], "gain": 0}]}))
    r = run("clean", DEMO, "-o", str(tmp_path / "o.wav"), "--recipe", str(rp))
    assert r.returncode == 2 and "level 9" in r.stderr


def test_usage_errors_are_one_line(capsys):
    assert main(["clean"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("scalesieve: error: ")
    assert main(["bands", DEMO, "--wavelet", "nope"]) == 2


def test_headless_commands_never_import_qt(tmp_path):
    code = ("import sys; from scalesieve.cli import main; "
            f"main(['bands', {DEMO!r}]); main(['--version']); "
            "assert not any(m.startswith(('PySide6', 'pyqtgraph')) for m in sys.modules), "
            "[m for m in sys.modules if m.startswith('PySide6')]")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stderr


def test_version_and_module_entry():
    r = run("--version")
    assert r.returncode == 0 and r.stdout.startswith("scalesieve ")


def test_recipe_transform_and_command_line_precedence(tmp_path):
    # CONTRACT: a recipe's transform wins over defaults; options win over the recipe.
    rp = tmp_path / "r.json"
    rp.write_text(json.dumps({"scalesieve_recipe": 1,
                              "transform": {"kind": "dwt", "wavelet": "sym5", "level": 5,
                                            "mode": "symmetric"},
                              "edits": [{"op": "gain", "levels": [1], "gain": 0.0}]}))
    from scalesieve import api
    from scalesieve.commands import options
    from scalesieve.recipe import load

    class A:
        transform = None
        wavelet = "haar"
        level = None
        mode = None

    spec = options.transform_from(A, load(str(rp)).transform)
    assert (spec.wavelet, spec.level, spec.kind) == ("haar", 5, "dwt")
    assert api.merge_transform(None).wavelet == "db4"
