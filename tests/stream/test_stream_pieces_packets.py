"""Wavelet packets cut in time pieces, in the modes that extend the signal from its edge.

Each piece runs every inner node of the tree as a one-level stage over the
stretch its outputs read; the joined output must be the one-process run's in
blocks sample for sample, and the whole-array result within round-off.
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

CASES = [
    # wavelet, depth, mode, basis, n, channels, edits
    ("db4", 3, "symmetric", "full", 12_001, 1,
     [Edit("threshold", levels="details", rule="universal", shape="soft", noise="finest")]),
    ("sym5", 4, "reflect", "best", 9_999, 2,
     [Edit("threshold", levels="details", rule="sure", shape="soft", noise="level"),
      Edit("region", levels="all", start_s=2.0, stop_s=3.5, gain=0.0)]),
    ("haar", 5, "zero", "full", 3_333, 2,
     [Edit("threshold", levels="details", rule="bayes", shape="hard", noise="level")]),
    ("bior3.5", 2, "smooth", "best", 10_003, 1,
     [Edit("threshold", levels="details", rule="bayes", shape="soft", noise="finest"),
      Edit("region", levels="all", start_s=4.0, stop_s=6.0, gain=0.25)]),
]


def _recording(path, n, channels, seed):
    # invented: a 40 Hz hum, broadband noise and a few impacts, at 1 kHz
    rng = np.random.default_rng(seed)
    t = np.arange(n) / 1000.0
    x = 0.04 * rng.standard_normal((n, channels)) + 0.2 * np.sin(2 * np.pi * 40 * t)[:, None]
    for k in range(channels):
        for at in rng.integers(0, n - 20, 3):
            x[at:at + 7, k] += 0.7 * np.hanning(7)
    sf.write(path, x, 1000, subtype="DOUBLE")
    return x


def _read(path):
    return sf.read(path, always_2d=True)[0]


def _serial(monkeypatch):
    monkeypatch.setattr(pieces_module, "MIN_PIECE", 1)
    monkeypatch.setattr(pieces_module, "_run_local",
                        lambda jobs, workers, path: [pieces_module.clean_piece(j) for j in jobs])


@pytest.mark.parametrize("wavelet,depth,mode,basis,n,channels,edits", CASES)
def test_packet_pieces_are_the_one_process_samples(tmp_path, monkeypatch, wavelet, depth,
                                                   mode, basis, n, channels, edits):
    _serial(monkeypatch)
    src = tmp_path / "in.wav"
    _recording(src, n, channels, seed=n)
    spec = TransformSpec("packet", wavelet, depth, mode, basis=basis)
    one = clean_stream(str(src), str(tmp_path / "one.wav"), transform=spec, edits=edits,
                       removed=str(tmp_path / "one_r.wav"), subtype="DOUBLE")
    got = clean_pieces(str(src), str(tmp_path / "got.wav"), workers=2, pieces=6,
                       transform=spec, edits=edits, removed=str(tmp_path / "got_r.wav"),
                       subtype="DOUBLE")
    assert len(got["pieces"]) == 6
    assert got["recipe"].transform == one["recipe"].transform     # the same basis chosen
    np.testing.assert_array_equal(_read(tmp_path / "got.wav"), _read(tmp_path / "one.wav"))
    np.testing.assert_array_equal(_read(tmp_path / "got_r.wav"), _read(tmp_path / "one_r.wav"))
    whole = pipeline.clean_file(str(src), str(tmp_path / "whole.wav"), transform=spec,
                                edits=edits, subtype="DOUBLE")
    assert "blocks" not in whole
    want = _read(tmp_path / "whole.wav")
    np.testing.assert_allclose(_read(tmp_path / "got.wav"), want, rtol=0,
                               atol=1e-11 * max(1.0, np.max(np.abs(want))))


def test_muted_packet_bands_in_pieces_against_pywavelets_wavelet_packet(tmp_path, monkeypatch):
    # reference: pywt.WaveletPacket of the whole channel, the named nodes (frequency order,
    # get_level(J, "freq")) set to zero and the tree reconstructed, cut to the length
    _serial(monkeypatch)
    n, depth, wavelet, mode = 8_191, 3, "db3", "symmetric"
    src = tmp_path / "in.wav"
    x = _recording(src, n, 1, seed=9)
    muted = (1, 5, 6)
    spec = TransformSpec("packet", wavelet, depth, mode, basis="full")
    clean_pieces(str(src), str(tmp_path / "got.wav"), workers=2, pieces=3, transform=spec,
                 edits=[Edit("gain", bands=tuple(f"w3.{k}" for k in muted), gain=0.0)],
                 subtype="DOUBLE")
    wp = pywt.WaveletPacket(x[:, 0], wavelet, mode=mode, maxlevel=depth)
    nodes = wp.get_level(depth, order="freq")
    for k in muted:
        nodes[k].data = np.zeros_like(nodes[k].data)
    want = wp.reconstruct(update=False)[:n]
    np.testing.assert_allclose(_read(tmp_path / "got.wav")[:, 0], want, rtol=0, atol=1e-12)


def test_a_best_basis_that_keeps_the_whole_recording_cleans_with_its_own_noise(tmp_path,
                                                                             monkeypatch):
    # white noise: no split lowers the Shannon cost, so the best basis is the root alone
    # (Coifman & Wickerhauser 1992); its own noise (noise: level) needs a pass of the root
    _serial(monkeypatch)
    src = tmp_path / "in.wav"
    x = 0.1 * np.random.default_rng(0).standard_normal((20_000, 1))
    sf.write(src, x, 1000, subtype="DOUBLE")
    spec = TransformSpec("packet", "sym8", 5, "reflect", basis="best")
    edits = [Edit("threshold", levels="details", rule="bayes", shape="soft", noise="level")]
    one = clean_stream(str(src), str(tmp_path / "one.wav"), transform=spec, edits=edits,
                       subtype="DOUBLE")
    assert one["recipe"].transform.basis == ("",)
    clean_pieces(str(src), str(tmp_path / "got.wav"), workers=2, pieces=3, transform=spec,
                 edits=edits, subtype="DOUBLE")
    np.testing.assert_array_equal(_read(tmp_path / "got.wav"), _read(tmp_path / "one.wav"))
    pipeline.clean_file(str(src), str(tmp_path / "whole.wav"), transform=spec, edits=edits,
                        subtype="DOUBLE")
    np.testing.assert_allclose(_read(tmp_path / "got.wav"), _read(tmp_path / "whole.wav"),
                               rtol=0, atol=1e-12)


def test_packets_with_workers_2_on_the_command_line(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(pieces_module, "MIN_PIECE", 1000)
    src = tmp_path / "in.wav"
    _recording(src, 5_001, 2, seed=1)
    out = tmp_path / "out.wav"
    assert main(["clean", str(src), "-o", str(out), "--transform", "packet", "--level", "3",
                 "--wavelet", "db4", "--mode", "symmetric", "--threshold", "universal",
                 "--subtype", "DOUBLE", "--workers", "2", "--pieces", "3"]) == 0
    err = capsys.readouterr().err
    assert "cleaned in 3 pieces on 2 local processes" in err
    one = tmp_path / "one.wav"
    clean_stream(str(src), str(one), transform=TransformSpec("packet", "db4", 3, "symmetric"),
                 edits=[Edit("threshold", levels="details", rule="universal", shape="soft",
                             noise="finest")], subtype="DOUBLE")
    np.testing.assert_array_equal(_read(out), _read(one))
