"""Blocked transforms and edits give PyWavelets' and apply_chain's numbers exactly.

The long-recording passes (forward and inverse in blocks, band edits block by
block, region slices from the positions' formula) must not change a single
bit of what the plain functions give; PyWavelets' ``wavedec``/``waverec`` are
the reference.
"""

import numpy as np
import pytest
import pywt

from scalesieve.core import edits as ed
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.recipe import Edit

Cascade = tf._Cascade
WAVELETS = ["haar", "db4", "sym5", "coif2", "bior3.5", "rbio2.4", "dmey"]


@pytest.fixture
def small_blocks(monkeypatch):
    # Blocks of 256 samples: every block edge and the uneven last block get exercised.
    monkeypatch.setattr(tf, "BLOCK", 256)


@pytest.mark.parametrize("wavelet", WAVELETS)
@pytest.mark.parametrize("mode", list(tf.MODES))
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
@pytest.mark.parametrize("halves", [1, 2])
def test_blocked_forward_equals_wavedec(small_blocks, monkeypatch, wavelet, mode, dtype,
                                        halves):
    # Reference: PyWavelets' wavedec, bit for bit, in the same precision; also
    # when the recording is split between two threads (halves=2).
    monkeypatch.setattr(tf, "THREADS_FROM", 0 if halves == 2 else 1 << 62)
    rng = np.random.default_rng(len(wavelet) + len(mode))
    for n in (3001, 4096):
        x = rng.standard_normal(n).astype(dtype)
        level = min(4, tf.max_level(n, wavelet))
        spec = TransformSpec("dwt", wavelet, level, mode)
        got = tf.forward(x, spec, dtype=dtype)
        ref = pywt.wavedec(x, wavelet, mode=mode, level=level)
        assert len(got) == len(ref)
        for g, r in zip(got, ref):
            assert g.dtype == r.dtype
            assert np.array_equal(g, r)


def test_forward_of_a_strided_column(small_blocks):
    # A column of a (n, 2) array decomposes as its contiguous copy does (wavedec).
    x = np.random.default_rng(1).standard_normal((5000, 2))
    spec = TransformSpec("dwt", "db4", 5, "symmetric")
    ref = pywt.wavedec(np.ascontiguousarray(x[:, 1]), "db4", mode="symmetric", level=5)
    assert all(np.array_equal(g, r) for g, r in zip(tf.forward(x[:, 1], spec), ref))


@pytest.mark.parametrize("level", [1, 3, 9])
@pytest.mark.parametrize("n", [1000, 2049, 65537])
def test_two_halves_at_every_depth(small_blocks, monkeypatch, level, n):
    # Reference: PyWavelets' wavedec.  The cut between the halves moves with
    # the depth; every level's cut and the halo before it must give wavedec's bits.
    monkeypatch.setattr(tf, "THREADS_FROM", 0)
    streams = []
    monkeypatch.setattr(tf, "_Cascade", lambda *a, **k: streams.append(1) or Cascade(*a, **k))
    level = min(level, tf.max_level(n, "sym5"))
    x = np.random.default_rng(n + level).standard_normal(n)
    spec = TransformSpec("dwt", "sym5", level, "symmetric")
    ref = pywt.wavedec(x, "sym5", mode="symmetric", level=level)
    assert all(np.array_equal(g, r) for g, r in zip(tf.forward(x, spec), ref))
    # two halves wherever the coarsest level is long enough to cut (4 filter lengths)
    assert len(streams) == (2 if ref[0].shape[0] >= 4 * pywt.Wavelet("sym5").dec_len else 1)


def test_cancelled_forward_stops_both_halves(small_blocks, monkeypatch):
    # A progress callable that raises stops the transform (a superseded load),
    # the second thread included: the exception reaches the caller.
    monkeypatch.setattr(tf, "THREADS_FROM", 0)
    calls = []

    def progress(fraction):
        calls.append(fraction)
        if len(calls) == 3:
            raise KeyboardInterrupt("stop")

    x = np.random.default_rng(4).standard_normal(20000)
    with pytest.raises(KeyboardInterrupt):
        tf.forward(x, TransformSpec("dwt", "db4", 5, "symmetric"), progress=progress)
    assert len(calls) == 3


def test_forward_reports_progress(small_blocks):
    seen = []
    x = np.random.default_rng(2).standard_normal(5000)
    tf.forward(x, TransformSpec("dwt", "db4", 4, "symmetric"), progress=seen.append)
    assert len(seen) > 10
    assert seen == sorted(seen) and seen[-1] == 1.0


