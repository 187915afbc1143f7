"""Wavelet packets block by block in the wrapping modes (periodic, periodization): bands and
clean against PyWavelets' WaveletPacket of the whole recording, SciPy and the whole-array
commands, on odd lengths, one and two channels, in many small blocks."""

import json
import os
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
import pywt
import soundfile as sf
from scipy import stats

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream import sources
from scalesieve.stream.bands import band_figures_stream
from scalesieve.stream.packet_tree import PacketInverse, PacketTree, inner_nodes
from scalesieve.stream.packet_wrap import node_edges, read_packet_edges, root_edges

WRAP = ["periodic", "periodization"]


@pytest.fixture
def small_blocks(monkeypatch):
    """Many blocks on a short file: reads of 3001 frames, inverse stages of a few thousand."""
    read = sources._Source.blocks
    monkeypatch.setattr(sources._Source, "blocks",
                        lambda self, frames=None, start=0, stop=None: read(self, 3001, start,
                                                                           stop))
    monkeypatch.setattr(tf, "BLOCK", 1 << 12)
    monkeypatch.setattr(PacketInverse, "MIN_BLOCK", 256)


def _signal(n, channels=2, seed=5):
    """Invented: a tone on an offset, noise, and a burst train whose envelope wanders."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / 16_000
    cols = [0.3 + 0.5 * np.sin(2 * np.pi * 1_300 * t) + 0.05 * rng.standard_normal(n),
            0.2 * rng.laplace(size=n) * (1 + np.sin(2 * np.pi * 3 * t))]
    return np.stack(cols[:channels], axis=1)


def _node_alone(tree, x, wavelet, mode, path):
    """A node's time-domain component by PyWavelets alone: ``pywt.idwt`` up its path, every
    other node zero, each parent cut to its length (as ``WaveletPacket.reconstruct`` cuts)."""
    r = tree[path].data
    for j in range(len(path), 0, -1):
        r = pywt.idwt(r, None, wavelet, mode) if path[j - 1] == "a" else \
            pywt.idwt(None, r, wavelet, mode)
        parent = tree[path[:j - 1]].data if j > 1 else x
        r = r[:parent.shape[0]]
    return r


class _File:
    """Stands in for a source: the blocks of a whole array (as stream.sources hands them)."""

    def __init__(self, x):
        self.x, self.frames, self.channels = x, x.shape[0], x.shape[1]

    def blocks(self, frames=3001, start=0, stop=None):
        stop = self.frames if stop is None else stop
        for s in range(start, stop, frames):
            yield self.x[s:min(stop, s + frames)]


@pytest.mark.parametrize("mode", WRAP)
@pytest.mark.parametrize("n,depth,wavelet", [(30_011, 5, "db3"), (20_480, 4, "sym4"),
                                             (9_999, 8, "db2"), (4_097, 1, "bior2.4")])
def test_the_tree_in_blocks_is_waveletpacket_of_the_whole_recording(mode, n, depth, wavelet):
    x = _signal(n)[:, 1]
    ref = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)
    paths = [nd.path for j in range(1, depth + 1) for nd in ref.get_level(j, "natural")]
    src = _File(x[:, None])
    got = {}
    tree = PacketTree(n, wavelet, mode, inner_nodes([p for p in paths if len(p) == depth]),
                      lambda p, k0, c: got.setdefault(p, []).append((k0, c.copy())),
                      root_edges(src, TransformSpec("packet", wavelet, depth, mode), 0))
    for i in range(0, n, 4_999):              # odd blocks, none a multiple of 2^depth
        tree.feed(x[i:i + 4_999], i)
    for p in paths:
        starts = [k0 for k0, _ in got[p]]
        joined = np.concatenate([c for _, c in got[p]])
        assert starts[0] == 0 and all(b > a for a, b in zip(starts, starts[1:]))
        want = ref[p].data
        assert joined.shape == want.shape, p
        # the wrapped taps are summed apart at each node's ends: round-off there only
        assert np.max(np.abs(joined - want)) <= 1e-12 * np.max(np.abs(want)), p


def _reference(x, wavelet, mode, depth, paths):
    """The CONTRACT's band figures of every node in ``paths``, from PyWavelets on the whole
    array (Pearson kurtosis from scipy.stats, fisher=False)."""
    tree = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)
    total = float(np.dot(x, x))
    rows = {}
    for p in paths:
        c = tree[p].data
        comp = _node_alone(tree, x, wavelet, mode, p)
        e = float(np.dot(comp, comp))
        rows[p] = {"energy": e, "energy_fraction": e / total, "coef_energy": float(np.dot(c, c)),
                   "rms": float(np.sqrt(np.mean(comp * comp))),
                   "peak": float(np.max(np.abs(comp))),
                   "kurtosis": float(stats.kurtosis(c, fisher=False, bias=True)),
                   "count": c.shape[0]}
    return rows


FIELDS = ("energy", "energy_fraction", "coef_energy", "rms", "peak", "kurtosis")


@pytest.mark.parametrize("mode", WRAP)
@pytest.mark.parametrize("n,depth,wavelet,channels", [
    (40_009, 3, "sym4", 2), (30_011, 8, "db2", 1), (32_768, 5, "bior3.5", 2),
    (12_345, 6, "coif2", 1), (777, 2, "db4", 2)])
def test_packet_band_figures_in_blocks_are_waveletpacket_ones(tmp_path, small_blocks, mode, n,
                                                             depth, wavelet, channels):
    x = _signal(n, channels)
    src = tmp_path / "two.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    facts, got = band_figures_stream(str(src), TransformSpec("packet", wavelet, depth, mode))
    assert facts["samples"] == n and len(got) == channels
    order = [nd.path for nd in pywt.WaveletPacket(x[:, 0], wavelet, mode,
                                                  maxlevel=depth).get_level(depth, "freq")]
    for k, rows in enumerate(got):
        assert [r["path"] for r in rows] == order
        want = _reference(x[:, k], wavelet, mode, depth, order)
        for r in rows:
            w = want[r["path"]]
            assert r["count"] == w["count"] and r["kind"] == "packet"
            for field in FIELDS:
                assert r[field] == pytest.approx(w[field], rel=1e-9, abs=1e-300), \
                    (r["name"], field)


def _cli(argv, capsys):
    assert main(argv) == 0, capsys.readouterr().err
    captured = capsys.readouterr()
    return captured.out, captured.err


@pytest.mark.parametrize("mode", WRAP)
@pytest.mark.parametrize("basis,cost", [("full", "shannon"), ("best", "shannon"),
                                        ("best", "log-energy")])
def test_the_bands_command_in_blocks_gives_the_whole_array_table(tmp_path, monkeypatch, capsys,
                                                                 small_blocks, mode, basis,
                                                                 cost):
    x = _signal(50_001, seed=9)
    src = tmp_path / "long.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    argv = ["bands", str(src), "--json", "--transform", "packet", "--wavelet", "db4",
            "--level", "4", "--mode", mode, "--basis", basis, "--cost", cost]
    out, err = _cli(argv, capsys)
    whole = json.loads(out)
    assert "in blocks" not in err
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    out, err = _cli(argv, capsys)
    blocks = json.loads(out)
    assert "read in blocks" in err
    assert blocks["transform"] == whole["transform"]          # the same basis chosen
    for cw, cb in zip(whole["channels"], blocks["channels"]):
        assert [b["name"] for b in cb["bands"]] == [b["name"] for b in cw["bands"]]
        for bw, bb in zip(cw["bands"], cb["bands"]):
            for field in ("low_hz", "high_hz", "count", "path", "level", "index", "kind"):
                assert bb[field] == bw[field]
            for field in FIELDS:
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
                v = float(-np.sum(c2 / norm2 * np.log(c2 / norm2))) if kind == "shannon" \
                    else float(np.sum(np.log(c2)))
                out[nd.path] = out.get(nd.path, 0.0) + v
    return out


@pytest.mark.parametrize("mode", WRAP)
@pytest.mark.parametrize("kind", ["shannon", "log-energy"])
def test_the_best_basis_in_blocks_is_the_least_cost_tiling(tmp_path, small_blocks, mode, kind):
    n, depth = 20_003, 4
    x = _signal(n, seed=2)
    src = tmp_path / "two.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    facts, _ = band_figures_stream(str(src), TransformSpec("packet", "db2", depth, mode,
                                                           basis="best", cost=kind))
    costs = _costs_by_hand([x[:, 0], x[:, 1]], "db2", mode, depth, kind)

    def best(p):           # bottom-up: split only when the children's best costs sum to less
        if len(p) == depth:
            return costs[p], [p]
        ca, la = best(p + "a")
        cd, ld = best(p + "d")
        return (ca + cd, la + ld) if ca + cd < costs[p] else (costs[p], [p])
    assert sorted(facts["spec"].basis) == sorted(best("")[1])


def test_every_node_edge_is_the_whole_array_nodes_head_and_tail():
    n, depth = 100_003, 6
    x = _signal(n, 1)
    spec = TransformSpec("packet", "sym5", depth, "periodization")
    src = _File(x)
    head, tail = read_packet_edges(src, spec.wavelet, depth)
    assert head.shape[0] < n // 4                         # the edges only, not the file
    ref = pywt.WaveletPacket(x[:, 0], "sym5", "periodization", maxlevel=depth)
    paths = [nd.path for nd in ref.get_level(depth, "natural")]
    for p, kn in node_edges(root_edges(src, spec, 0), "sym5", paths).items():
        want = ref[p].data if p else x[:, 0]
        assert kn.m == want.shape[0]
        assert np.allclose(kn.head, want[:kn.head.shape[0]], rtol=0, atol=1e-12)
        assert np.allclose(kn.tail, want[want.shape[0] - kn.tail.shape[0]:], rtol=0, atol=1e-12)


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


def _every_rule(depth, seconds):
    """Every edit kind and threshold rule, regions at both ends (where the wrap is)."""
    top = 2 ** depth - 1
    return [
        {"op": "threshold", "levels": "details", "rule": "universal", "shape": "soft",
         "noise": "finest", "scale": 0.5},
        {"op": "threshold", "bands": [f"w{depth}.{top}"], "rule": "bayes", "shape": "hard",
         "noise": "level"},
        {"op": "threshold", "bands": [f"w{depth}.{top // 2}"], "rule": "sure", "shape": "soft",
         "noise": "finest"},
        {"op": "threshold", "bands": [f"w{depth}.1"], "rule": "minimax", "shape": "garrote",
         "noise": "level"},
        {"op": "gain", "bands": [f"w{depth}.0"], "gain": 0.5},
        {"op": "region", "bands": [f"w{depth}.0", f"w{depth}.{top}"], "start_s": 0.0,
         "stop_s": 0.01},
        {"op": "region", "bands": [f"w{depth}.0", f"w{depth}.1"], "start_s": seconds - 0.02,
         "stop_s": seconds, "gain": 0.0},
    ]


def _round_trip(x, wavelet, mode, depth):
    """``WaveletPacket.reconstruct`` of the whole tree to ``depth``, no node changed."""
    tree = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)
    tree.get_level(depth)                       # builds the nodes
    return tree.reconstruct(update=False)[:x.shape[0]]


@pytest.mark.parametrize("mode", WRAP)
@pytest.mark.parametrize("n,depth,wavelet,channels", [
    (60_007, 4, "db4", 2), (30_001, 8, "sym3", 1), (20_000, 1, "db2", 2),
    (24_577, 6, "bior2.2", 1)])
def test_a_packet_clean_in_blocks_is_the_whole_array_clean(tmp_path, monkeypatch, capsys, mode,
                                                           n, depth, wavelet, channels):
    x = _signal(n, channels, seed=4)
    src = tmp_path / "in.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    recipe = tmp_path / "r.json"
    _write_recipe(recipe, {"kind": "packet", "wavelet": wavelet, "level": depth, "mode": mode,
                           "basis": "full"}, _every_rule(depth, n / 16_000))
    got = {}
    for blocks in (False, True):
        if blocks:                                # many blocks (the fixture's patches)
            read = sources._Source.blocks
            monkeypatch.setattr(sources._Source, "blocks", lambda self, frames=None, start=0,
                                stop=None: read(self, 3001, start, stop))
            monkeypatch.setattr(tf, "BLOCK", 1 << 12)
            monkeypatch.setattr(PacketInverse, "MIN_BLOCK", 256)
        out = tmp_path / f"out-{blocks}.wav"
        _clean(["clean", str(src), "-o", str(out), "--recipe", str(recipe), "--subtype",
                "DOUBLE", "--save-recipe", str(tmp_path / f"r-{blocks}.json")],
               blocks, monkeypatch, capsys)
        got[blocks] = sf.read(out, always_2d=True)[0]
    # the whole-array model keeps cleaned = x - inverse(removed), the blocks synthesise the
    # edited bands: they differ by round-off and by the filters' own reconstruction error,
    # measured on PyWavelets' round trip of this recording (3e-11 for sym3 at depth 8)
    trip = max(np.max(np.abs(_round_trip(x[:, k], wavelet, mode, depth) - x[:, k]))
               for k in range(channels))
    assert np.max(np.abs(got[True] - got[False])) <= 1e-12 * np.max(np.abs(x)) + 2 * trip
    assert not np.allclose(got[True], x)                # the recipe did change it
    assert (tmp_path / "r-True.json").read_text() == (tmp_path / "r-False.json").read_text()


@pytest.mark.parametrize("mode", WRAP)
def test_packet_band_gains_in_blocks_are_waveletpacket_reconstruct(tmp_path, small_blocks, mode):
    from scalesieve.recipe import Edit
    from scalesieve.stream.pipeline import clean_stream

    n, wavelet = 50_001, "sym5"
    x = _signal(n, seed=8)
    src = tmp_path / "in.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    out = tmp_path / "out.wav"
    gains = {"w3.0": 0.5, "w3.1": 0.0, "w3.4": 2.0, "w3.6": 0.25}
    clean_stream(str(src), str(out), transform=TransformSpec("packet", wavelet, 3, mode),
                 edits=[Edit("gain", bands=(b,), gain=g) for b, g in gains.items()],
                 subtype="DOUBLE")
    y = sf.read(out)[0]
    for k in range(2):
        # the reference: PyWavelets' own tree, its nodes scaled, WaveletPacket.reconstruct
        tree = pywt.WaveletPacket(x[:, k], wavelet, mode, maxlevel=3)
        for i, nd in enumerate(tree.get_level(3, "freq")):
            tree[nd.path] = nd.data * gains.get(f"w3.{i}", 1.0)
        want = tree.reconstruct(update=False)[:n]
        assert np.max(np.abs(y[:, k] - want)) <= 1e-12 * np.max(np.abs(x[:, k]))


@pytest.mark.parametrize("mode", WRAP)
@pytest.mark.parametrize("cost,rule", [("log-energy", "bayes"), ("shannon", "sure")])
def test_a_best_basis_clean_in_blocks_chooses_and_cleans_as_the_whole_array(
        tmp_path, monkeypatch, capsys, mode, cost, rule):
    x = _signal(40_003, seed=6)
    src = tmp_path / "in.wav"
    sf.write(src, x, 16_000, subtype="DOUBLE")
    got, saved = {}, {}
    for blocks in (False, True):
        out = tmp_path / f"out-{blocks}.wav"
        saved[blocks] = tmp_path / f"r-{blocks}.json"
        _clean(["clean", str(src), "-o", str(out), "--transform", "packet", "--level", "5",
                "--mode", mode, "--basis", "best", "--cost", cost, "--threshold", rule,
                "--noise", "level", "--subtype", "DOUBLE", "--save-recipe", str(saved[blocks])],
               blocks, monkeypatch, capsys)
        got[blocks] = sf.read(out)[0]
    chosen = json.loads(saved[True].read_text())["transform"]
    assert chosen == json.loads(saved[False].read_text())["transform"]
    # the tiling is the least-cost one over PyWavelets' own tree of the whole recording
    costs = _costs_by_hand([x[:, 0], x[:, 1]], "db4", mode, 5, cost)

    def best(p):
        if len(p) == 5:
            return costs[p], [p]
        ca, la = best(p + "a")
        cd, ld = best(p + "d")
        return (ca + cd, la + ld) if ca + cd < costs[p] else (costs[p], [p])
    assert sorted(chosen["basis"]) == sorted(best("")[1])
    assert np.max(np.abs(got[True] - got[False])) <= 1e-12 * np.max(np.abs(x))


@pytest.mark.parametrize("mode", WRAP)
def test_a_long_packet_recording_in_a_wrapping_mode_runs_in_blocks_on_little_memory(
        tmp_path, monkeypatch, capsys, mode):
    src = tmp_path / "long.wav"
    sf.write(src, _signal(20_001), 16_000, subtype="DOUBLE")
    # a machine with 64 MiB free: the whole array would not fit, the blocks do
    monkeypatch.setattr(memory_guard, "available_memory", lambda: 64 << 20)
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    monkeypatch.setattr("scalesieve.stream.choice.stream_bytes", lambda *a, **k: 1 << 20)
    out, err = _cli(["bands", str(src), "--json", "--transform", "packet", "--level", "3",
                     "--mode", mode], capsys)
    assert "read in blocks" in err and len(json.loads(out)["channels"]) == 2
    cleaned = tmp_path / "out.wav"
    _, err = _cli(["clean", str(src), "-o", str(cleaned), "--transform", "packet", "--level",
                   "3", "--mode", mode, "--threshold", "universal"], capsys)
    assert "cleaned in blocks" in err and sf.info(str(cleaned)).frames == 20_001


_KILLED = textwrap.dedent("""
    import sys
    from scalesieve import memory_guard
    from scalesieve.cli import main
    memory_guard.STREAM_ABOVE = 1 << 16
    sys.exit(main(sys.argv[1:]))
