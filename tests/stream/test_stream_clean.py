"""`clean` block by block: the numbers of the whole-array computation, files that are whole."""

import os

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.batch import clean_file
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec, default_level
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit
from scalesieve.stream.dwt import STREAM_MODES
from scalesieve.stream.pipeline import clean_stream

from killed_export import killed_audio_clean

RATE = 8000


def _recording(path, n=60_007, channels=2, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / RATE
    x = np.stack([0.3 * np.sin(2 * np.pi * (50 + 30 * k) * t) + 0.05 * rng.standard_normal(n)
                  for k in range(channels)], axis=1)
    x[n // 3:n // 3 + 9, 0] += 0.6                       # an impact on channel 0
    sf.write(path, x, RATE, subtype="DOUBLE")
    return x


def _visushrink(x, wavelet, level, mode):
    """Whole-array VisuShrink with PyWavelets (Donoho & Johnstone 1994): the reference."""
    c = pywt.wavedec(x, wavelet, mode=mode, level=level)
    d1 = np.abs(c[-1])
    sigma = np.median(d1[d1 != 0]) / 0.6744897501960817
    lam = sigma * np.sqrt(2 * np.log(x.shape[0]))
    c = [c[0]] + [pywt.threshold(d, lam, mode="soft") for d in c[1:]]
    return pywt.waverec(c, wavelet, mode=mode)[:x.shape[0]]


# periodic, periodization: the wrap read from the recording's head and tail (stream.wrap)
@pytest.mark.parametrize("mode", sorted(STREAM_MODES) + ["periodic", "periodization"])
def test_visushrink_in_blocks_is_pywavelets_on_the_whole_recording(tmp_path, mode):
    src = tmp_path / "in.wav"
    x = _recording(src)
    out = tmp_path / "out.wav"
    res = clean_stream(str(src), str(out), transform=TransformSpec("dwt", "sym6", 7, mode),
                       edits=[Edit("threshold", levels="details", rule="universal",
                                   shape="soft", noise="finest")], subtype="DOUBLE")
    y, rate = sf.read(out)
    assert rate == RATE and y.shape == x.shape
    for k in range(2):
        want = _visushrink(x[:, k], "sym6", 7, mode)
        np.testing.assert_allclose(y[:, k], want, rtol=0, atol=1e-12 * np.max(np.abs(want)))
    assert res["blocks"]["passes"] == 3            # count d1, keep its middle, clean


RECIPES = {
    "gain and region": [Edit("gain", levels=(2,), gain=0.5),
                        Edit("region", levels=(1, 2), start_s=1.0, stop_s=2.5, gain=0.0)],
    "bayes per level": [Edit("threshold", levels="details", rule="bayes", shape="soft",
                             noise="level")],
    "sure after a gain": [Edit("gain", levels=(2,), gain=0.5),
                          Edit("threshold", levels="details", rule="sure", shape="hard",
                               noise="finest")],
    "minimax on one channel": [Edit("threshold", levels=(1, 3), rule="minimax",
                                    shape="garrote", noise="finest", scale=1.3, channels=(1,))],
    "two bayes in a row": [Edit("threshold", levels=(1, 2), rule="bayes", shape="soft"),
                           Edit("threshold", levels=(1,), rule="bayes", shape="hard")],
    "mute the approximation": [Edit("gain", levels=("a",), gain=0.0)],
}


@pytest.mark.parametrize("mode", ["symmetric", "periodic", "periodization"])
@pytest.mark.parametrize("name", sorted(RECIPES))
def test_every_rule_gives_what_the_whole_array_clean_gives(tmp_path, name, mode):
    # the CONTRACT's promise: the same numbers either way (the whole-array model is
    # itself tested against PyWavelets and scikit-image elsewhere)
    src = tmp_path / "in.wav"
    _recording(src, n=50_001, channels=2, seed=4)
    spec = TransformSpec("dwt", "db4", 6, mode)
    a, b = tmp_path / "a.wav", tmp_path / "b.wav"
    ra = clean_file(str(src), str(a), transform=spec, edits=RECIPES[name],
                    removed=str(tmp_path / "ar.wav"), subtype="DOUBLE")
    rb = clean_stream(str(src), str(b), transform=spec, edits=RECIPES[name],
                      removed=str(tmp_path / "br.wav"), subtype="DOUBLE")
    for x, y in ((a, b), (tmp_path / "ar.wav", tmp_path / "br.wav")):
        u, v = sf.read(x)[0], sf.read(y)[0]
        np.testing.assert_allclose(v, u, rtol=0, atol=1e-11 * max(1.0, np.max(np.abs(u))))
    assert rb["energy_removed_fraction"] == pytest.approx(ra["energy_removed_fraction"],
                                                          rel=1e-9, abs=1e-15)
    assert (rb["samples"], rb["channels"], rb["rate"]) == (ra["samples"], ra["channels"],
                                                           ra["rate"])


def test_the_command_chooses_blocks_by_length_and_says_so(tmp_path, monkeypatch, capsys):
    src = tmp_path / "in.wav"
    x = _recording(src, n=40_003, channels=1)
    args = ["--threshold", "universal", "--subtype", "DOUBLE"]
    assert main(["clean", str(src), "-o", str(tmp_path / "whole.wav"), *args]) == 0
    assert "in blocks" not in capsys.readouterr().err
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    assert main(["clean", str(src), "-o", str(tmp_path / "blocks.wav"), *args]) == 0
    err = capsys.readouterr().err
    assert "cleaned in blocks" in err and "3 passes" in err
    u, v = sf.read(tmp_path / "whole.wav")[0], sf.read(tmp_path / "blocks.wav")[0]
    np.testing.assert_allclose(v, u, rtol=0, atol=1e-12)
    level = default_level(40_003, "db4")             # what the command chooses
    np.testing.assert_allclose(v, _visushrink(x[:, 0], "db4", level, "symmetric"), atol=1e-12)


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
def test_the_wrapping_modes_are_cleaned_in_blocks_by_the_command(tmp_path, monkeypatch, capsys,
                                                                 mode):
    # reference: whole-array VisuShrink with PyWavelets in the same mode
    src = tmp_path / "in.wav"
    x = _recording(src, n=40_001, channels=2, seed=3)
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    out = tmp_path / "p.wav"
    assert main(["clean", str(src), "-o", str(out), "--threshold", "universal", "--mode",
                 mode, "--wavelet", "sym4", "--level", "5", "--subtype", "DOUBLE"]) == 0
    assert "cleaned in blocks" in capsys.readouterr().err
    y = sf.read(out)[0]
    for k in range(2):
        want = _visushrink(x[:, k], "sym4", 5, mode)
        np.testing.assert_allclose(y[:, k], want, rtol=0, atol=1e-12)


def test_what_cannot_stream_falls_back_or_is_refused_in_one_line(tmp_path, monkeypatch,
                                                                   capsys):
    src = tmp_path / "in.csv"
    x = np.random.default_rng(3).standard_normal(30_000)
    src.write_text("time_s,strain\n"
                   + "".join(f"{i / RATE!r},{v!r}\n" for i, v in enumerate(x.tolist())))
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    # a table's gaps are filled in blocks too (tests/stream/test_stream_text_fill.py)
    out = tmp_path / "p.wav"
    assert main(["clean", str(src), "-o", str(out), "--zero", "1", "--fill-gaps",
                 "linear"]) == 0
    assert "in blocks" in capsys.readouterr().err
    # a MATLAB v5 file, which scipy.io reads whole: whole-array while memory allows ...
    from scipy import io as sio

    mat = tmp_path / "in.mat"
    sio.savemat(mat, {"fs": float(RATE), "strain": x[:, None]})
    assert main(["clean", str(mat), "-o", str(tmp_path / "m.wav"), "--zero", "1"]) == 0
    assert "in blocks" not in capsys.readouterr().err

    class Tight:
        available = 2 << 20

    monkeypatch.setattr(memory_guard, "available_memory", lambda: Tight.available)
    # ... and refused, saying why, when it does not fit
    assert main(["clean", str(mat), "-o", str(tmp_path / "q.wav"), "--zero", "1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "cannot be worked on in blocks" in err[0]
    assert "scipy.io reads a MATLAB v5 variable whole" in err[0]
    assert not (tmp_path / "q.wav").exists()


def test_a_bad_sample_mid_file_is_one_message_and_no_output(tmp_path):
    src = tmp_path / "in.wav"
    x = np.random.default_rng(1).standard_normal((700_000, 1)) * 0.1
    x[650_001, 0] = np.nan
    sf.write(src, x, RATE, subtype="FLOAT")
    out = tmp_path / "out.wav"
    with pytest.raises(ScalesieveError, match=r"sample 650001 .* of channel 0 is NaN"):
        clean_stream(str(src), str(out), edits=[Edit("gain", levels=(1,), gain=0.0)])
    assert os.listdir(tmp_path) == ["in.wav"]


def test_an_existing_output_is_kept_without_force(tmp_path):
    src = tmp_path / "in.wav"
    _recording(src, n=5000, channels=1)
    out = tmp_path / "out.wav"
    out.write_bytes(b"mine")
    with pytest.raises(ScalesieveError, match="exists"):
        clean_stream(str(src), str(out), edits=[Edit("gain", levels=(1,), gain=0.0)])
    assert out.read_bytes() == b"mine"


def test_a_killed_export_in_blocks_leaves_no_torn_file(tmp_path):
    src = tmp_path / "in.wav"
    x = (np.random.default_rng(2).standard_normal((3_000_000, 1)) * 0.1).astype(np.float32)
    sf.write(src, x, 48000, subtype="FLOAT")
    killed_audio_clean(tmp_path, src, "--threshold", "universal")


def test_one_channel_and_a_wrong_rate_in_blocks(tmp_path):
    src = tmp_path / "in.wav"
    _recording(src, n=30_001, channels=2)
    edits = [Edit("gain", levels=(1,), gain=0.0)]
    a, b = tmp_path / "a.wav", tmp_path / "b.wav"
    clean_file(str(src), str(a), edits=edits, channel=1, subtype="DOUBLE")
    res = clean_stream(str(src), str(b), edits=edits, channel=1, subtype="DOUBLE")
    assert res["channels"] == 1
    np.testing.assert_allclose(sf.read(b)[0], sf.read(a)[0], rtol=0, atol=1e-12)
    with pytest.raises(ScalesieveError, match="header says 8000 Hz; --rate 44100 does not"):
        clean_stream(str(src), str(tmp_path / "c.wav"), edits=edits, rate=44100)
    with pytest.raises(ScalesieveError, match="channel"):
        clean_stream(str(src), str(tmp_path / "c.wav"), edits=edits, channel=5)
    assert not (tmp_path / "c.wav").exists()


@pytest.mark.parametrize("channel", [None, 1])
def test_csv_outputs_in_blocks_read_back_as_pywavelets_numbers(tmp_path, channel):
    # read back with Python's csv module; the reference is PyWavelets' whole-array VisuShrink
    import csv

    src = tmp_path / "in.wav"
    x = _recording(src, n=70_001, channels=2, seed=9)
    spec = TransformSpec("dwt", "db4", 6, "symmetric")
    edits = [Edit("threshold", levels="details", rule="universal", shape="soft",
                  noise="finest")]
    out, gone = tmp_path / "out.csv", tmp_path / "gone.txt"
    res = clean_stream(str(src), str(out), transform=spec, edits=edits, removed=str(gone),
                       channel=channel)
    assert [r["kind"] for r in res["outputs"]] == ["csv", "csv"]
    with open(out, newline="") as fh:
        rows = list(csv.reader(fh))
    cols = [0, 1] if channel is None else [channel]
    assert rows[0] == ["time_s"] + [f"ch{k}" for k in cols]
    table = np.array(rows[1:], dtype=float)
    assert table.shape == (70_001, len(cols) + 1)
    np.testing.assert_array_equal(table[:, 0], np.arange(70_001) / RATE)
    with open(gone, newline="") as fh:
        removed = np.array(list(csv.reader(fh))[1:], dtype=float)
    for i, k in enumerate(cols):
        want = _visushrink(x[:, k], "db4", 6, "symmetric")
        np.testing.assert_allclose(table[:, 1 + i], want, rtol=0, atol=1e-12)
        np.testing.assert_allclose(removed[:, 1 + i], x[:, k] - want, rtol=0, atol=1e-12)
    # the same file as the whole-array writer makes (the CONTRACT's same-outputs rule)
    whole = tmp_path / "whole.csv"
    clean_file(str(src), str(whole), transform=spec, edits=edits, channel=channel)
    w = np.array(list(csv.reader(open(whole, newline="")))[1:], dtype=float)
    np.testing.assert_allclose(table, w, rtol=0, atol=1e-12)


def test_a_channel_named_as_the_reader_names_it_is_cleaned_in_blocks(tmp_path):
    # audio channels are ch0, ch1, ... (io.readers); the reference is PyWavelets' VisuShrink
    src = tmp_path / "in.wav"
    x = _recording(src, n=30_001, channels=2, seed=12)
    out = tmp_path / "out.wav"
    assert memory_guard.in_blocks(memory_guard.probe_quietly(src), channel="ch1",
                                  transform=TransformSpec(), outputs=[str(out)],
                                  available=1)[0]
    clean_stream(str(src), str(out), transform=TransformSpec("dwt", "db4", 5, "symmetric"),
                 edits=[Edit("threshold", levels="details", rule="universal", shape="soft",
                             noise="finest")], channel="ch1", subtype="DOUBLE")
    want = _visushrink(x[:, 1], "db4", 5, "symmetric")
    np.testing.assert_allclose(sf.read(out)[0], want, rtol=0, atol=1e-12)
    with pytest.raises(ScalesieveError, match="names no channel"):
        clean_stream(str(src), str(tmp_path / "o2.wav"), edits=[], channel="left")


def test_the_command_writes_a_csv_in_blocks_and_says_so(tmp_path, monkeypatch, capsys):
    # read back with Python's csv module against PyWavelets' whole-array VisuShrink
    import csv

    src = tmp_path / "in.wav"
    x = _recording(src, n=20_003, channels=1, seed=13)
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    out = tmp_path / "out.csv"
    assert main(["clean", str(src), "-o", str(out), "--threshold", "universal"]) == 0
    assert "cleaned in blocks" in capsys.readouterr().err
    rows = list(csv.reader(open(out, newline="")))
    assert rows[0] == ["time_s", "ch0"]
    got = np.array(rows[1:], dtype=float)[:, 1]
    level = default_level(20_003, "db4")             # what the command chooses
    np.testing.assert_allclose(got, _visushrink(x[:, 0], "db4", level, "symmetric"),
                               rtol=0, atol=1e-12)