@pytest.mark.parametrize("wavelet", WAVELETS)
@pytest.mark.parametrize("mode", ["symmetric", "periodization", "zero", "smooth", "periodic"])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
@pytest.mark.parametrize("halves", [1, 2])
def test_inverse_into_equals_waverec(small_blocks, monkeypatch, wavelet, mode, dtype, halves):
    # Reference: PyWavelets' waverec with zero arrays where inverse_into gets None;
    # also with the blocks of output shared between two threads (halves=2).
    monkeypatch.setattr(tf, "THREADS_FROM", 0 if halves == 2 else 1 << 62)
    rng = np.random.default_rng(3)
    for n in (3001, 4096):
        level = min(4, tf.max_level(n, wavelet))
        spec = TransformSpec("dwt", wavelet, level, mode)
        coeffs = pywt.wavedec(rng.standard_normal(n).astype(dtype), wavelet, mode=mode,
                              level=level)
        lengths = [c.shape[0] for c in coeffs]
        for missing in ({0}, {len(coeffs) - 1}, {1, 2}, set(range(1, len(coeffs))), set()):
            bands = [None if i in missing else c for i, c in enumerate(coeffs)]
            zeros = [np.zeros_like(c) if i in missing else c for i, c in enumerate(coeffs)]
            ref = pywt.waverec(zeros, wavelet, mode=mode)[:n]
            out = np.empty(n, dtype=dtype)
            tf.inverse_into(lambda i: bands[i], lengths, spec, n, out)
            assert np.array_equal(out, ref)
            base = rng.standard_normal(n).astype(dtype)
            into = base.copy()
            tf.inverse_into(lambda i: bands[i], lengths, spec, n, into, base=into)
            assert np.array_equal(into, base - ref)


def test_inverse_into_swt_and_all_zero():
    # SWT: PyWavelets' swt / iswt directly (norm=True, padded to 2^level as the
    # model pads); no band at all gives zeros / base.
    n = 1000
    spec = TransformSpec("swt", "db2", 3, "symmetric").resolved(n)
    x = np.random.default_rng(4).standard_normal(n)
    xp = pywt.pad(x, (0, tf.swt_padded_length(n, 3) - n), "symmetric")
    coeffs = pywt.swt(xp, "db2", level=3, trim_approx=True, norm=True)
    lengths = [c.shape[0] for c in coeffs]
    out = np.empty(n)
    tf.inverse_into(lambda i: coeffs[i], lengths, spec, n, out)
    assert np.array_equal(out, pywt.iswt(coeffs, "db2", norm=True)[:n])
    # one band alone (a component): PyWavelets' iswt with the others zero
    for idx in range(len(coeffs)):
        alone = [c if i == idx else np.zeros_like(c) for i, c in enumerate(coeffs)]
        tf.inverse_into(lambda i: coeffs[i] if i == idx else None, lengths, spec, n, out)
        np.testing.assert_allclose(out, pywt.iswt(alone, "db2", norm=True)[:n], rtol=0,
                                   atol=1e-12)
    dspec = TransformSpec("dwt", "db4", 3, "symmetric")
    dl = [c.shape[0] for c in tf.forward(x, dspec)]
    tf.inverse_into(lambda i: None, dl, dspec, n, out)
    assert not out.any()
    base = x.copy()
    tf.inverse_into(lambda i: None, dl, dspec, n, out, base=base)
    assert np.array_equal(out, x)


def test_band_component_by_inverse_into(small_blocks):
    # The model makes band components with inverse_into, the band table with
    # band_component: both are PyWavelets' waverec of the band alone, bit for bit.
    n = 3001
    for mode in ("symmetric", "periodization"):
        spec = TransformSpec("dwt", "sym5", 4, mode)
        coeffs = pywt.wavedec(np.random.default_rng(5).standard_normal(n), "sym5", mode=mode,
                              level=4)
        lengths = [c.shape[0] for c in coeffs]
        for key in tf.band_keys(4):
            idx = tf.band_index(key, 4)
            alone = [c if i == idx else np.zeros_like(c) for i, c in enumerate(coeffs)]
            ref = pywt.waverec(alone, "sym5", mode=mode)[:n]
            out = np.empty(n)
            tf.inverse_into(lambda i: coeffs[i] if i == idx else None, lengths, spec, n, out)
            assert np.array_equal(out, ref)
            assert np.array_equal(tf.band_component(coeffs, key, spec, n), ref)


@pytest.mark.parametrize("kind", ["dwt", "swt"])
@pytest.mark.parametrize("wavelet", ["haar", "db4", "sym8", "bior3.5"])
@pytest.mark.parametrize("mode", ["symmetric", "periodization"])
def test_coefficient_slice_equals_searchsorted(kind, wavelet, mode):
    # Consistency, not an outside reference: the closed-form slice equals a
    # numpy.searchsorted over coefficient_positions (what region edits used).
    spec = TransformSpec(kind, wavelet, 5, mode)
    rng = np.random.default_rng(6)
    for key in tf.band_keys(5):
        count = 777
        pos = tf.coefficient_positions(key, spec, count)
        probes = list(rng.uniform(pos[0] - 50, pos[-1] + 50, 200)) + list(pos[::37])
        probes += [pos[0], pos[-1], -1e12, 1e12, np.nextafter(pos[3], -np.inf),
                   np.nextafter(pos[3], np.inf)]
        for lo in probes[::3]:
            for hi in probes[1::5]:
                want = slice(int(np.searchsorted(pos, lo, "left")),
                             int(np.searchsorted(pos, hi, "right")))
                assert tf.coefficient_slice(key, spec, count, lo, hi) == want


