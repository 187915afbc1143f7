"""Wavelet packets block by block (bands, clean) against PyWavelets' WaveletPacket, SciPy and
the whole-array commands on the same recording (the wrapping modes:
test_stream_packets_wrap.py)."""

import json

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.bands import band_figures_stream
from scalesieve.stream.dwt import STREAM_MODES
from scalesieve.stream.packet_tree import PacketTree, inner_nodes

from band_reference import assert_figures, band_row  # whole-array PyWavelets
from killed_export import killed_audio_clean

LOCAL_MODES = sorted(STREAM_MODES)


def _node_alone(tree, wavelet, mode, path, data):
    """A node's time-domain component by PyWavelets alone: ``pywt.idwt`` up the node's path,
    every other node zero, each parent cut to its length in ``tree`` (as
    ``WaveletPacket.reconstruct`` cuts it)."""
    r = data
    for j in range(len(path), 0, -1):
        r = pywt.idwt(r, None, wavelet, mode) if path[j - 1] == "a" else \
            pywt.idwt(None, r, wavelet, mode)
        parent = tree[path[:j - 1]].data if j > 1 else tree.data
        r = r[:parent.shape[0]]
    return r


def _reference(x, wavelet, mode, depth, paths):
    """The CONTRACT's band figures of every node in ``paths``, from PyWavelets on the whole array."""
    tree = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)
    total = float(np.dot(x, x))
    rows = {}
    for p in paths:
        c = tree[p].data
        comp = _node_alone(tree, wavelet, mode, p, c)
        rows[p] = band_row(c, comp, total)
    return rows


def _two_channels(n, seed=5):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / 16_000
    return np.stack([0.3 + 0.5 * np.sin(2 * np.pi * 1_300 * t) + 0.05 * rng.standard_normal(n),
                     0.2 * rng.laplace(size=n) * (1 + np.sin(2 * np.pi * 3 * t))], axis=1)


@pytest.mark.parametrize("mode", LOCAL_MODES)
def test_the_tree_in_blocks_is_waveletpacket_bit_for_bit(mode):
    n, depth = 30_011, 4
    x = _two_channels(n)[:, 1]
    got = {}
    ref = pywt.WaveletPacket(x, "db3", mode, maxlevel=depth)
    paths = [nd.path for j in range(1, depth + 1) for nd in ref.get_level(j, "natural")]
    tree = PacketTree(n, "db3", mode, inner_nodes([p for p in paths if len(p) == depth]),
                      lambda p, k0, c: got.setdefault(p, []).append((k0, c.copy())))
    for i in range(0, n, 4_999):              # odd blocks, none a multiple of 2^depth
        tree.feed(x[i:i + 4_999], i)
    for p in paths:
        starts = [k0 for k0, _ in got[p]]
        joined = np.concatenate([c for _, c in got[p]])
        assert starts[0] == 0 and all(b > a for a, b in zip(starts, starts[1:]))
        assert np.array_equal(joined, ref[p].data), p


@pytest.mark.parametrize("mode", LOCAL_MODES)
def test_packet_band_figures_in_blocks_are_the_whole_recording_ones(tmp_path, mode):
    n, depth, wavelet = 40_009, 3, "sym4"
    x = _two_channels(n)
    src = tmp_path / "two.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    facts, channels = band_figures_stream(str(src), TransformSpec("packet", wavelet, depth, mode))
    assert facts["samples"] == n and len(channels) == 2
    # frequency order: PyWavelets' get_level(J, order="freq")
    order = [nd.path for nd in pywt.WaveletPacket(x[:, 0], wavelet, mode,
                                                  maxlevel=depth).get_level(depth, "freq")]
    for k, rows in enumerate(channels):
        assert [r["path"] for r in rows] == order
        assert [r["name"] for r in rows] == [f"w{depth}.{i}" for i in range(2 ** depth)]
        want = _reference(x[:, k], wavelet, mode, depth, order)
        for r in rows:
            w = want[r["path"]]
            assert r["count"] == w["count"] and r["kind"] == "packet"
            assert r["low_hz"] == r["index"] * 16_000 / 2 ** (depth + 1)
            assert_figures(r, w)


def _cli_bands(argv, capsys):
    assert main(argv) == 0
    captured = capsys.readouterr()
    return json.loads(captured.out), captured.err


@pytest.mark.parametrize("basis,cost", [("full", "shannon"), ("best", "shannon"),
                                        ("best", "log-energy")])
