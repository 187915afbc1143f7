"""`scalesieve kurtosis` and `envelope` per docs/reference.md, on the invented fan recording.

What the tool must find is stated in sample_signals/README.md (section 1b): a
resonance at 5200 Hz, an outer-race defect at BPFO = 119.405 Hz (10 elements,
8.0 and 42.0 mm, 0 degrees, shaft 29.5 Hz).  The spectrum CSV is read back with
Python's csv module.
"""

from __future__ import annotations

import csv
import json
import math
import os
import subprocess
import sys

import pytest

from scalesieve.cli import main

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
FAN = os.path.join(ROOT, "sample_signals", "fan_bearing.wav")
PUMP = os.path.join(ROOT, "sample_signals", "pump_bearing.wav")
RESONANCE_HZ = 5200.0
SHAFT_HZ = 29.5
# Randall & Antoni 2011, eq. 2, for the README's geometry (worked out here, not by the tool)
BPFO_HZ = 10 * SHAFT_HZ / 2 * (1 - 8.0 / 42.0 * math.cos(0.0))


def _json(capsys, *argv):
    assert main(list(argv) + ["--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_kurtosis_json_follows_the_contract_and_finds_the_resonance(capsys):
    d = _json(capsys, "kurtosis", FAN)
    assert set(d) >= {"file", "rate", "levels", "best"}
    assert [lv["level"] for lv in d["levels"]] == [1, 2, 3, 4, 5, 6]
    for lv in d["levels"]:
        j = lv["level"]
        assert [b["name"] for b in lv["bands"]] == [f"w{j}.{k}" for k in range(2 ** j)]
        for k, b in enumerate(lv["bands"]):
            assert b["low_hz"] == k * d["rate"] / 2 ** (j + 1)
    best = d["best"]
    assert set(best) >= {"name", "level", "low_hz", "high_hz", "kurtosis"}
    assert best["low_hz"] <= RESONANCE_HZ <= best["high_hz"]
    # the defect's train is impulsive: well above Gaussian noise's 3 (common practice)
    assert best["kurtosis"] > 5


def test_envelope_finds_the_defect_rate_and_matches_bpfo(tmp_path, capsys):
    out = tmp_path / "spec.csv"
    d = _json(capsys, "envelope", FAN, "--bearing", "10,8.0,42.0,0", "--shaft", "29.5",
              "--csv", str(out))
    assert set(d) >= {"file", "rate", "band", "resolution_hz", "peaks", "bearing", "lines"}
    assert d["band"]["low_hz"] <= RESONANCE_HZ <= d["band"]["high_hz"]
    assert len(d["peaks"]) == 10
    top = d["peaks"][0]
    assert abs(top["hz"] - BPFO_HZ) < 0.5              # the tolerance
    assert d["bearing"]["bpfo_hz"] == pytest.approx(BPFO_HZ, rel=1e-12)
    bpfo = [ln for ln in d["lines"] if ln["name"] == "bpfo" and not ln.get("sideband")]
    assert [ln["harmonic"] for ln in bpfo] == [1, 2, 3]
    for ln in bpfo:
        assert abs(ln["found_hz"] - ln["harmonic"] * BPFO_HZ) < 0.5
        assert ln["snr_db"] > 10
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["hz", "amplitude"]
    step = float(rows[1]["hz"]) - float(rows[0]["hz"])
    assert step == pytest.approx(d["resolution_hz"])
    best_row = max(rows, key=lambda r: float(r["amplitude"]))
    assert abs(float(best_row["hz"]) - BPFO_HZ) < 0.5


def test_envelope_of_a_named_band_on_the_pump_finds_its_defect_rate(capsys):
    # sample_signals/README.md: pump BPFO 87.3 Hz, ringing 3600 Hz (inside w4.4, 3.2-4.0 kHz)
    d = _json(capsys, "envelope", PUMP, "--band", "w4.4")
    assert d["band"] == {"name": "w4.4", "low_hz": 3200.0, "high_hz": 4000.0, "path": "dda"} \
        or d["band"]["name"] == "w4.4"
    assert abs(d["peaks"][0]["hz"] - 87.3) < 0.5


@pytest.mark.parametrize("argv, words", [
    (["envelope", FAN, "--bearing", "10,8,42"], "N,d,D,ANGLE"),
    (["envelope", FAN, "--bearing", "10,8,42,0"], "--shaft"),
    (["envelope", FAN, "--band", "x3"], "not a packet band"),
    (["kurtosis", FAN, "--level", "40"], "deeper"),
    (["kurtosis", FAN, "--transform", "dwt"], "packet"),
])
def test_bad_input_is_one_line(capsys, argv, words):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("scalesieve: error: ") and words in err[0]


def test_csv_is_not_written_over_an_existing_file_without_force(tmp_path, capsys):
    out = tmp_path / "spec.csv"
    out.write_text("keep me")
    assert main(["envelope", FAN, "--csv", str(out)]) == 2
    assert out.read_text() == "keep me"


def test_kurtosis_and_envelope_never_import_qt():
    code = ("import sys; from scalesieve.cli import main; "
            f"main(['kurtosis', {FAN!r}]); main(['envelope', {FAN!r}]); "
            "bad = [m for m in sys.modules if m.startswith(('PySide6', 'pyqtgraph'))]; "
            "assert not bad, bad")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr


def test_packet_bands_json_and_save_recipe_replays(tmp_path, capsys):
    d = _json(capsys, "bands", FAN, "--transform", "packet", "--level", "3")
    bands = d["channels"][0]["bands"]
    assert [b["name"] for b in bands] == [f"w3.{k}" for k in range(8)]
    assert all(b["kind"] == "packet" and set(b["path"]) <= {"a", "d"} for b in bands)
    r1, r2 = tmp_path / "r1.json", tmp_path / "r2.json"
    assert main(["clean", FAN, "-o", str(tmp_path / "a.wav"), "--transform", "packet",
                 "--basis", "best", "--level", "4", "--zero", "1", "--save-recipe",
                 str(r1)]) == 2        # level numbers on a packet transform: refused
    assert not r1.exists() and not (tmp_path / "a.wav").exists()
    capsys.readouterr()
    assert main(["clean", FAN, "-o", str(tmp_path / "a.wav"), "--transform", "packet",
                 "--basis", "best", "--level", "4", "--threshold", "universal",
                 "--save-recipe", str(r1)]) == 0
    saved = json.loads(r1.read_text())
    assert saved["transform"]["kind"] == "packet" and isinstance(saved["transform"]["basis"], list)
    assert main(["clean", FAN, "-o", str(tmp_path / "b.wav"), "--recipe", str(r1),
                 "--save-recipe", str(r2)]) == 0
    assert json.loads(r2.read_text()) == saved
    import soundfile as sf

    a, _ = sf.read(str(tmp_path / "a.wav"))
    b, _ = sf.read(str(tmp_path / "b.wav"))
    assert (a == b).all()


def _interior(x, best):
    """The best band's interior coefficients, from PyWavelets' own packet tree."""
    import pywt

    from scalesieve.core import band_choice

    node = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=best["level"])[best["path"]].data
    left, right = band_choice.dwt_edges(x.shape[0], pywt.Wavelet("db4").dec_len,
                                        best["level"])[best["level"] - 1]
    return node[left:node.shape[0] - right]


@pytest.mark.parametrize("seed", [3, 11])
def test_kurtosis_on_gaussian_noise_says_no_band_stands_out(tmp_path, capsys, seed):
    # scipy.stats.kurtosistest (Anscombe & Glynn 1983) on the best band's interior
    # coefficients, one-sided, at 1 % shared over every band of the table (Bonferroni)
    import numpy as np
    import soundfile as sf
    from scipy import stats

    x = 0.1 * np.random.default_rng(seed).standard_normal(65536)
    path = tmp_path / "hiss.wav"
    sf.write(path, x, 16000, subtype="DOUBLE")
    d = _json(capsys, "kurtosis", str(path))
    assert set(d) >= {"file", "rate", "levels", "best", "impulsive", "finding"}
    best = d["best"]
    assert best is not None and best["name"].startswith("w")     # the contract's key stays
    bands = sum(len(lv["bands"]) for lv in d["levels"])
    p = stats.kurtosistest(_interior(x, best), alternative="greater").pvalue
    assert d["impulsive"] is bool(p < 0.01 / bands) is False
    assert d["finding"].startswith("no band stands out as impulsive")
    assert best["name"] in d["finding"]
    assert main(["kurtosis", str(path)]) == 0
    text = capsys.readouterr().out
    assert d["finding"] in text.splitlines()


def test_kurtosis_on_the_fan_says_its_band_stands_out(capsys):
    import soundfile as sf
    from scipy import stats

    d = _json(capsys, "kurtosis", FAN)
    x = sf.read(FAN, dtype="float64", always_2d=True)[0][:, 0]
    bands = sum(len(lv["bands"]) for lv in d["levels"])
    p = stats.kurtosistest(_interior(x, d["best"]), alternative="greater").pvalue
    assert d["impulsive"] is bool(p < 0.01 / bands) is True
    assert d["finding"].startswith("most impulsive: w")


def test_kurtosis_too_short_for_an_interior_figure_does_not_judge(tmp_path, capsys):
    # 64 samples: no packet band keeps 128 interior coefficients (core/band_choice)
    import numpy as np
    import soundfile as sf

    path = tmp_path / "short.wav"
    sf.write(path, np.random.default_rng(5).standard_normal(64), 8000, subtype="DOUBLE")
    d = _json(capsys, "kurtosis", str(path), "--level", "2")
    assert d["impulsive"] is None and "not tested" in d["finding"]
