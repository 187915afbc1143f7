"""The DWT block by block against PyWavelets' whole-array wavedec / waverec."""

import numpy as np
import pytest
import pywt
from hypothesis import given, settings
from hypothesis import strategies as hs

from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.stream import statistics as st
from scalesieve.stream.dwt import STREAM_MODES, ForwardStream, InverseStream, can_stream


def _forward(x, spec, block, depth=None):
    got = {}
    f = ForwardStream(x.shape[0], spec, lambda key, k0, v: got.setdefault(key, []).append(
        (k0, v.copy())), depth=depth)
    for s in range(0, x.shape[0], block):
        f.feed(x[s:s + block])
    out = {}
    for key, parts in got.items():
        starts = [k0 for k0, _ in parts]
        assert starts == sorted(starts)
        out[key] = np.concatenate([v for _, v in parts])
    return out


def _inverse(coeffs, spec, n, step, block):
    outs = []
    inv = InverseStream(n, spec, lambda s0, seg: outs.append((s0, seg.copy())), block=block)
    keys = tf.band_keys(spec.level)
    pos = dict.fromkeys(keys, 0)
    while any(pos[k] < coeffs[tf.band_index(k, spec.level)].shape[0] for k in keys):
        for k in keys:
            c = coeffs[tf.band_index(k, spec.level)]
            m = min(max(1, c.shape[0] // step), c.shape[0] - pos[k])
            if m > 0:
                inv.put(k, pos[k], c[pos[k]:pos[k] + m])
                pos[k] += m
        inv.pump()
    assert [s for s, _ in outs] == sorted(s for s, _ in outs)
    return np.concatenate([seg for _, seg in outs])


@pytest.mark.parametrize("mode", sorted(STREAM_MODES))
@pytest.mark.parametrize("wavelet,n,level,block", [
    ("db4", 100_003, 7, 7_777), ("sym5", 5_001, 4, 333), ("haar", 77, 3, 10),
    ("bior3.5", 65_537, 9, 65_536), ("coif2", 4_099, 5, 4_099)])
def test_coefficients_and_samples_are_wavedec_and_waverec(mode, wavelet, n, level, block):
    # reference: PyWavelets' wavedec and waverec of the whole recording
    x = np.random.default_rng(n).standard_normal(n)
    spec = TransformSpec("dwt", wavelet, level, mode)
    ref = pywt.wavedec(x, wavelet, mode=mode, level=level)
    got = _forward(x, spec, block)
    for key in tf.band_keys(level):
        assert np.array_equal(got[key], ref[tf.band_index(key, level)]), key
    y = _inverse(ref, spec, n, 7, 1000)
    want = pywt.waverec(ref, wavelet, mode=mode)[:n]
    assert y.shape == want.shape
    np.testing.assert_allclose(y, want, rtol=0, atol=1e-12 * np.max(np.abs(want)))


@settings(max_examples=25, deadline=None)
@given(n=hs.integers(8, 3000), level=hs.integers(1, 5), block=hs.integers(1, 700),
       mode=hs.sampled_from(sorted(STREAM_MODES)), step=hs.integers(1, 9))
def test_any_length_and_block_size(n, level, block, mode, step):
    # reference: pywt.wavedec / pywt.waverec
    wavelet = "db2"
    level = min(level, pywt.dwt_max_level(n, 4))
    if level < 1:
        return
    x = np.random.default_rng(n).standard_normal(n)
    spec = TransformSpec("dwt", wavelet, level, mode)
    ref = pywt.wavedec(x, wavelet, mode=mode, level=level)
    got = _forward(x, spec, block)
    for key in tf.band_keys(level):
        assert np.array_equal(got[key], ref[tf.band_index(key, level)])
    y = _inverse(ref, spec, n, step, max(1, block // 2))
    np.testing.assert_allclose(y, pywt.waverec(ref, wavelet, mode=mode)[:n], rtol=0,
                               atol=1e-12 * np.max(np.abs(x)) * 10)


def test_a_shallow_pass_gives_the_fine_levels_only():
    x = np.random.default_rng(5).standard_normal(10_001)
    spec = TransformSpec("dwt", "db4", 6, "symmetric")
    got = _forward(x, spec, 999, depth=2)
    ref = pywt.wavedec(x, "db4", mode="symmetric", level=2)
    assert set(got) == {1, 2}
    assert np.array_equal(got[1], ref[2]) and np.array_equal(got[2], ref[1])


def test_what_reads_the_far_end_does_not_stream():
    assert not can_stream(TransformSpec("dwt", "db4", 3, "periodic"))
    assert not can_stream(TransformSpec("dwt", "db4", 3, "periodization"))
    assert not can_stream(TransformSpec("swt", "db4", 3, "symmetric"))
    with pytest.raises(ValueError, match="cannot run block by block"):
        ForwardStream(100, TransformSpec("dwt", "db4", 3, "periodization"), print)


@pytest.mark.parametrize("values", [
    np.arange(1, 1002, dtype=float),                       # odd count
    np.arange(-500, 500, dtype=float),                     # even count, with a zero
    np.repeat([0.5, 2.0, 3.0], [400, 1, 400]),             # ties across the middle
    np.random.default_rng(1).standard_normal(100_001) * 1e-3,
    np.random.default_rng(2).laplace(size=50_000) * 1e6,
    np.zeros(10)])
def test_median_in_two_passes_is_numpys(values):
    # reference: numpy.median of the non-zero magnitudes (the MAD of Donoho & Johnstone 1994)
    m = st.MedianOfMagnitudes()
    for _ in range(2):
        for s in range(0, values.shape[0], 777):
            m.add(values[s:s + 777])
        m.end_pass()
        if m.stage == "done":
            break
    a = np.abs(values[values != 0])
    assert m.value == (float(np.median(a)) if a.size else 0.0)


@pytest.mark.parametrize("mode", ["symmetric", "zero", "smooth"])
def test_one_band_alone_is_waverec_with_the_others_zero(mode):
    # reference: pywt.waverec of a coefficient list that is zero but for one band
    n, level = 30_001, 6
    x = np.random.default_rng(9).standard_normal(n)
    spec = TransformSpec("dwt", "db3", level, mode)
    ref = pywt.wavedec(x, "db3", mode=mode, level=level)
    for key in tf.band_keys(level):
        i = tf.band_index(key, level)
        alone = [c if j == i else np.zeros_like(c) for j, c in enumerate(ref)]
        want = pywt.waverec(alone, "db3", mode=mode)[:n]
        outs = []
        inv = InverseStream(n, spec, lambda s0, seg: outs.append(seg.copy()), block=4096,
                            only=key)
        for s in range(0, ref[i].shape[0], 1000):
            inv.put(key, s, ref[i][s:s + 1000])
            inv.pump()
        y = np.concatenate(outs)
        np.testing.assert_allclose(y, want, rtol=0, atol=1e-12 * max(1, np.max(np.abs(want))))
