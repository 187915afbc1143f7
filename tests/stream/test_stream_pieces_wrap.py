"""Time pieces where every level wraps (periodic, periodization) and for the SWT.

Each piece needs the samples across the circle (the first one the recording's
end, the last one its start) and the thresholds the first passes gather over
the whole recording; the joined output must be the one-process run's in blocks
(``stream.pipeline.clean_stream``) sample for sample, and the whole-array
result within round-off.  Pieces here are a few thousand samples long
(``pieces.MIN_PIECE`` lowered) so that the coarse levels of every piece reach
past both ends of the recording.
"""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import pipeline
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.recipe import Edit
from scalesieve.stream import pieces as pieces_module
from scalesieve.stream.pieces import clean_pieces
from scalesieve.stream.pipeline import clean_stream

RULES = {
    # noise from the finest band's median (two first passes), then sigma sqrt(2 ln n)
    "universal": [Edit("threshold", levels="details", rule="universal", shape="soft",
                       noise="finest")],
    # SURE: each band's values gathered whole; region: coefficient positions in each piece
    "sure": [Edit("threshold", levels="details", rule="sure", shape="soft", noise="finest"),
             Edit("region", levels=(1, 2), start_s=0.30, stop_s=0.45, gain=0.0)],
    # BayesShrink: each band's median and sum of squares
    "bayes-level": [Edit("threshold", levels="details", rule="bayes", shape="soft",
                         noise="level"),
                    Edit("gain", levels=("a",), gain=0.5)],
}

CASES = [
    ("dwt", "db4", 5, "periodic", 20_001, 1, "universal"),
    ("dwt", "sym5", 6, "periodization", 19_999, 2, "sure"),
    ("dwt", "haar", 9, "periodization", 7_777, 1, "bayes-level"),
    ("dwt", "bior3.5", 4, "periodic", 12_345, 2, "bayes-level"),
    ("dwt", "db10", 7, "periodic", 9_001, 2, "sure"),
    ("dwt", "coif2", 8, "periodization", 13_001, 2, "universal"),
    ("swt", "db4", 4, "periodic", 20_001, 2, "universal"),
    ("swt", "sym4", 5, "periodization", 15_555, 1, "sure"),
    ("swt", "db2", 3, "symmetric", 9_999, 2, "bayes-level"),
    ("swt", "haar", 6, "periodization", 6_001, 2, "bayes-level"),
]


def _recording(path, n, channels, seed=0):
    # invented: broadband noise with a few impacts and a slow swell
    rng = np.random.default_rng(seed)
    t = np.arange(n) / 1000.0
    x = 0.05 * rng.standard_normal((n, channels)) + 0.3 * np.sin(2 * np.pi * 0.7 * t)[:, None]
    for k in range(channels):
        for at in rng.integers(0, n - 20, 4):
            x[at:at + 9, k] += 0.8 * np.hanning(9)
    sf.write(path, x, 1000, subtype="DOUBLE")
    return x


def _read(path):
    return sf.read(path, always_2d=True)[0]


@pytest.fixture(scope="module")
def cluster():
    from dask.distributed import LocalCluster

    with LocalCluster(host="127.0.0.1", protocol="tcp://", dashboard_address=":0",
                      n_workers=1, threads_per_worker=2, processes=False) as c:
        yield c.scheduler_address


