"""The SWT block by block (`clean`, `bands`) against PyWavelets on the whole recording.

The reference everywhere is PyWavelets itself: the recording padded to a multiple
of 2**J with ``pywt.pad`` in the boundary mode (``periodic`` for periodization),
``pywt.swt(norm=True)``, the edit, ``pywt.iswt(norm=True)`` cut to the recording.
"""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core.transforms import MODES, TransformSpec
from scalesieve.recipe import Edit
from scalesieve.stream import swt as sw
from scalesieve.stream.bands import band_figures_stream
from scalesieve.stream.pipeline import clean_stream

from band_reference import assert_figures, band_row  # whole-array PyWavelets

RATE = 8000


def _recording(path, n, channels=2, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / RATE
    x = np.stack([0.3 * np.sin(2 * np.pi * (40 + 25 * k) * t) + 0.05 * rng.standard_normal(n)
                  for k in range(channels)], axis=1)
    x[n // 3:n // 3 + 7, 0] += 0.7                       # an impact on channel 0
    x[-5:, -1] += 0.4                                    # something at the very end
    sf.write(path, x, RATE, subtype="DOUBLE")
    return x


def _swt(x, wavelet, level, mode):
    """PyWavelets' normalised SWT of the padded recording (the model's definition)."""
    n = x.shape[0]
    total = -(-n // 2 ** level) * 2 ** level
    pad_mode = "periodic" if mode == "periodization" else mode
    xp = pywt.pad(x, (0, total - n), pad_mode) if total > n else x
    return pywt.swt(xp, wavelet, level=level, trim_approx=True, norm=True)


def _iswt(c, wavelet, n):
    return pywt.iswt(c, wavelet, norm=True)[:n]


def _visushrink(x, wavelet, level, mode):
    """VisuShrink (Donoho & Johnstone 1994) on the SWT: sigma from d1's MAD, carried to
    level j by 2^-(j-1)/2 (normalised SWT, Percival & Walden 2000), soft thresholds."""
    c = _swt(x, wavelet, level, mode)
    d1 = np.abs(c[-1])
    sigma = np.median(d1[d1 != 0]) / 0.6744897501960817
    lam = sigma * np.sqrt(2 * np.log(x.shape[0]))
    out = [c[0]]
    for i, d in enumerate(c[1:], start=1):
        j = level - i + 1
        out.append(pywt.threshold(d, lam * 2.0 ** (-(j - 1) / 2), mode="soft"))
    return _iswt(out, wavelet, x.shape[0])


@pytest.mark.parametrize("mode", sorted(MODES))
def test_swt_visushrink_in_blocks_is_pywavelets_in_every_mode(tmp_path, mode):
    # odd length, not a multiple of 2**J: the padding and the wrap-around both matter
    n, level = 20_011, 6
    src = tmp_path / "in.wav"
    x = _recording(src, n)
    out = tmp_path / "out.wav"
    res = clean_stream(str(src), str(out), transform=TransformSpec("swt", "sym4", level, mode),
                       edits=[Edit("threshold", levels="details", rule="universal",
                                   shape="soft", noise="finest")], subtype="DOUBLE")
    y = sf.read(out)[0]
    assert y.shape == x.shape
    for k in range(2):
        want = _visushrink(x[:, k], "sym4", level, mode)
        np.testing.assert_allclose(y[:, k], want, rtol=0, atol=1e-12 * np.max(np.abs(want)))
    assert res["blocks"]["passes"] == 3


def test_small_blocks_cross_the_circle_many_times(tmp_path, monkeypatch):
    # blocks far shorter than the filters' reach at the top level: every block joins
    monkeypatch.setattr(sw, "SWT_BLOCK", 1 << 10)
    n, level = 9_001, 7
    src = tmp_path / "in.wav"
    x = _recording(src, n, channels=1, seed=3)
    out = tmp_path / "out.wav"
    gains = [Edit("gain", levels=(1, 2), gain=0.25), Edit("gain", levels=("a",), gain=0.5)]
    forward, inverse = sw.SwtForward.__init__, sw.SwtInverse.__init__

    def small_forward(self, *a, **kw):
        kw["block"] = 700
        forward(self, *a, **kw)

    def small_inverse(self, *a, **kw):
        kw["block"] = 513
        inverse(self, *a, **kw)
    monkeypatch.setattr(sw.SwtForward, "__init__", small_forward)
    monkeypatch.setattr(sw.SwtInverse, "__init__", small_inverse)
    clean_stream(str(src), str(out), transform=TransformSpec("swt", "db3", level, "reflect"),
                 edits=gains, subtype="DOUBLE")
    c = _swt(x[:, 0], "db3", level, "reflect")
    c = [b * (0.5 if i == 0 else 0.25 if i >= level - 1 else 1.0) for i, b in enumerate(c)]
    want = _iswt(c, "db3", n)
    np.testing.assert_allclose(sf.read(out)[0], want, rtol=0, atol=1e-12)


def test_swt_region_and_bayes_match_pywavelets(tmp_path):
    n, level = 16_385, 5
    src = tmp_path / "in.wav"
    x = _recording(src, n, channels=1, seed=7)
    out = tmp_path / "out.wav"
    edits = [Edit("region", levels=(1, 2), start_s=0.5, stop_s=1.1, gain=0.0),
             Edit("threshold", levels=(3,), rule="bayes", shape="hard", noise="level")]
    clean_stream(str(src), str(out), transform=TransformSpec("swt", "db2", level, "smooth"),
                 edits=edits, subtype="DOUBLE")
    c = _swt(x[:, 0], "db2", level, "smooth")
    # region: coefficients whose time position lies in the span; a normalised SWT
    # coefficient i of level j sits at sample i + shift_j, the shift read off
    # PyWavelets' own iswt of an impulse (its centre of energy)
    edited = [b.copy() for b in c]
    for j in (1, 2):
        i = level - j + 1
        imp = [np.zeros(c[0].shape[0]) for _ in c]
        imp[i][1000] = 1.0
        r = pywt.iswt(imp, "db2", norm=True)
        shift = float(np.sum(np.arange(r.size) * r * r) / np.sum(r * r)) - 1000
        pos = np.arange(c[0].shape[0]) + shift
        edited[i][(pos >= 0.5 * RATE) & (pos <= 1.1 * RATE)] = 0.0
    d3 = edited[level - 2]
    d = np.abs(c[level - 2])
    sigma = np.median(d[d != 0]) / 0.6744897501960817
    # BayesShrink (Chang, Yu & Vetterli 2000): sigma^2 / sqrt(max(var - sigma^2, eps))
    lam = sigma ** 2 / np.sqrt(max(np.mean(d3 * d3) - sigma ** 2, np.finfo(float).eps))
    edited[level - 2] = pywt.threshold(d3, lam, mode="hard")
    want = _iswt(edited, "db2", n)
    got = sf.read(out)[0]
    # the region's edges may differ by one coefficient where the position is a tie
    inner = np.ones(n, bool)
    for edge in (0.5 * RATE, 1.1 * RATE):
        inner[int(edge) - 40:int(edge) + 40] = False
    np.testing.assert_allclose(got[inner], want[inner], rtol=0, atol=1e-12)


def _swt_figures(x, wavelet, level, mode):
    """The CONTRACT's band figures of the SWT from PyWavelets on the whole recording."""
    n = x.shape[0]
    c = _swt(x, wavelet, level, mode)
    total = float(np.dot(x, x))
    rows = {}
    for i, band in enumerate(c):
        alone = [b if j == i else np.zeros_like(b) for j, b in enumerate(c)]
        comp = _iswt(alone, wavelet, n)
        name = f"a{level}" if i == 0 else f"d{level - i + 1}"
        rows[name] = band_row(band, comp, total)
    return rows


@pytest.mark.parametrize("mode", ["symmetric", "periodization", "antireflect"])
def test_swt_band_figures_in_blocks_are_the_whole_recording_ones(tmp_path, mode, monkeypatch):
    monkeypatch.setattr(sw, "SWT_BLOCK", 1 << 12)        # many blocks on a short file
    n, level = 30_001, 6
    src = tmp_path / "two.wav"
    x = _recording(src, n, channels=2, seed=5)
    facts, channels = band_figures_stream(str(src), TransformSpec("swt", "db4", level, mode))
    assert facts["samples"] == n and len(channels) == 2
    for k, rows in enumerate(channels):
        want = _swt_figures(x[:, k], "db4", level, mode)
        assert [r["name"] for r in rows] == [f"d{j}" for j in range(1, level + 1)] + ["a6"]
        for r in rows:
            w = want[r["name"]]
            assert r["count"] == w["count"]
            assert_figures(r, w)


def test_the_commands_take_the_swt_in_blocks_and_say_so(tmp_path, monkeypatch, capsys):
    import json

    src = tmp_path / "in.wav"
    _recording(src, 12_003, channels=1)
    opts = ["--transform", "swt", "--level", "4", "--mode", "periodic"]
    assert main(["bands", str(src), "--json", *opts]) == 0
    whole = json.loads(capsys.readouterr().out)
    assert main(["clean", str(src), "-o", str(tmp_path / "w.wav"), "--threshold", "universal",
                 "--subtype", "DOUBLE", *opts]) == 0
    assert "in blocks" not in capsys.readouterr().err
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    assert main(["bands", str(src), "--json", *opts]) == 0
    out = capsys.readouterr()
    assert "read in blocks" in out.err
    blocks = json.loads(out.out)
    for a, b in zip(whole["channels"][0]["bands"], blocks["channels"][0]["bands"]):
        for field in ("energy", "coef_energy", "rms", "peak", "count"):
            assert b[field] == pytest.approx(a[field], rel=1e-9), (a["name"], field)
    assert main(["clean", str(src), "-o", str(tmp_path / "b.wav"), "--threshold", "universal",
                 "--subtype", "DOUBLE", *opts]) == 0
    assert "cleaned in blocks" in capsys.readouterr().err
    u, v = sf.read(tmp_path / "w.wav")[0], sf.read(tmp_path / "b.wav")[0]
    np.testing.assert_allclose(v, u, rtol=0, atol=1e-12)


def test_padding_is_pywavelets_pad_from_the_ends_only():
    # pywt.pad on the whole recording is the reference; padding() sees only its ends
    rng = np.random.default_rng(2)
    x = rng.standard_normal((5_000, 2))
    level = 6
    for mode in sorted(MODES):
        total = -(-5_000 // 64) * 64
        head, tail = x[:66], x[-66:]
        got = sw.padding(head, tail, 5_000, level, mode)
        pm = "periodic" if mode == "periodization" else mode
        for k in range(2):
            want = pywt.pad(x[:, k], (0, total - 5_000), pm)[5_000:]
            np.testing.assert_array_equal(got[:, k], want, err_msg=mode)
