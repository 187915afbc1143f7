"""The kurtosis table walked in compiled time pieces, against PyWavelets and SciPy."""

from __future__ import annotations

import platform
import shutil

import numpy as np
import pytest
import pywt
from scipy import stats

from scalesieve.core import band_choice as bc
from scalesieve.core import impulsive_bands as ib
from scalesieve.core import packet_walk as pw

needs_core = pytest.mark.skipif(not pw.compiled(), reason="the compiled core was not built")
#: PyWavelets' x86-64 wheels add each tap's product in order without fused
#: multiply-add, as the compiled core does; elsewhere the two may differ in the last bit
X86 = platform.machine() in ("x86_64", "AMD64")


def test_the_compiled_core_is_built_where_a_c_compiler_is():
    # the install builds it when it can (pyproject.toml); a silent failure would only
    # show as a slower table, so it is checked here
    if not (shutil.which("cc") or shutil.which("gcc")):
        pytest.skip("no C compiler on this machine")
    assert pw.compiled()


@pytest.fixture
def small_pieces(monkeypatch):
    # pieces of 2^14 samples (units of 256 coefficients) so a short signal has several
    monkeypatch.setattr(pw, "PIECE", 1 << 14)
    monkeypatch.setattr(pw, "UNIT", 256)


def _layouts(n, w, mode, depth):
    lengths, out = [n], []
    for j, (left, right) in enumerate(bc.dwt_edges(n, w.dec_len, depth), 1):
        lengths.append(pywt.dwt_coeff_len(lengths[-1], w.dec_len, mode))
        m = lengths[-1]
        out.append([(left, m - right), (0, left), (m - right, m)])
    return out


def _path(j, r):
    return "".join("ad"[(r >> (j - 1 - i)) & 1] for i in range(j))


@needs_core
@pytest.mark.parametrize("wavelet,mode,depth", [
    ("db4", "symmetric", 4), ("haar", "zero", 3), ("sym7", "smooth", 5),
    ("coif3", "reflect", 4), ("bior3.5", "antisymmetric", 3), ("db12", "constant", 4),
    ("db30", "antireflect", 3)])
def test_node_sums_are_the_unit_sums_of_pywt_node_data_bit_for_bit(small_pieces, wavelet,
                                                                    mode, depth):
    # reference: pywt.WaveletPacket node data of the whole signal.  The same unit sums
    # of PyWavelets' data (the compiled sums over the whole node) equal the walk's bit
    # for bit only if every coefficient the walk made is PyWavelets' own.
    w = pywt.Wavelet(wavelet)
    x = np.random.default_rng(31).standard_t(5, 7 * (1 << 14) + 333)
    assert pw.usable(x.shape[0], w, mode, depth)
    layouts = _layouts(x.shape[0], w, mode, depth)
    got = pw.node_sums(x, w, mode, depth, layouts, workers=1)
    tree = pywt.WaveletPacket(x, w, mode, maxlevel=depth)
    for j in range(1, depth + 1):
        m = tree[_path(j, 0)].data.shape[0]
        units = pw.units_of(m, layouts[j - 1])
        rows = np.stack([tree[_path(j, r)].data for r in range(1 << j)])
        per = np.zeros((1 << j) * (units.shape[0] - 1) * 4)
        pw._compiled.sums(rows, 1 << j, 0, 0, m, units, per)
        per = per.reshape(1 << j, units.shape[0] - 1, 4)
        for k, (a, b) in enumerate(layouts[j - 1]):
            ua, ub = np.searchsorted(units, a), np.searchsorted(units, b)
            want = np.cumsum(per[:, ua:ub], axis=1)[:, -1] if ub > ua else 0 * got[j - 1][:, k]
            if X86:
                np.testing.assert_array_equal(got[j - 1][:, k], want)
            else:
                np.testing.assert_allclose(got[j - 1][:, k], want, rtol=1e-12, atol=1e-300)
            # and NumPy's own sums of the same coefficients, within round-off
            c = rows[:, a:b]
            ref = np.stack([c.sum(1), (c ** 2).sum(1), (c ** 3).sum(1), (c ** 4).sum(1)], 1)
            scale = np.stack([np.abs(c).sum(1), (c ** 2).sum(1), (np.abs(c) ** 3).sum(1),
                              (c ** 4).sum(1)], 1)
            assert np.all(np.abs(got[j - 1][:, k] - ref) <= 1e-13 * scale + 1e-300)


