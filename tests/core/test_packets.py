"""Packet bands against PyWavelets' own WaveletPacket, and the best basis by brute force."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import pywt
from scipy.special import entr

from scalesieve.core import packets as wp
from scalesieve.core import transforms as tf

MODES = ["symmetric", "periodization", "zero", "smooth"]


def _signal(n=1000, seed=3):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / 1000.0
    return np.sin(2 * np.pi * 37 * t) + 0.3 * rng.standard_normal(n)


@pytest.mark.parametrize("mode", MODES)
@pytest.mark.parametrize("wavelet", ["haar", "db4", "sym5", "bior2.4"])
def test_full_basis_is_pywt_get_level_freq_order(wavelet, mode):
    # reference: pywt.WaveletPacket(...).get_level(J, order="freq"), node data and paths
    x = _signal()
    ref = pywt.WaveletPacket(x, wavelet, mode, maxlevel=3).get_level(3, order="freq")
    spec = tf.TransformSpec("packet", wavelet, 3, mode).resolved(x.shape[0])
    got = tf.forward(x, spec)
    assert [k.path for k in tf.spec_keys(spec)] == [n.path for n in ref]
    assert [k.name for k in tf.spec_keys(spec)] == [f"w3.{k}" for k in range(8)]
    for c, node in zip(got, ref):
        np.testing.assert_array_equal(c, node.data)
    assert tf.band_lengths(x.shape[0], spec) == [len(n.data) for n in ref]


@pytest.mark.parametrize("depth", [1, 2, 3, 4, 5])
def test_frequency_index_matches_pywt_order(depth):
    # reference: PyWavelets' frequency ordering of the nodes of one level
    ref = pywt.WaveletPacket(np.zeros(256), "haar", maxlevel=depth).get_level(depth, "freq")
    assert [wp.freq_index(n.path) for n in ref] == list(range(2 ** depth))
    assert [wp.path_of(depth, k) for k in range(2 ** depth)] == [n.path for n in ref]


@pytest.mark.parametrize("mode", MODES)
def test_inverse_after_muting_nodes_is_pywt_reconstruct(mode):
    # reference: WaveletPacket.reconstruct() with some nodes set to zero
    x = _signal(777)
    spec = tf.TransformSpec("packet", "db3", 3, mode).resolved(x.shape[0])
    coeffs = tf.forward(x, spec)
    muted = {1, 4, 6}
    # built from x first, so every node knows its length (odd lengths are trimmed as in
    # the forward tree), then the nodes are replaced
    ref = pywt.WaveletPacket(x, "db3", mode, maxlevel=3)
    ref.get_level(3)
    for i, k in enumerate(tf.spec_keys(spec)):
        ref[k.path] = np.zeros_like(coeffs[i]) if i in muted else coeffs[i]
    want = ref.reconstruct(update=False)[:x.shape[0]]
    got = tf.inverse([np.zeros_like(c) if i in muted else c for i, c in enumerate(coeffs)],
                     spec, x.shape[0])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    # and every node alone: its component
    for i, k in enumerate(tf.spec_keys(spec)):
        one = pywt.WaveletPacket(x, "db3", mode, maxlevel=3)
        one.get_level(3)
        for j, kk in enumerate(tf.spec_keys(spec)):
            one[kk.path] = coeffs[j] if j == i else np.zeros_like(coeffs[j])
        np.testing.assert_allclose(tf.band_component(coeffs, k, spec, x.shape[0]),
                                   one.reconstruct(update=False)[:x.shape[0]], atol=1e-12)


def _admissible(depth, prefix=""):
    """Every basis of the tree below ``prefix`` down to ``depth`` (brute force)."""
    yield [prefix]
    if len(prefix) < depth:
        for a in _admissible(depth, prefix + "a"):
            for d in _admissible(depth, prefix + "d"):
                yield a + d


def _ref_cost(c, kind, norm2):
    # Coifman & Wickerhauser 1992: Shannon -sum p ln p (scipy's entr), log energy sum ln c^2
    c = np.asarray(c)
    if kind == "shannon":
        return float(entr(c * c / norm2).sum())
    e = c[c != 0] ** 2
    return float(np.log(e).sum())


@pytest.mark.parametrize("kind", ["shannon", "log-energy"])
@pytest.mark.parametrize("depth", [1, 2, 3])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_best_basis_has_least_cost_of_every_admissible_basis(kind, depth, seed):
    rng = np.random.default_rng(seed)
    n = 512
    t = np.arange(n)
    x = (np.sin(2 * np.pi * t * rng.uniform(0.01, 0.45)) * rng.uniform(0.2, 2)
         + rng.standard_normal(n) * rng.uniform(0.05, 1.0))
    tree = pywt.WaveletPacket(x, "db2", "periodization", maxlevel=depth)
    norm2 = float(np.dot(x, x))
    bases = [b for b in _admissible(depth) if b != [""]]
    costs = {tuple(b): sum(_ref_cost(tree[p].data, kind, norm2) for p in b) for b in bases}
    chosen = wp.best_basis([x], "db2", "periodization", depth, kind)
    assert set(chosen) in [set(b) for b in bases] or chosen == ("",)
    least = min(costs.values())
    got = sum(_ref_cost(tree[p].data, kind, norm2) for p in chosen) if chosen != ("",) \
        else _ref_cost(x, kind, norm2)
    assert got <= least + 1e-9 * max(1.0, abs(least))
    # and the count of admissible bases is the known recursion b(J) = b(J-1)^2 + 1
    # (from memory: 2, 5, 26 bases for depths 1, 2, 3 including the root)
    assert len(bases) + 1 == {1: 2, 2: 5, 3: 26}[depth]


def test_check_basis_refuses_gaps_overlaps_and_bad_letters():
    assert wp.check_basis(["d", "aa", "ad"], 2) == ("aa", "ad", "d")
    for bad in (["a"], ["a", "a"], ["a", "d", "dd"], ["ax", "d"], ["aaa", "d"]):
        with pytest.raises(ValueError):
            wp.check_basis(bad, 2)


@pytest.mark.parametrize("mode", ["symmetric", "periodization"])
def test_local_synthesis_of_packet_windows_equals_full_inverse(mode):
    # reference: the full PyWavelets reconstruction of coefficient sets zero outside a window
    x = _signal(2048)
    spec = tf.TransformSpec("packet", "db4", 3, mode).resolved(x.shape[0])
    coeffs = tf.forward(x, spec)
    keys = tf.spec_keys(spec)
    for windows in ({keys[2]: (0, 30)}, {keys[5]: (100, 140), keys[0]: (90, 95)},
                    {keys[7]: (len(coeffs[7]) - 20, len(coeffs[7]))}):
        z = [np.zeros_like(c) for c in coeffs]
        w = {}
        for k, (a, b) in windows.items():
            z[k.position][a:b] = coeffs[k.position][a:b]
            w[k] = (coeffs[k.position][a:b], a)
        full = tf.inverse(z, spec, x.shape[0])
        s, seg = tf.local_synthesis_bands(w, [len(c) for c in coeffs], spec, x.shape[0])
        out = np.zeros_like(full)
        out[s:s + seg.shape[0]] = seg
        np.testing.assert_allclose(out, full, atol=1e-12)


def test_band_ranges_are_equal_width_and_tile_nyquist():
    # contract: low_hz = K fs / 2^(J+1), high_hz = (K+1) fs / 2^(J+1)
    for k in range(8):
        assert wp.range_hz(wp.path_of(3, k), 16000.0) == (k * 1000.0, (k + 1) * 1000.0)
    for combo in itertools.product("ad", repeat=2):
        p = "".join(combo)
        lo, hi = wp.range_hz(p, 8.0)
        assert hi - lo == 1.0


def _pywt_component(x, path, wavelet, mode):
    # reference: PyWavelets' WaveletPacket with every node but one muted, reconstructed
    full = pywt.WaveletPacket(x, wavelet, mode, maxlevel=len(path))
    alone = pywt.WaveletPacket(None, wavelet, mode, maxlevel=len(path))
    alone[path] = full[path].data
    return alone.reconstruct(update=False)[:x.shape[0]]


@pytest.mark.parametrize("mode", MODES + ["periodic", "reflect"])
@pytest.mark.parametrize("wavelet", ["haar", "db4", "sym8", "bior3.5"])
@pytest.mark.parametrize("n", [1024, 1537])
def test_component_figures_are_energy_and_peak_of_the_pywt_component(wavelet, mode, n):
    # energy and peak made from the node's coefficients, never the component whole,
    # against the component PyWavelets reconstructs
    x = _signal(n, seed=n)
    x[n // 3] += 25.0                     # an impulse, so the peak is in one place
    for depth in (1, 3, 5):
        for k in (0, 1, 2 ** depth // 2, 2 ** depth - 1):
            path = wp.path_of(depth, k)
            c = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)[path].data
            got = wp.component_figures(c, path, wavelet, mode, n)
            if got is None:               # periodization on a length that does not halve
                assert mode == "periodization" and n % 2 ** depth
                continue
            y = _pywt_component(x, path, wavelet, mode)
            assert got[0] == pytest.approx(float(np.sum(y * y)), rel=1e-10, abs=1e-24)
            assert got[1] == pytest.approx(float(np.max(np.abs(y))), rel=1e-10, abs=1e-24)


def test_component_peak_search_finds_a_lone_peak_among_noise():
    # the skipped groups must never hold the peak: one large coefficient among many
    # small ones, at every position of a short stretch (reference: PyWavelets' component)
    rng = np.random.default_rng(11)
    n, path = 4096, "dad"
    base = pywt.WaveletPacket(rng.standard_normal(n), "db4", "symmetric", maxlevel=3)[path].data
    for at in range(0, base.shape[0], 37):
        c = base.copy()
        c[at] = 8.0
        alone = pywt.WaveletPacket(None, "db4", "symmetric", maxlevel=3)
        alone[path] = c
        y = alone.reconstruct(update=False)[:n]
        assert wp.component_figures(c, path, "db4", "symmetric", n)[1] == pytest.approx(
            float(np.max(np.abs(y))), rel=1e-12)
