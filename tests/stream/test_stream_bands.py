"""`bands` block by block against PyWavelets, NumPy and SciPy on the whole recording."""

import json

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.bands import band_figures_stream

from band_reference import assert_figures, band_row  # whole-array PyWavelets


def _figures(x, wavelet, level, mode):
    """The CONTRACT's band figures from PyWavelets on the whole recording: the reference."""
    c = pywt.wavedec(x, wavelet, mode=mode, level=level)
    total = float(np.dot(x, x))
    rows = {}
    for i, band in enumerate(c):
        alone = [b if j == i else np.zeros_like(b) for j, b in enumerate(c)]
        comp = pywt.waverec(alone, wavelet, mode=mode)[:x.shape[0]]
        name = f"a{level}" if i == 0 else f"d{level - i + 1}"
        rows[name] = band_row(band, comp, total)
    return rows


@pytest.mark.parametrize("mode", ["symmetric", "reflect", "zero", "smooth", "antisymmetric",
                                  "periodic", "periodization"])
def test_band_figures_in_blocks_are_the_whole_recording_ones(tmp_path, mode):
    n, level = 300_007, 8
    rng = np.random.default_rng(11)
    t = np.arange(n) / 20_000
    x = np.stack([0.5 + 0.2 * np.sin(2 * np.pi * 13 * t) + 0.02 * rng.standard_normal(n),
                  0.1 * rng.laplace(size=n)], axis=1)
    src = tmp_path / "two.wav"
    sf.write(src, x, 20_000, subtype="DOUBLE")
    facts, channels = band_figures_stream(str(src), TransformSpec("dwt", "db5", level, mode))
    assert facts["samples"] == n and len(channels) == 2
    for k, rows in enumerate(channels):
        want = _figures(x[:, k], "db5", level, mode)
        assert [r["name"] for r in rows] == [f"d{j}" for j in range(1, level + 1)] + ["a8"] \
            or [r["name"] for r in rows] == ["a8"] + [f"d{j}" for j in range(level, 0, -1)]
        for r in rows:
            w = want[r["name"]]
            assert r["count"] == w["count"]
            assert_figures(r, w)


def test_the_command_reads_a_long_recording_in_blocks(tmp_path, monkeypatch, capsys):
    n = 70_001
    x = 0.1 * np.random.default_rng(3).standard_normal(n)
    src = tmp_path / "long.wav"
    sf.write(src, x, 8000, subtype="DOUBLE")
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    assert main(["bands", str(src), "--json", "--wavelet", "sym4", "--level", "5"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["samples"] == n and rep["transform"]["level"] == 5
    want = _figures(x, "sym4", 5, "symmetric")
    got = {b["name"]: b for b in rep["channels"][0]["bands"]}
    assert set(got) == set(want)
    for name, w in want.items():
        assert got[name]["energy"] == pytest.approx(w["energy"], rel=1e-9)
        lo, hi = tf.band_range_hz("a" if name[0] == "a" else int(name[1:]), 5, 8000)
        assert (got[name]["low_hz"], got[name]["high_hz"]) == (lo, hi)




@pytest.mark.parametrize("wavelet, n, level", [("db4", 5001, 3), ("haar", 4097, 5),
                                               ("sym7", 20_011, 6), ("coif2", 777, 2),
                                               ("db2", 4096, 4)])
def test_periodization_components_in_blocks_are_waverec_of_one_band(tmp_path, monkeypatch,
                                                                     wavelet, n, level):
    # odd lengths, short files and small blocks: each component wraps round both ends, and
    # with blocks of 1000 frames the wrap and the zeros fed for the other bands cross many blocks
    from scalesieve.stream import sources

    whole = sources._Source.blocks
    monkeypatch.setattr(sources._Source, "blocks",
                        lambda self, frames=0, start=0, stop=None: whole(self, 1000, start, stop))
    x = np.random.default_rng(n).standard_normal(n) + np.linspace(-1, 2, n)
    src = tmp_path / "wrap.wav"
    sf.write(src, x, 1000, subtype="DOUBLE")
    _, channels = band_figures_stream(str(src), TransformSpec("dwt", wavelet, level,
                                                              "periodization"))
    want = _figures(x, wavelet, level, "periodization")
    for r in channels[0]:
        for field in ("energy", "rms", "peak", "coef_energy"):
            assert r[field] == pytest.approx(want[r["name"]][field], rel=1e-9), \
                (r["name"], field)
    if n % 2 ** level == 0:
        # orthogonal wavelet, periodization, a length the levels halve exactly: the shares
        # add up to 1 (Mallat, Wavelet Tour; an odd level input repeats its last sample)
        assert sum(r["energy_fraction"] for r in channels[0]) == pytest.approx(1.0, rel=1e-9)


def test_the_command_takes_periodization_bands_in_blocks(tmp_path, monkeypatch, capsys):
    n = 70_001
    x = np.stack([0.1 * np.random.default_rng(5).standard_normal(n),
                  np.sin(np.arange(n) / 7.0)], axis=1)
    src = tmp_path / "long.wav"
    sf.write(src, x, 8000, subtype="DOUBLE")
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    assert main(["bands", str(src), "--json", "--wavelet", "db3", "--level", "4",
                 "--mode", "periodization"]) == 0
    captured = capsys.readouterr()
    rep = json.loads(captured.out)
    assert "in blocks" in captured.err
    for k in range(2):
        want = _figures(x[:, k], "db3", 4, "periodization")
        for b in rep["channels"][k]["bands"]:
            assert b["energy"] == pytest.approx(want[b["name"]]["energy"], rel=1e-9)
            assert b["peak"] == pytest.approx(want[b["name"]]["peak"], rel=1e-9)