def test_the_command_in_blocks_gives_the_whole_array_table(tmp_path, monkeypatch, capsys,
                                                           basis, cost):
    n = 50_001
    x = _two_channels(n, seed=9)
    src = tmp_path / "long.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    argv = ["bands", str(src), "--json", "--transform", "packet", "--wavelet", "db4",
            "--level", "4", "--basis", basis, "--cost", cost]
    whole, err = _cli_bands(argv, capsys)
    assert "in blocks" not in err
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    blocks, err = _cli_bands(argv, capsys)
    assert "read in blocks" in err
    # a best basis is chosen in a pass of its own
    assert ("two passes over the file" in err) == (basis == "best")
    assert blocks["transform"] == whole["transform"]          # the same basis chosen
    if basis == "best":
        assert isinstance(blocks["transform"]["basis"], list)
    for cw, cb in zip(whole["channels"], blocks["channels"]):
        assert [b["name"] for b in cb["bands"]] == [b["name"] for b in cw["bands"]]
        for bw, bb in zip(cw["bands"], cb["bands"]):
            for field in ("low_hz", "high_hz", "count", "path", "level", "index", "kind"):
                assert bb[field] == bw[field]
            assert_figures(bb, bw)


def _costs_by_hand(channels, wavelet, mode, depth, kind):
    """Every node's cost as CONTRACT.md words it (Coifman & Wickerhauser 1992), channels added."""
    out = {}
    for x in channels:
        tree = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)
        norm2 = float(np.dot(x, x))
        for j in range(depth + 1):
            for nd in (tree.get_level(j, "natural") if j else [tree]):
                c2 = np.asarray(nd.data, dtype=float) ** 2
                c2 = c2[c2 > 0]
                if kind == "shannon":
                    p = c2 / norm2
                    v = float(-np.sum(p * np.log(p)))
                else:
                    v = float(np.sum(np.log(c2)))
                out[nd.path] = out.get(nd.path, 0.0) + v
    return out


@pytest.mark.parametrize("kind", ["shannon", "log-energy"])
def test_the_best_basis_from_one_pass_is_the_least_cost_tiling(tmp_path, kind):
    n, depth = 20_003, 3
    x = _two_channels(n, seed=2)
    src = tmp_path / "two.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    facts, _ = band_figures_stream(str(src), TransformSpec("packet", "db2", depth, "symmetric",
                                                           basis="best", cost=kind))
    chosen = facts["spec"].basis
    costs = _costs_by_hand([x[:, 0], x[:, 1]], "db2", "symmetric", depth, kind)
    # bottom-up search by hand: split a node only when its children's best costs sum to less
    def best(p):
        if len(p) == depth:
            return costs[p], [p]
        ca, la = best(p + "a")
        cd, ld = best(p + "d")
        return (ca + cd, la + ld) if ca + cd < costs[p] else (costs[p], [p])
    assert sorted(chosen) == sorted(best("")[1])


# ---------------------------------------------------------------------------- clean


def _clean(argv, blocks: bool, monkeypatch, capsys):
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 0 if blocks else 1 << 62)
    assert main(argv) == 0, capsys.readouterr().err
    err = capsys.readouterr().err
    assert ("cleaned in blocks" in err) == blocks, err
    return err


def _write_recipe(path, transform, edits):
    path.write_text(json.dumps({"scalesieve_recipe": 1, "transform": transform,
                                "edits": edits}))


EVERY_RULE = [
    {"op": "threshold", "levels": "details", "rule": "universal", "shape": "soft",
     "noise": "finest", "scale": 0.5},
    {"op": "threshold", "bands": ["w4.5", "w4.6"], "rule": "bayes", "shape": "hard",
     "noise": "level"},
    {"op": "threshold", "bands": ["w4.9", "w4.14"], "rule": "sure", "shape": "soft",
     "noise": "finest"},
    {"op": "gain", "bands": ["w4.3"], "gain": 0.5},
    {"op": "region", "bands": ["w4.2", "w4.7"], "start_s": 1.0, "stop_s": 1.5},
]


@pytest.mark.parametrize("mode", LOCAL_MODES)
def test_a_packet_clean_in_blocks_is_the_whole_array_clean(tmp_path, monkeypatch, capsys, mode):
    x = _two_channels(60_007, seed=4)
    src = tmp_path / "in.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    recipe = tmp_path / "r.json"
    _write_recipe(recipe, {"kind": "packet", "wavelet": "db4", "level": 4, "mode": mode,
                           "basis": "full"}, EVERY_RULE)
    got = {}
    for blocks in (False, True):
        out = tmp_path / f"out-{blocks}.wav"
        _clean(["clean", str(src), "-o", str(out), "--recipe", str(recipe), "--subtype",
                "DOUBLE", "--save-recipe", str(tmp_path / f"r-{blocks}.json")],
               blocks, monkeypatch, capsys)
        got[blocks] = sf.read(out)[0]
    assert np.max(np.abs(got[True] - got[False])) <= 1e-12 * np.max(np.abs(x))
    assert not np.allclose(got[True], x)                # the recipe did change it
    assert (tmp_path / "r-True.json").read_text() == (tmp_path / "r-False.json").read_text()