def _ctx(c, spec, key, rate=1000.0):
    count = c.shape[0]
    return ed.BandContext(
        key=key, n_samples=4 * count, rate=rate,
        positions=lambda: tf.coefficient_positions(key, spec, count),
        sigma_finest=lambda: 0.8, sigma_level=lambda: 1.1,
        span=lambda lo, hi: tf.coefficient_slice(key, spec, count, lo, hi))


CHAINS = [
    (),
    (Edit("gain", levels=(2,), gain=0.5), Edit("gain", levels=(2,), gain=3.0)),
    (Edit("region", levels=(2,), start_s=0.5, stop_s=1.7, gain=0.0),),
    (Edit("region", levels=(2,), start_s=9.0, stop_s=9.5, gain=0.0),),   # selects nothing
    (Edit("gain", levels=(2,), gain=0.7),
     Edit("threshold", levels=(2,), rule="universal", shape="soft"),
     Edit("region", levels=(2,), start_s=1.0, stop_s=2.0, gain=0.25),
     Edit("gain", levels=(2,), gain=2.0)),
    (Edit("region", levels=(2,), start_s=0.2, stop_s=0.9, gain=0.3),
     Edit("threshold", levels=(2,), rule="bayes", shape="hard"),
     Edit("threshold", levels=(2,), rule="sure", shape="garrote", noise="level")),
    (Edit("threshold", levels=(2,), rule="minimax", shape="soft", scale=0.5),
     Edit("threshold", levels=(2,), rule="manual", value=0.0, shape="hard")),
]


@pytest.mark.parametrize("chain", CHAINS)
def test_chain_values_block_by_block_equals_apply_chain(chain):
    # Consistency, not an outside reference: block by block equals ed.apply_chain
    # on the whole band; test_chain_matches_pywavelets_threshold below checks
    # the numbers themselves against PyWavelets.
    spec = TransformSpec("dwt", "db4", 3, "symmetric")
    c = np.random.default_rng(7).standard_normal(700)
    ctx = _ctx(c, spec, 2)
    plain = ed.BandContext(key=2, n_samples=ctx.n_samples, rate=ctx.rate,
                           positions=ctx.positions, sigma_finest=ctx.sigma_finest,
                           sigma_level=ctx.sigma_level)
    want = ed.apply_chain(c, chain, plain)
    lams = ed.chain_thresholds(c, chain, ctx)
    cache: dict = {}
    assert ed.chain_thresholds(c, chain, ctx, cache) == lams
    assert ed.chain_thresholds(c, chain, ctx, cache) == lams       # from the cache
    parts = []
    for b0 in range(0, 700, 123):
        v = ed.chain_values(c[b0:b0 + 123], chain, ctx, lams, b0)
        parts.append(ed.state_values(c[b0:b0 + 123], v))
    assert np.array_equal(np.concatenate(parts), ed.state_values(c, want))
    shape, gain = ed.split_gain(chain, ctx)
    assert (shape == ()) == (not isinstance(want, np.ndarray))
    if not shape:
        assert gain == want
    else:
        # the gain part multiplies what the shape part makes (up to rounding)
        alone = ed.state_values(c, ed.apply_chain(c, shape, plain))
        assert np.allclose(gain * alone, want, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("n,level", [(70001, 9), (20000, 1), (5000, 6)])
def test_inverse_cascade_at_every_depth(small_blocks, monkeypatch, n, level):
    # Reference: PyWavelets' waverec.  Deep levels short enough are made whole,
    # the rest block by block; every split and every window must give its bits.
    monkeypatch.setattr(tf, "THREADS_FROM", 0)
    x = np.random.default_rng(n).standard_normal(n)
    spec = TransformSpec("dwt", "sym5", level, "symmetric")
    coeffs = pywt.wavedec(x, "sym5", mode="symmetric", level=level)
    out = np.empty(n)
    tf.inverse_into(lambda i: coeffs[i], [c.shape[0] for c in coeffs], spec, n, out)
    assert np.array_equal(out, pywt.waverec(coeffs, "sym5", mode="symmetric")[:n])


@pytest.mark.parametrize("shape", ["hard", "soft", "garrote"])
def test_chain_matches_pywavelets_threshold(shape):
    # PyWavelets' pywt.threshold (garrote = its "garrote" mode) after a gain and
    # before a region mute, written out with NumPy: the chain's values.
    spec = TransformSpec("dwt", "db4", 3, "symmetric")
    c = np.random.default_rng(8).standard_normal(700)
    ctx = _ctx(c, spec, 2)
    chain = (Edit("gain", levels=(2,), gain=0.7),
             Edit("threshold", levels=(2,), rule="manual", value=0.4, shape=shape),
             Edit("region", levels=(2,), start_s=1.0, stop_s=2.0, gain=0.0))
    lams = ed.chain_thresholds(c, chain, ctx)
    got = ed.state_values(c, ed.chain_values(c, chain, ctx, lams, 0))
    want = pywt.threshold(0.7 * c, 0.4, shape)
    pos = tf.coefficient_positions(2, spec, c.shape[0]) / ctx.rate
    want[(pos >= 1.0) & (pos <= 2.0)] = 0.0
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=0)
