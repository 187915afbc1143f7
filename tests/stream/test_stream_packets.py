"""Wavelet packets block by block against PyWavelets' WaveletPacket and SciPy on the whole recording."""

import json

import numpy as np
import pytest
import pywt
import soundfile as sf
from scipy import stats

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.stream.bands import band_figures_stream
from scalesieve.stream.dwt import STREAM_MODES
from scalesieve.stream.packet_tree import PacketTree, inner_nodes

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
        e = float(np.dot(comp, comp))
        rows[p] = {"energy": e, "energy_fraction": e / total,
                   "coef_energy": float(np.dot(c, c)),
                   "rms": float(np.sqrt(np.mean(comp * comp))),
                   "peak": float(np.max(np.abs(comp))),
                   # Pearson kurtosis (3 for a Gaussian): scipy.stats, fisher=False
                   "kurtosis": float(stats.kurtosis(c, fisher=False, bias=True)),
                   "count": c.shape[0]}
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
            for field in ("energy", "energy_fraction", "coef_energy", "rms", "peak", "kurtosis"):
                assert r[field] == pytest.approx(w[field], rel=1e-9, abs=1e-300), \
                    (r["name"], field)


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
    assert blocks["transform"] == whole["transform"]          # the same basis chosen
    if basis == "best":
        assert isinstance(blocks["transform"]["basis"], list)
    for cw, cb in zip(whole["channels"], blocks["channels"]):
        assert [b["name"] for b in cb["bands"]] == [b["name"] for b in cw["bands"]]
        for bw, bb in zip(cw["bands"], cb["bands"]):
            for field in ("low_hz", "high_hz", "count", "path", "level", "index", "kind"):
                assert bb[field] == bw[field]
            for field in ("energy", "energy_fraction", "coef_energy", "rms", "peak", "kurtosis"):
                assert bb[field] == pytest.approx(bw[field], rel=1e-9, abs=1e-300), \
                    (bb["name"], field)


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


def _little_memory(monkeypatch):
    """A machine with 1 MiB free: what cannot run in blocks is refused, not run whole."""
    import types

    import psutil

    monkeypatch.setattr(psutil, "virtual_memory", lambda: types.SimpleNamespace(
        available=1 << 20, total=1 << 30))


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
def test_the_wrapping_modes_are_refused_in_one_line(tmp_path, monkeypatch, capsys, mode):
    src = tmp_path / "long.wav"
    sf.write(src, _two_channels(20_001), 16_000, subtype="DOUBLE")
    why = f"wavelet packets in boundary mode {mode} are not worked on in blocks"
    with pytest.raises(ScalesieveError, match=why):
        band_figures_stream(str(src), TransformSpec("packet", "db4", 3, mode))
    _little_memory(monkeypatch)
    assert main(["bands", str(src), "--transform", "packet", "--level", "3",
                 "--mode", mode]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err and why in err


def test_a_packet_clean_in_blocks_is_refused_with_the_reason(tmp_path, monkeypatch, capsys):
    src = tmp_path / "long.wav"
    sf.write(src, _two_channels(20_001), 16_000, subtype="DOUBLE")
    out = tmp_path / "out.wav"
    _little_memory(monkeypatch)
    assert main(["clean", str(src), "-o", str(out), "--transform", "packet", "--level", "3",
                 "--threshold", "universal"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "for band figures only, not to clean" in err
    assert not out.exists()