@needs_core
@pytest.mark.parametrize("mode", ["symmetric", "zero"])
def test_the_walked_table_is_the_same_for_any_thread_count_and_is_scipy_kurtosis(
        small_pieces, monkeypatch, mode):
    # reference: scipy.stats.kurtosis (Pearson) of PyWavelets' node data, and
    # kurtosis_pair (NumPy's sums) of the same data to round-off; the best band's
    # coefficients are WaveletPacket's own
    monkeypatch.setattr(ib, "THREADS_FROM", 0)
    rng = np.random.default_rng(32)
    x = rng.standard_t(6, 9 * (1 << 14) + 77) + 0.2
    x[5000::3001] += 9.0
    tables = [ib.table(x, 1000.0, "db4", mode, 5, keep_best=True, threads=t) for t in (1, 2, 3)]
    best = tables[0].pop("best_coefficients")
    for t in tables[1:]:
        np.testing.assert_array_equal(t.pop("best_coefficients"), best)
        assert t == tables[0]
    first = tables[0]
    tree = pywt.WaveletPacket(x, "db4", mode, maxlevel=5)
    np.testing.assert_array_equal(best, tree[first["best"]["path"]].data)
    edges = bc.dwt_edges(x.shape[0], 8, 5)
    monkeypatch.setattr(pw, "usable", lambda *a: False)
    old = ib.table(x, 1000.0, "db4", mode, 5)
    assert old["best"]["path"] == first["best"]["path"]
    for lv, lv_old in zip(first["levels"], old["levels"]):
        for b, b_old in zip(lv["bands"], lv_old["bands"]):
            c = tree[b["path"]].data
            k, inner = ib.kurtosis_pair(c, *edges[lv["level"] - 1], bc.MIN_INTERIOR)
            assert b["name"] == b_old["name"] and b["path"] == b_old["path"]
            assert b["kurtosis"] == pytest.approx(k, rel=1e-12)
            assert b["interior_kurtosis"] == pytest.approx(inner, rel=1e-12)
            assert b["kurtosis"] == pytest.approx(stats.kurtosis(c, fisher=False), rel=1e-9)


@needs_core
def test_a_large_mean_takes_the_second_pass_on_the_walked_path(small_pieces):
    # reference: scipy.stats.kurtosis (Pearson) of PyWavelets' node data; a mean 1e4
    # times the spread would lose the raw moments to cancellation
    x = 1e4 + np.random.default_rng(33).standard_normal(6 * (1 << 14) + 5)
    t = ib.table(x, 1000.0, "db4", "symmetric", 3, threads=2)
    tree = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=3)
    for lv in t["levels"]:
        for b in lv["bands"]:
            want = stats.kurtosis(tree[b["path"]].data, fisher=False)
            assert b["kurtosis"] == pytest.approx(want, rel=1e-9)


@needs_core
@pytest.mark.parametrize("threads", [1, 2])
def test_the_walked_table_stops_when_asked(small_pieces, threads):
    x = np.random.default_rng(34).standard_normal(8 * (1 << 14))

    class Enough(Exception):
        pass

    calls = []

    def stop_at_third():
        calls.append(1)
        if len(calls) >= 3:
            raise Enough()

    with pytest.raises(Enough):
        ib.table(x, 1000.0, "db4", "symmetric", 3, check=stop_at_third, threads=threads)
    assert len(calls) == 3


@needs_core
def test_the_compiled_walk_refuses_a_plan_that_reads_outside_its_samples():
    w = pywt.Wavelet("db4")
    x = np.zeros(1000)
    geom = np.array([[0, 1000, 0, 0], [0, 400, 0, 400]], dtype=np.int64)   # taps before 0
    units = np.array([0, 400], dtype=np.int64)
    with pytest.raises(ValueError, match="taps outside"):
        pw._compiled.walk(x, np.array(w.dec_lo), np.array(w.dec_hi), geom.reshape(-1), 1,
                          units, np.array([0, 0, 2], dtype=np.int64), np.zeros(8),
                          np.zeros(2, dtype=np.int64), np.zeros(4000))


@needs_core
@pytest.mark.parametrize("seed", range(12))
def test_random_wavelets_modes_depths_and_lengths_match_pywt(monkeypatch, seed):
    # reference: kurtosis_pair and the data of pywt.WaveletPacket nodes, for a random
    # even-length PyWavelets wavelet, edge-extending mode, depth, length, scale and offset
    import random

    monkeypatch.setattr(pw, "PIECE", 1 << 12)
    monkeypatch.setattr(pw, "UNIT", 64)
    rng = random.Random(seed)
    wavelets = [w for w in pywt.wavelist(kind="discrete") if pywt.Wavelet(w).dec_len % 2 == 0]
    modes = ["symmetric", "zero", "constant", "smooth", "reflect", "antisymmetric",
             "antireflect"]
    while True:
        w = pywt.Wavelet(rng.choice(wavelets))
        mode, depth = rng.choice(modes), rng.randint(1, 6)
        n = rng.randint(4 * pw.step(depth), 9 * pw.step(depth)) + rng.randint(0, 7)
        if depth <= pywt.dwt_max_level(n, w.dec_len) and pw.usable(n, w, mode, depth):
            break
    x = (np.random.default_rng(seed).standard_t(4, n) * rng.choice([1e-3, 1.0, 1e3])
         + rng.choice([0.0, 0.5]))
    t = ib.table(x, 1000.0, w.name, mode, depth, keep_best=True, threads=rng.choice([1, 2, 3]))
    tree = pywt.WaveletPacket(x, w, mode, maxlevel=depth)
    edges = bc.dwt_edges(n, w.dec_len, depth)
    for lv in t["levels"]:
        for b in lv["bands"]:
            k, inner = ib.kurtosis_pair(tree[b["path"]].data, *edges[lv["level"] - 1],
                                        bc.MIN_INTERIOR)
            for got, want in ((b["kurtosis"], k), (b["interior_kurtosis"], inner)):
                assert (got is None) == (want is None)
                if got is not None:
                    assert got == pytest.approx(want, rel=1e-10)
    np.testing.assert_array_equal(t["best_coefficients"], tree[t["best"]["path"]].data)