@pytest.mark.parametrize("kind,wavelet,level,mode,n,channels,rule", CASES)
def test_pieces_on_a_cluster_are_the_one_process_samples(tmp_path, monkeypatch, cluster,
                                                         kind, wavelet, level, mode, n,
                                                         channels, rule):
    monkeypatch.setattr(pieces_module, "MIN_PIECE", 1)
    src = tmp_path / "in.wav"
    _recording(src, n, channels, seed=n)
    spec = TransformSpec(kind, wavelet, level, mode)
    edits = RULES[rule]
    one = clean_stream(str(src), str(tmp_path / "one.wav"), transform=spec, edits=edits,
                       removed=str(tmp_path / "one_r.wav"), subtype="DOUBLE")
    got = clean_pieces(str(src), str(tmp_path / "got.wav"), scheduler=cluster, pieces=5,
                       transform=spec, edits=edits, removed=str(tmp_path / "got_r.wav"),
                       subtype="DOUBLE")
    assert len(got["pieces"]) == 5
    assert [p["start"] for p in got["pieces"]] == [round(n * i / 5) for i in range(5)]
    # the one-process run in blocks: equal arrays
    np.testing.assert_array_equal(_read(tmp_path / "got.wav"), _read(tmp_path / "one.wav"))
    np.testing.assert_array_equal(_read(tmp_path / "got_r.wav"), _read(tmp_path / "one_r.wav"))
    assert got["energy_removed_fraction"] == one["energy_removed_fraction"]
    # the whole-array model (what clean runs on a recording that fits): within round-off
    # (the one-process run in blocks keeps to the same bound: tests/stream/test_stream_clean)
    whole = pipeline.clean_file(str(src), str(tmp_path / "whole.wav"), transform=spec,
                                edits=edits, subtype="DOUBLE")
    assert "blocks" not in whole
    want = _read(tmp_path / "whole.wav")
    np.testing.assert_allclose(_read(tmp_path / "got.wav"), want, rtol=0,
                               atol=1e-11 * max(1.0, np.max(np.abs(want))))
    left = sorted(p.name for p in tmp_path.iterdir())
    assert left == ["got.wav", "got_r.wav", "in.wav", "one.wav", "one_r.wav", "whole.wav"]


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
def test_visushrink_in_pieces_against_pywavelets_on_the_whole_recording(tmp_path,
                                                                      monkeypatch, mode):
    # reference: VisuShrink (Donoho & Johnstone 1994), sigma = median|d1| / 0.6745 over
    # the non-zero finest coefficients, with pywt.wavedec / waverec of the whole channel
    monkeypatch.setattr(pieces_module, "MIN_PIECE", 1)
    monkeypatch.setattr(pieces_module, "_run_local",
                        lambda jobs, workers, path: [pieces_module.clean_piece(j) for j in jobs])
    n = 10_007
    src = tmp_path / "in.wav"
    x = _recording(src, n, 2, seed=3)
    spec = TransformSpec("dwt", "db6", 6, mode)
    clean_pieces(str(src), str(tmp_path / "got.wav"), workers=2, pieces=4, transform=spec,
                 edits=RULES["universal"], subtype="DOUBLE")
    got = _read(tmp_path / "got.wav")
    for k in range(2):
        c = pywt.wavedec(x[:, k], "db6", mode=mode, level=6)
        d1 = np.abs(c[-1])
        lam = np.median(d1[d1 != 0]) / 0.6744897501960817 * np.sqrt(2 * np.log(n))
        c = [c[0]] + [pywt.threshold(d, lam, mode="soft") for d in c[1:]]
        want = pywt.waverec(c, "db6", mode=mode)[:n]
        np.testing.assert_allclose(got[:, k], want, rtol=0, atol=1e-12)


def test_swt_in_pieces_against_pywavelets_swt_of_the_whole_recording(tmp_path, monkeypatch):
    # reference: pywt.swt / pywt.iswt (norm=True) of the whole recording, whose length is
    # a multiple of 2**level so the model pads nothing; a manual soft threshold on details
    monkeypatch.setattr(pieces_module, "MIN_PIECE", 1)
    monkeypatch.setattr(pieces_module, "_run_local",
                        lambda jobs, workers, path: [pieces_module.clean_piece(j) for j in jobs])
    n, level, lam = 16 * 1001, 4, 0.04
    src = tmp_path / "in.wav"
    x = _recording(src, n, 1, seed=4)
    spec = TransformSpec("swt", "sym4", level, "periodization")
    edits = [Edit("threshold", levels="details", rule="manual", value=lam, shape="soft")]
    clean_pieces(str(src), str(tmp_path / "got.wav"), workers=2, pieces=3, transform=spec,
                 edits=edits, subtype="DOUBLE")
    c = pywt.swt(x[:, 0], "sym4", level=level, trim_approx=True, norm=True)
    c = [c[0]] + [pywt.threshold(d, lam, mode="soft") for d in c[1:]]
    want = pywt.iswt(c, "sym4", norm=True)
    np.testing.assert_allclose(_read(tmp_path / "got.wav")[:, 0], want, rtol=0, atol=1e-12)


def test_workers_2_on_the_command_line_in_periodization(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(pieces_module, "MIN_PIECE", 1000)
    src = tmp_path / "in.wav"
    _recording(src, 4_099, 2, seed=5)
    out = tmp_path / "out.wav"
    rc = main(["clean", str(src), "-o", str(out), "--threshold", "sure", "--mode",
               "periodization", "--wavelet", "sym6", "--level", "5", "--subtype", "DOUBLE",
               "--workers", "2", "--pieces", "4"])
    assert rc == 0
    err = capsys.readouterr().err
    assert "cleaned in 4 pieces on 2 local processes" in err
    for span in ("0-1025:", "1025-2050:", "2050-3074:", "3074-4099:"):
        assert span in err
    one = tmp_path / "one.wav"
    clean_stream(str(src), str(one), transform=TransformSpec("dwt", "sym6", 5, "periodization"),
                 edits=[Edit("threshold", levels="details", rule="sure", shape="soft",
                             noise="finest")], subtype="DOUBLE")
    np.testing.assert_array_equal(_read(out), _read(one))


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
def test_packets_in_a_wrapping_mode_are_refused_in_one_line(tmp_path, capsys, mode):
    src = tmp_path / "in.wav"
    _recording(src, 3_001, 1)
    assert main(["clean", str(src), "-o", str(tmp_path / "o.wav"), "--zero", "1",
                 "--transform", "packet", "--level", "2", "--mode", "periodic",
                 "--workers", "2", "--pieces", "4"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--workers and --scheduler clean in blocks" in err[0]
    assert not (tmp_path / "o.wav").exists()
