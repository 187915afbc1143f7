"""Edge cases through the command line and the Python API: a correct result or a clear error.

References: PyWavelets itself (wavedec/waverec, dwt_max_level) for the
cleaned signals and level limits; Python's wave and csv modules to read the
exported files back; numpy.interp for gap filling (CONTRACT: linear fill);
the dyadic band edges fs/2^(j+1)..fs/2^j (DESIGN.md, common practice).
"""

from __future__ import annotations

import csv
import json
import wave

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import api
from scalesieve.cli import main
from scalesieve.core.recording import Recording
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit


def cli(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def one_error_line(capsys, *argv) -> str:
    code, out, err = cli(capsys, *argv)
    lines = err.splitlines()
    assert code == 2 and len(lines) == 1 and lines[0].startswith("scalesieve: error: "), err
    assert "Traceback" not in err
    return lines[0]


def zero_d1_reference(x: np.ndarray, wavelet="db4", level=None, mode="symmetric"):
    """What muting d1 gives, computed by PyWavelets directly."""
    level = level or max(1, min(pywt.dwt_max_level(len(x), pywt.Wavelet(wavelet).dec_len) - 2,
                                12))
    c = pywt.wavedec(x, wavelet, mode=mode, level=level)
    c[-1] = np.zeros_like(c[-1])
    return pywt.waverec(c, wavelet, mode=mode)[:len(x)]


def float_wav(path, x, rate=8000):
    sf.write(path, x, rate, subtype="FLOAT")
    return path


# ---------------------------------------------------------------- NaN and Inf

def test_nan_sample_is_an_error_then_filled_on_request(tmp_path, capsys):
    x = np.sin(np.arange(1000) / 10.0) * 0.5
    x[100] = np.nan
    p = float_wav(tmp_path / "drop.wav", x)
    line = one_error_line(capsys, "clean", p, "-o", tmp_path / "o.wav", "--zero", "1")
    assert "sample 100" in line and "NaN" in line and "--fill-gaps linear" in line
    code, _, _ = cli(capsys, "clean", p, "-o", tmp_path / "o.wav", "--zero", "1",
                     "--fill-gaps", "linear")
    assert code == 0
    filled = x.copy()
    filled[100] = np.interp(100, [99, 101], [x[99], x[101]])
    got, _ = sf.read(tmp_path / "o.wav")
    np.testing.assert_allclose(got, zero_d1_reference(filled), atol=1e-6)  # float32 file


def test_infinite_sample_is_an_error_even_with_fill(tmp_path, capsys):
    x = np.zeros(500)
    x[7] = np.inf
    p = float_wav(tmp_path / "spike.wav", x)
    line = one_error_line(capsys, "bands", p, "--fill-gaps", "linear")
    assert "sample 7" in line and "infinite" in line


def test_nan_and_inf_cells_in_a_table(tmp_path, capsys):
    p = tmp_path / "strain.csv"
    p.write_text("time_ms;s1\n0;1,5\n1;nan\n2;2,5\n3;inf\n")
    line = one_error_line(capsys, "bands", p)
    assert "line 5" in line and "infinite" in line
    p.write_text("time_ms;s1\n0;1,5\n1;nan\n2;2,5\n3;3,5\n")
    line = one_error_line(capsys, "bands", p, "--wavelet", "haar")
    assert "line 3" in line and "--fill-gaps linear" in line


def test_api_refuses_nan_in_a_recording_made_in_code():
    x = np.ones((64, 2))
    x[3, 1] = np.nan
    with pytest.raises(ScalesieveError, match="sample 3 of channel 1 is NaN"):
        api.build_model(Recording(x, 100.0, ["a", "b"], source="script"))
    x[3, 1] = 1e300
    with pytest.raises(ScalesieveError, match="too large"):
        api.build_model(Recording(x, 100.0, ["a", "b"], source="script"))


# ------------------------------------------------------------- constant signal

@pytest.mark.parametrize("value", [0.0, 0.25])
def test_constant_signal(tmp_path, capsys, value):
    x = np.full(4096, value)
    p = float_wav(tmp_path / "flat.wav", x)
    code, out, _ = cli(capsys, "bands", p, "--json")
    assert code == 0
    report = json.loads(out)  # strict JSON: no NaN or Infinity
    bands = report["channels"][0]["bands"]
    approx = [b for b in bands if b["kind"] == "approx"][0]
    details = sum(b["energy"] for b in bands if b["kind"] == "detail")
    # A constant lies in the approximation (the detail filters' taps sum to zero,
    # Daubechies 1992); the details hold round-off only.
    assert details <= 1e-20 * max(1.0, approx["energy"])
    if value:
        assert approx["energy_fraction"] == pytest.approx(1.0, abs=1e-15)
    else:
        assert all(b["energy_fraction"] == 0.0 for b in bands)
    # Kurtosis of round-off is no measure of impulsiveness: none is given.
    assert all(b["kurtosis"] is None for b in bands if b["kind"] == "detail")
    for rule in ("universal", "bayes", "sure", "minimax"):
        code, _, _ = cli(capsys, "clean", p, "-o", tmp_path / "o.wav", "--force",
                         "--threshold", rule, "--shape", "garrote", "--noise", "level")
        assert code == 0
        got, _ = sf.read(tmp_path / "o.wav")
        np.testing.assert_allclose(got, x, atol=1e-7)
    code, out, _ = cli(capsys, "events", p, "--json")
    assert code == 0 and json.loads(out)["events"] == []


# --------------------------------------------------------- too short, too deep

def test_one_sample_file(tmp_path, capsys):
    p = float_wav(tmp_path / "one.wav", np.array([0.5]))
    for args in ([], ["--wavelet", "haar"]):
        line = one_error_line(capsys, "bands", p, *args)
        assert "holds 1 sample" in line and "at least 2" in line
    t = tmp_path / "one.csv"
    t.write_text("t,x\n0,1\n")
    assert "single row" in one_error_line(capsys, "bands", t)
    assert "holds 1 sample" in one_error_line(capsys, "bands", t, "--rate", "100")
    with pytest.raises(ScalesieveError, match="holds 1 sample"):
        api.build_model(api.load(p))


def test_recording_shorter_than_the_wavelet_filter(tmp_path, capsys):
    x = np.linspace(0, 0.5, 10)
    p = float_wav(tmp_path / "ten.wav", x)
    # db8 has 16 taps (Daubechies 1992, Table 6.1: 2N taps for dbN); PyWavelets'
    # dwt_max_level is 0 below 2 (L - 1) = 30 samples.
    assert pywt.dwt_max_level(10, pywt.Wavelet("db8").dec_len) == 0
    line = one_error_line(capsys, "bands", p, "--wavelet", "db8")
    assert "filter length 16" in line and "at least 30 samples" in line
    # haar fits: 10 samples allow 3 levels.
    code, out, _ = cli(capsys, "bands", p, "--wavelet", "haar", "--level", "3", "--json")
    assert code == 0 and json.loads(out)["transform"]["level"] == 3
    code, _, _ = cli(capsys, "clean", p, "-o", tmp_path / "o.wav", "--wavelet", "haar",
                     "--zero", "1")
    got, _ = sf.read(tmp_path / "o.wav")
    np.testing.assert_allclose(got, zero_d1_reference(x, "haar"), atol=1e-6)


def test_level_deeper_than_the_data_allow(tmp_path, capsys):
    p = float_wav(tmp_path / "short.wav", np.sin(np.arange(1000) / 7.0))
    top = pywt.dwt_max_level(1000, pywt.Wavelet("db4").dec_len)
    line = one_error_line(capsys, "bands", p, "--level", "20")
    assert "level 20" in line and f"at most {top}" in line
    recipe = tmp_path / "r.json"
    recipe.write_text(json.dumps({"scalesieve_recipe": 1,
                                  "transform": {"kind": "dwt", "wavelet": "db4", "level": 3},
                                  "edits": [{"op": "gain", "levels": [9], "gain": 0}]}))
    line = one_error_line(capsys, "clean", p, "-o", tmp_path / "o.wav", "--recipe", recipe)
    assert "edit 1 (gain)" in line and "level 9 is not in the transform" in line
    with pytest.raises(ScalesieveError, match=f"at most {top}"):
        api.build_model(api.load(p), transform=api.TransformSpec(level=20))


# ------------------------------------------------------------ 1 Hz and 1 MHz

@pytest.mark.parametrize("rate", [1, 1_000_000])
def test_extreme_sample_rates(tmp_path, capsys, rate):
    n = 2048
    x = 0.4 * np.sin(2 * np.pi * 0.05 * np.arange(n))
    p = tmp_path / "r.wav"
    sf.write(p, x, rate, subtype="PCM_24")
    code, out, _ = cli(capsys, "bands", p, "--json")
    report = json.loads(out)
    assert code == 0 and report["rate"] == rate and report["duration_s"] == pytest.approx(n / rate)
    d1 = report["channels"][0]["bands"][0]
    # Dyadic band edges (common practice): d1 spans fs/4 .. fs/2.
    assert (d1["low_hz"], d1["high_hz"]) == (rate / 4, rate / 2)
    out_wav, out_csv = tmp_path / "o.wav", tmp_path / "o.csv"
    assert cli(capsys, "clean", p, "-o", out_wav, "--zero", "1")[0] == 0
    with wave.open(str(out_wav)) as w:
        assert w.getframerate() == rate and w.getnframes() == n
    assert cli(capsys, "clean", p, "-o", out_csv, "--zero", "1")[0] == 0
    with open(out_csv, newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["time_s", "ch0"] and len(rows) == n + 1
    assert float(rows[2][0]) == pytest.approx(1.0 / rate, rel=1e-12)
    x24 = sf.read(p)[0]
    np.testing.assert_allclose([float(r[1]) for r in rows[1:]], zero_d1_reference(x24),
                               atol=1e-12)
    # A region edit is placed in seconds at this rate.
    rec = api.load(p)
    m = api.build_model(rec, edits=[Edit("region", levels=(1, 2, 3), start_s=1000 / rate,
                                         stop_s=1100 / rate, gain=0.0)])
    changed = np.flatnonzero(np.abs(m.cleaned(0) - rec.samples[:, 0]) > 1e-12)
    assert changed.size and 900 < changed.min() and changed.max() < 1200


def test_one_hz_table_with_a_time_column(tmp_path, capsys):
    p = tmp_path / "tide.csv"
    t = np.arange(300)
    p.write_text("time [s],level\n" + "".join(f"{k},{np.sin(k / 9.0):.6f}\n" for k in t))
    code, out, _ = cli(capsys, "bands", p, "--json")
    assert code == 0 and json.loads(out)["rate"] == 1.0


# ------------------------------------------------------------------ 32 channels

def test_thirty_two_channels(tmp_path, capsys):
    rng = np.random.default_rng(32)
    x = np.round(0.1 * rng.standard_normal((3000, 32)) * 2 ** 23) / 2 ** 23
    p = tmp_path / "array32.wav"
    sf.write(p, x, 48000, subtype="PCM_24")
    code, out, _ = cli(capsys, "bands", p, "--json")
    report = json.loads(out)
    assert code == 0 and [c["name"] for c in report["channels"]] == [f"ch{k}" for k in range(32)]
    o = tmp_path / "o.wav"
    assert cli(capsys, "clean", p, "-o", o, "--zero", "1")[0] == 0
    with wave.open(str(o)) as w:
        assert (w.getnchannels(), w.getnframes(), w.getsampwidth()) == (32, 3000, 3)
    got, _ = sf.read(o)
    ref = np.column_stack([zero_d1_reference(x[:, k]) for k in range(32)])
    np.testing.assert_allclose(got, ref, atol=2 ** -22)  # 24-bit output
    line = one_error_line(capsys, "clean", p, "-o", tmp_path / "o.flac", "--zero", "1")
    assert "at most 8 channels" in line and "32" in line
    # One channel alone gives the same numbers as within the 32.
    m = api.build_model(api.load(p, channel=17), edits=[Edit("gain", levels=(1,), gain=0.0)])
    np.testing.assert_allclose(m.cleaned(0), ref[:, 17], atol=1e-12)


def test_thirty_two_column_table(tmp_path, capsys):
    p = tmp_path / "rig.csv"
    header = "time_ms;" + ";".join(f"s{k}" for k in range(32))
    rows = [f"{k};" + ";".join(f"{np.sin(k / (j + 2)):.5f}".replace(".", ",") for j in range(32))
            for k in range(256)]
    p.write_text(header + "\n" + "\n".join(rows) + "\n")
    rec = api.load(p)
    assert rec.channels == 32 and rec.rate == 1000.0 and rec.channel_names[31] == "s31"
    assert cli(capsys, "clean", p, "-o", tmp_path / "o.csv", "--zero", "1")[0] == 0
