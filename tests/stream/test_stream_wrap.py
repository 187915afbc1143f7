"""The DWT in the wrapping modes in blocks: ``pywt.wavedec`` of the whole recording."""

import numpy as np
import pytest
import pywt

from scalesieve.core.transforms import TransformSpec
from scalesieve.stream.wrap import WrapForward, WrapInverse, band_edges, edge_samples


def _blocks(x, spec, block, depth=None):
    n = x.shape[0]
    r = edge_samples(n, spec)
    r = n if 2 * r >= n else r
    got = {}

    def put(key, k0, v):
        parts = got.setdefault(key, [])
        assert k0 == sum(p.shape[0] for p in parts)          # blocks come in order
        parts.append(v.copy())
    f = WrapForward(n, spec, put, x[:r], x[n - r:], depth)
    for s in range(0, n, block):
        f.feed(x[s:s + block])
    return {key: np.concatenate(v) for key, v in got.items()}


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
@pytest.mark.parametrize("wavelet,n,level,block", [
    ("haar", 1001, 5, 97), ("db2", 4000, 3, 4096), ("db4", 70_001, 6, 7777),
    ("sym5", 65_536, 4, 1 << 14), ("coif2", 300_003, 7, 50_000), ("bior3.5", 12_345, 4, 1000),
    ("db8", 200, 3, 13)])
def test_coefficients_are_wavedec_of_the_whole_recording(mode, wavelet, n, level, block):
    # reference: PyWavelets' own wavedec on the whole array, same mode
    x = np.random.default_rng(n).standard_normal(n)
    spec = TransformSpec("dwt", wavelet, level, mode)
    got = _blocks(x, spec, block)
    want = pywt.wavedec(x, wavelet, mode=mode, level=level)
    L = pywt.Wavelet(wavelet).dec_len
    for i, key in enumerate(["a"] + list(range(level, 0, -1))):
        c, w = got[key], want[i]
        assert c.shape == w.shape, key
        np.testing.assert_allclose(c, w, rtol=0, atol=1e-14 * np.max(np.abs(w)))
        # bit for bit away from the ends, where PyWavelets sums the wrapped taps apart
        assert np.array_equal(c[L:-L], w[L:-L]), key


def test_a_shallow_pass_gives_the_fine_levels_only():
    # reference: pywt.wavedec's finest two details
    x = np.random.default_rng(2).standard_normal(30_001)
    got = _blocks(x, TransformSpec("dwt", "db3", 6, "periodic"), 4096, depth=2)
    want = pywt.wavedec(x, "db3", mode="periodic", level=6)
    assert sorted(got, key=str) == [1, 2]
    np.testing.assert_allclose(got[1], want[-1], rtol=0, atol=1e-14)
    np.testing.assert_allclose(got[2], want[-2], rtol=0, atol=1e-14)


def test_only_the_wrapping_modes_are_taken():
    with pytest.raises(ValueError, match="does not wrap"):
        WrapForward(100, TransformSpec("dwt", "db4", 3, "symmetric"), print, [], [])


@pytest.mark.parametrize("wavelet,n,level", [
    ("haar", 1001, 3), ("db2", 4000, 5), ("db4", 70_001, 6), ("sym5", 65_536, 7),
    ("bior3.5", 300_003, 4), ("db8", 999, 5)])
def test_periodization_samples_are_waverec_of_wavedec(wavelet, n, level):
    # reference: pywt.waverec(pywt.wavedec(x)) on the whole array, periodization
    x = np.random.default_rng(level).standard_normal(n)
    spec = TransformSpec("dwt", wavelet, level, "periodization")
    r = edge_samples(n, spec)
    r = n if 2 * r >= n else r
    outs = []
    inv = WrapInverse(n, spec, lambda s0, seg: outs.append((s0, seg.copy())),
                      band_edges(x[:r], x[n - r:], n, spec))
    f = WrapForward(n, spec, lambda key, k0, v: inv.put(key, k0, v.copy()), x[:r], x[n - r:])
    for s in range(0, n, 5000):
        f.feed(x[s:s + 5000])
    assert [s0 for s0, _ in outs] == list(np.cumsum([0] + [s.shape[0] for _, s in outs])[:-1])
    y = np.concatenate([s for _, s in outs])
    want = pywt.waverec(pywt.wavedec(x, wavelet, mode="periodization", level=level), wavelet,
                        mode="periodization")[:n]
    assert y.shape == want.shape
    np.testing.assert_allclose(y, want, rtol=0, atol=1e-12)


def test_periodization_output_keeps_pace_with_its_input():
    # a coarse level's synthesis step made blocks of tf.BLOCK outputs, and so waited for
    # most of the recording before the first output: the memory then grew with the length
    from scalesieve.core import transforms as tf

    n, level = 1 << 21, 8
    x = np.random.default_rng(4).standard_normal(n)
    spec = TransformSpec("dwt", "db8", level, "periodization")
    r = edge_samples(n, spec)
    made = [0]
    inv = WrapInverse(n, spec, lambda s0, seg: made.__setitem__(0, s0 + seg.shape[0]),
                      band_edges(x[:r], x[n - r:], n, spec))
    f = WrapForward(n, spec, lambda key, k0, v: inv.put(key, k0, v.copy()), x[:r], x[n - r:])
    lag = 0
    for s in range(0, n, tf.BLOCK):
        f.feed(x[s:s + tf.BLOCK])
        lag = max(lag, f.fed - made[0])
    assert made[0] == n
    # each of the J steps lags by its block (a quarter of tf.BLOCK input samples), plus one
    # block of input: bounded whatever the length
    assert lag <= (level // 4 + 2) * tf.BLOCK < n