""")


def test_a_killed_periodization_packet_export_leaves_no_torn_file(tmp_path):
    src = tmp_path / "in.wav"
    x = (np.random.default_rng(3).standard_normal((2_000_001, 1)) * 0.1).astype(np.float32)
    sf.write(src, x, 48000, subtype="FLOAT")
    out = tmp_path / "out.wav"
    old = b"an older export"
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    cmd = [sys.executable, "-c", _KILLED, "clean", str(src), "-o", str(out), "--force",
           "--transform", "packet", "--level", "5", "--mode", "periodization", "--threshold",
           "universal"]
    t0 = time.perf_counter()
    done = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=300)
    took = time.perf_counter() - t0
    assert done.returncode == 0, done.stderr
    assert "cleaned in blocks" in done.stderr
    whole = sf.read(out, dtype="float32")[0]

    def intact():
        # the old bytes, or the complete new samples (libsndfile stamps a time in the header)
        if out.read_bytes() == old:
            return True
        y = sf.read(out, dtype="float32")[0]
        return y.shape == whole.shape and np.array_equal(y, whole)

    torn_temporaries = 0
    for extra in (0.0, 0.05, 0.1, 0.2, 0.3):
        out.write_bytes(old)
        p = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        deadline = time.monotonic() + 10 * took + 30   # kill once the temporary file appears
        while p.poll() is None and time.monotonic() < deadline:
            if any(".tmp-scalesieve-" in name for name in os.listdir(tmp_path)):
                break
            time.sleep(0.005)
        time.sleep(extra)
        p.send_signal(signal.SIGKILL)
        p.wait()
        assert intact()
        for name in os.listdir(tmp_path):
            assert name in ("in.wav", "out.wav") or ".tmp-scalesieve-" in name
            torn_temporaries += ".tmp-scalesieve-" in name
    assert torn_temporaries >= 1                       # some kills did land mid-write
    assert subprocess.run(cmd, env=env, capture_output=True, timeout=300).returncode == 0
    assert intact() and out.read_bytes() != old
    assert sorted(os.listdir(tmp_path)) == ["in.wav", "out.wav"]