def test_packet_band_gains_in_blocks_are_waveletpacket_reconstruct(tmp_path):
    from scalesieve.recipe import Edit
    from scalesieve.stream.pipeline import clean_stream

    n, wavelet, mode = 50_001, "sym5", "smooth"
    x = _two_channels(n, seed=8)
    src = tmp_path / "in.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    out = tmp_path / "out.wav"
    gains = {"w3.1": 0.0, "w3.4": 2.0, "w3.6": 0.25}
    rep = clean_stream(str(src), str(out), transform=TransformSpec("packet", wavelet, 3, mode),
                       edits=[Edit("gain", bands=(b,), gain=g) for b, g in gains.items()],
                       subtype="DOUBLE")
    assert rep["samples"] == n
    y = sf.read(out)[0]
    for k in range(2):
        # the reference: PyWavelets' own tree, its nodes scaled, WaveletPacket.reconstruct
        tree = pywt.WaveletPacket(x[:, k], wavelet, mode, maxlevel=3)
        for i, nd in enumerate(tree.get_level(3, "freq")):
            tree[nd.path] = nd.data * gains.get(f"w3.{i}", 1.0)
        want = tree.reconstruct(update=False)[:n]
        assert np.max(np.abs(y[:, k] - want)) <= 1e-12 * np.max(np.abs(x[:, k]))


def test_a_best_basis_clean_in_blocks_chooses_and_cleans_as_the_whole_array(tmp_path,
                                                                           monkeypatch, capsys):
    x = _two_channels(40_003, seed=6)
    src = tmp_path / "in.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    got, saved = {}, {}
    for blocks in (False, True):
        out = tmp_path / f"out-{blocks}.wav"
        saved[blocks] = tmp_path / f"r-{blocks}.json"
        _clean(["clean", str(src), "-o", str(out), "--transform", "packet", "--level", "4",
                "--basis", "best", "--cost", "log-energy", "--threshold", "bayes",
                "--subtype", "DOUBLE", "--save-recipe", str(saved[blocks])],
               blocks, monkeypatch, capsys)
        got[blocks] = sf.read(out)[0]
    # the same tiling chosen (saved as its node paths) and the same samples
    assert json.loads(saved[True].read_text())["transform"] == \
        json.loads(saved[False].read_text())["transform"]
    assert isinstance(json.loads(saved[True].read_text())["transform"]["basis"], list)
    assert np.max(np.abs(got[True] - got[False])) <= 1e-12 * np.max(np.abs(x))


def test_a_killed_packet_export_in_blocks_leaves_no_torn_file(tmp_path):
    src = tmp_path / "in.wav"
    x = (np.random.default_rng(2).standard_normal((2_000_000, 1)) * 0.1).astype(np.float32)
    sf.write(src, x, 48000, subtype="FLOAT")
    killed_audio_clean(tmp_path, src, "--transform", "packet", "--level", "5", "--threshold", "universal")


def test_workers_cut_packets_in_pieces_with_the_one_process_samples(tmp_path, capsys):
    # (more in tests/stream/test_stream_pieces_packets.py)
    src = tmp_path / "in.wav"
    sf.write(src, _two_channels(20_001), 16_000, subtype="DOUBLE")
    out, ref = tmp_path / "out.wav", tmp_path / "ref.wav"
    args = ["--transform", "packet", "--level", "3", "--threshold", "universal",
            "--subtype", "DOUBLE"]
    assert main(["clean", str(src), "-o", str(out), "--workers", "2", *args]) == 0
    assert "cleaned in 1 piece on 2 local processes" in capsys.readouterr().err
    assert main(["clean", str(src), "-o", str(ref), *args]) == 0
    np.testing.assert_allclose(sf.read(out)[0], sf.read(ref)[0], rtol=0, atol=1e-12)


def test_a_best_basis_clean_counts_its_pass_and_its_progress_only_grows(tmp_path):
    from scalesieve.recipe import Edit
    from scalesieve.stream.pipeline import clean_stream

    src = tmp_path / "in.wav"
    sf.write(src, _two_channels(30_001, seed=3), 16_000, subtype="DOUBLE")
    seen = []
    rep = clean_stream(str(src), str(tmp_path / "out.wav"),
                       transform=TransformSpec("packet", "db3", 3, "symmetric", basis="best"),
                       edits=[Edit("threshold", levels="details", rule="universal")],
                       progress=lambda f, text: seen.append(f))
    # the basis pass, two passes for the median of node d, the cleaning pass
    assert rep["blocks"]["passes"] == 4
    assert isinstance(rep["recipe"].transform.basis, tuple)
    # the basis pass fills the first quarter of the bar, the others the rest, in order
    assert seen == sorted(seen) and seen[0] == 0.25 and seen[-1] == 1.0 and len(seen) >= 4
