"""Peak-preserving decimation checked against a plain per-column loop over the samples."""

import numpy as np
import pytest

from scalesieve.gui.decimate import (BlockEnvelope, block_maxabs, column_edges,
                                     maxabs_columns, maxabs_columns_from_blocks,
                                     minmax_columns, preview_pair, refresh_pair,
                                     trace_points)


def _loop_minmax(y, columns):
    # Reference: Python's own min/max over each column's slice (no reduceat).
    edges = [(i * len(y)) // columns for i in range(columns + 1)]
    return (np.array([min(y[a:b]) for a, b in zip(edges[:-1], edges[1:])]),
            np.array([max(y[a:b]) for a, b in zip(edges[:-1], edges[1:])]))


@pytest.mark.parametrize("n,columns", [(1000, 7), (1000, 1000), (12345, 640), (50, 3)])
def test_minmax_columns_equals_a_loop(n, columns):
    y = np.random.default_rng(n).standard_normal(n)
    lo, hi = minmax_columns(y, columns)
    rlo, rhi = _loop_minmax(y, columns)
    np.testing.assert_array_equal(lo, rlo)
    np.testing.assert_array_equal(hi, rhi)


def test_a_single_spike_survives_decimation():
    # Ten million zeros and one spike: the spike must reach its column.
    y = np.zeros(10_000_000)
    y[7_654_321] = 3.0
    lo, hi = minmax_columns(y, 800)
    assert hi.max() == 3.0 and np.count_nonzero(hi) == 1
    env = BlockEnvelope.of(y, 256)
    elo, ehi = env.columns(0, y.shape[0], 800)
    assert ehi.max() == 3.0


def test_column_edges_leave_no_column_empty():
    e = column_edges(1001, 1000)
    assert np.all(np.diff(e) >= 1) and e[0] == 0 and e[-1] == 1001


def test_block_envelope_refresh_matches_a_fresh_envelope():
    rng = np.random.default_rng(3)
    y = rng.standard_normal(100_003)
    env = BlockEnvelope.of(y, 64)
    y[5000:5100] += 10.0
    env.refresh(5000, 5100, lambda a, b: y[a:b])
    fresh = BlockEnvelope.of(y, 64)
    np.testing.assert_array_equal(env.lo, fresh.lo)
    np.testing.assert_array_equal(env.hi, fresh.hi)


def test_scaled_envelope_is_the_envelope_of_the_scaled_signal():
    y = np.random.default_rng(4).standard_normal(4096)
    for g in (0.0, 0.5, 2.0):
        a = BlockEnvelope.of(y, 16).scaled(g)
        b = BlockEnvelope.of(g * y, 16)
        np.testing.assert_array_equal(a.lo, b.lo)
        np.testing.assert_array_equal(a.hi, b.hi)


def test_envelope_columns_hold_the_true_extremes_within_a_block():
    y = np.random.default_rng(5).standard_normal(200_000)
    env = BlockEnvelope.of(y, 32)
    lo, hi = env.columns(1000, 150_000, 300)
    rlo, rhi = _loop_minmax(y[1000:150_000], 300)
    # Block granularity: each block goes to the column its first sample is in,
    # so a column edge moves back by less than a block; nothing is lost.
    prev_hi = np.concatenate([[-np.inf], rhi[:-1]])
    next_hi = np.concatenate([hi[1:], [-np.inf]])
    assert np.all(hi <= np.maximum(prev_hi, rhi))
    assert np.all(rhi <= np.maximum(hi, next_hi))
    assert hi.max() == rhi.max() and lo.min() == rlo.min()


def test_trace_points_gives_raw_samples_when_zoomed_in():
    y = np.arange(100, dtype=float)
    x, v = trace_points(0.0, 0.01, 100, 0.2, 0.3, 800, lambda a, b: y[a:b])
    np.testing.assert_allclose(x, v * 0.01)


def test_maxabs_columns_equals_a_loop_and_fills_sparse_columns():
    rng = np.random.default_rng(6)
    c = rng.standard_normal(1000)
    first, step = 0.005, 0.01          # coefficient k at 0.005 + 0.01 k seconds
    row = maxabs_columns(c, first, step, 0.0, 10.0, 100)
    times = first + step * np.arange(1000)
    for i in range(100):
        a, b = i * 0.1, (i + 1) * 0.1
        inside = (times >= a - 1e-12) & (times < b - 1e-12)
        assert row[i] == pytest.approx(np.abs(c[inside]).max())
    # Close up a coarse sequence still paints every column (nearest coefficient).
    row = maxabs_columns(c, first, step, 2.0, 2.05, 500)
    assert np.all(row > 0)


def _loop_blocks(y, block):
    # Reference: Python's own min/max over each block's slice.
    starts = range(0, len(y), block)
    return (np.array([min(y[a:a + block]) for a in starts]),
            np.array([max(y[a:a + block]) for a in starts]))


@pytest.mark.parametrize("n,block", [(1000, 8), (1003, 8), (70001, 64), (5, 8)])
def test_paired_refresh_gives_both_envelopes(n, block):
    rng = np.random.default_rng(n)
    x, y = rng.standard_normal(n), rng.standard_normal(n)
    cleaned = BlockEnvelope.of(np.zeros(n), block)
    removed = BlockEnvelope.of(np.zeros(n), block)
    refresh_pair(cleaned, removed, x, y)
    for env, ref in ((cleaned, y), (removed, x - y)):
        lo, hi = _loop_blocks(ref, block)
        np.testing.assert_array_equal(env.lo, lo)
        np.testing.assert_array_equal(env.hi, hi)
    # A change confined to a span: refreshing that span matches the whole again.
    y[n // 3:n // 2] += 5.0
    refresh_pair(cleaned, removed, x, y, n // 3, n // 2)
    for env, ref in ((cleaned, y), (removed, x - y)):
        lo, hi = _loop_blocks(ref, block)
        np.testing.assert_array_equal(env.lo, lo)
        np.testing.assert_array_equal(env.hi, hi)


@pytest.mark.parametrize("n,block", [(10007, 16), (4096, 64), (100, 8)])
def test_preview_pair_within_the_true_envelopes(n, block):
    # Reference: Python's min/max over each block of y and of x - y.  A full
    # budget reads every sample (the exact envelopes); a small one reads a
    # few samples per block: never beyond the true extremes.
    rng = np.random.default_rng(n)
    x, y = rng.standard_normal(n), rng.standard_normal(n)
    blocks = [(a, min(a + block, n)) for a in range(0, n, block)]
    true_y = [(min(y[a:b]), max(y[a:b])) for a, b in blocks]
    true_r = [(min(x[a:b] - y[a:b]), max(x[a:b] - y[a:b])) for a, b in blocks]
    for budget, exact in ((n * block, True), (len(blocks) * 3, False)):
        c = BlockEnvelope(np.zeros(len(blocks)), np.zeros(len(blocks)), block, n)
        r = BlockEnvelope(np.zeros(len(blocks)), np.zeros(len(blocks)), block, n)
        read = []
        preview_pair(c, r, x, lambda idx: read.append(idx.size) or y[idx], 0, n, budget)
        assert sum(read) <= max(budget, len(blocks))        # cost follows the budget
        for k, ((ylo, yhi), (rlo, rhi)) in enumerate(zip(true_y, true_r)):
            if exact:
                assert (c.lo[k], c.hi[k], r.lo[k], r.hi[k]) == (ylo, yhi, rlo, rhi)
            else:
                assert ylo <= c.lo[k] <= c.hi[k] <= yhi
                assert rlo <= r.lo[k] <= r.hi[k] <= rhi


@pytest.mark.parametrize("count,block,columns", [(100000, 16, 700), (65536, 64, 300),
                                                 (5003, 8, 97)])
def test_scale_map_columns_from_block_peaks(count, block, columns):
    # Reference: Python's max of |value| over each column's values (the columns
    # of maxabs_columns), and over that span widened by one block on each side:
    # the block peaks keep every column's largest value and take in at most a
    # block beyond its edges.
    rng = np.random.default_rng(count)
    c = rng.standard_normal(count) * rng.exponential(1.0, count)
    first, step = 0.37, 0.5
    peaks = block_maxabs(c, block)
    assert peaks.tolist() == [max(abs(v) for v in c[a:a + block]) for a in range(0, count, block)]
    t0, t1 = first, first + step * count
    got = maxabs_columns_from_blocks(peaks, block, count, first, step, t0, t1, columns)
    exact = maxabs_columns(c, first, step, t0, t1, columns)
    edges = np.clip(np.ceil((t0 + (t1 - t0) * np.arange(columns + 1) / columns - first) / step),
                    0, count).astype(int)
    for i, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
        assert exact[i] == max(abs(v) for v in c[a:b])
        widened = max(abs(v) for v in c[max(0, a - block):min(count, b + block)])
        assert exact[i] <= got[i] <= widened
    # a view where a column holds fewer than two blocks: the caller reads the values
    assert maxabs_columns_from_blocks(peaks, block, count, first, step, t0, t0 + step * 100,
                                      columns) is None
