"""The packet tree walked in time pieces: PyWavelets' node data and the whole node's sums."""

from __future__ import annotations

import numpy as np
import pytest
import pywt
from scipy import stats

from scalesieve.core import band_choice as bc
from scalesieve.core import impulsive_bands as ib
from scalesieve.core import packet_moments as pm
from scalesieve.core import threads as th


def _walk(x, w, mode, depth, pieces):
    """Every node of every depth put together from the pieces' owned parts."""
    plan = pm.Plan(x.shape[0], w, mode, depth, pieces)
    stretches = [{"": x[lo:hi]} for lo, hi in plan.need[0]]
    buf = np.empty(pm.MOMENT_BLOCK)
    nodes = {}
    for j in range(1, depth + 1):
        made = [pm.advance(plan, p, j, parents, w, mode, [(0, plan.lengths[j])], buf)
                for p, parents in enumerate(stretches)]
        stretches = [{k: c for k, (c, _) in part.items()} for part in made]
        for path in stretches[0]:
            parts = pm.owned_parts(plan, j, [s[path] for s in stretches], 0, plan.lengths[j])
            nodes[path] = (pm.join(parts), [s[path] for s in stretches],
                           [part[path][1] for part in made], plan, j)
    return plan, nodes


@pytest.mark.parametrize("mode", ["symmetric", "zero", "smooth", "constant", "reflect",
                                  "antisymmetric", "antireflect"])
@pytest.mark.parametrize("wavelet", ["haar", "db4", "bior3.5", "coif2", "sym7"])
def test_pieces_give_pywt_wavelet_packet_nodes_bit_for_bit(wavelet, mode):
    # reference: pywt.WaveletPacket node data of the whole signal
    x = np.random.default_rng(21).standard_normal(3 * pm.MOMENT_BLOCK + 4099)
    w = pywt.Wavelet(wavelet)
    tree = pywt.WaveletPacket(x, w, mode, maxlevel=4)
    plan, nodes = _walk(x, w, mode, 4, 3)
    assert plan.pieces == 3
    for path, (data, *_rest) in nodes.items():
        np.testing.assert_array_equal(data, tree[path].data)


def test_block_sums_across_seams_are_the_whole_nodes_sums_bit_for_bit():
    # reference: the sums of the whole node (PyWavelets' data) taken in one piece
    x = np.random.default_rng(22).standard_t(5, 5 * pm.MOMENT_BLOCK + 77)
    w = pywt.Wavelet("db4")
    _, nodes = _walk(x, w, "symmetric", 2, 3)
    buf = np.empty(pm.MOMENT_BLOCK)
    for path, (data, stretches, sums, plan, j) in nodes.items():
        got = pm.segment_sums(plan, j, (0, plan.lengths[j]), 0, stretches, sums, buf)
        np.testing.assert_array_equal(got, ib._raw_sums(data, buf))


def _big_table(monkeypatch, x, threads, mode="symmetric", wavelet="db4", depth=5):
    monkeypatch.setattr(ib, "THREADS_FROM", 0)
    monkeypatch.setattr(ib, "PIECE_FROM", 64)
    return ib.table(x, 1000.0, wavelet, mode, depth, keep_best=True, threads=threads)


@pytest.mark.parametrize("mode", ["symmetric", "periodization", "zero"])
def test_the_table_does_not_depend_on_the_thread_count(monkeypatch, mode):
    # the same figures, bit for bit, from 1, 2 and 3 threads; each is
    # kurtosis_pair of PyWavelets' node data exactly, and scipy.stats.kurtosis
    # (Pearson) of it within round-off
    rng = np.random.default_rng(23)
    x = rng.standard_t(6, 3 * pm.MOMENT_BLOCK + 1001) + 0.2
    tables = [_big_table(monkeypatch, x, t, mode) for t in (1, 2, 3)]
    for t in tables[1:]:
        np.testing.assert_array_equal(t.pop("best_coefficients"),
                                      tables[0]["best_coefficients"])
    first = tables[0]
    best = first.pop("best_coefficients")
    assert all(t == first for t in tables[1:])
    tree = pywt.WaveletPacket(x, "db4", mode, maxlevel=5)
    np.testing.assert_array_equal(best, tree[first["best"]["path"]].data)
    edges = bc.dwt_edges(x.shape[0], pywt.Wavelet("db4").dec_len, 5)
    for lv in first["levels"]:
        for b in lv["bands"]:
            c = tree[b["path"]].data
            want = ib.kurtosis_pair(c, *edges[lv["level"] - 1], bc.MIN_INTERIOR)
            assert (b["kurtosis"], b["interior_kurtosis"]) == want
            assert b["kurtosis"] == pytest.approx(stats.kurtosis(c, fisher=False), rel=1e-9)


def test_a_large_mean_takes_the_two_pass_way_in_pieces_too(monkeypatch):
    # reference: scipy.stats.kurtosis (Pearson) of PyWavelets' node data; a mean
    # 1e4 times the spread makes the approximation nodes need the second pass
    x = 1e4 + np.random.default_rng(24).standard_normal(2 * pm.MOMENT_BLOCK + 501)
    one, two = (_big_table(monkeypatch, x, t, depth=3) for t in (1, 2))
    one.pop("best_coefficients"), two.pop("best_coefficients")
    assert one == two
    tree = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=3)
    for lv in one["levels"]:
        for b in lv["bands"]:
            want = stats.kurtosis(tree[b["path"]].data, fisher=False)
            assert b["kurtosis"] == pytest.approx(want, rel=1e-9)


def test_thread_count_reads_the_argument_then_the_environment(monkeypatch):
    monkeypatch.delenv(th.ENV, raising=False)
    assert 1 <= th.count() <= th.MOST
    assert th.count(3) == 3
    monkeypatch.setenv(th.ENV, "1")
    assert th.count() == 1 and th.count(2) == 2
    for bad in ("0", "two", "-1", "1.5"):
        monkeypatch.setenv(th.ENV, bad)
        with pytest.raises(ValueError, match=th.ENV):
            th.count()
    with pytest.raises(ValueError, match="threads 0"):
        th.count(0)
