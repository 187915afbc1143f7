"""Transforms against published worked examples and properties."""

import math

import numpy as np
import pytest
import pywt
from hypothesis import given, settings
from hypothesis import strategies as st

from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec


def test_haar_worked_example():
    # Stollnitz, DeRose & Salesin 1995, "Wavelets for Computer Graphics: A
    # Primer, Part 1": [9 7 3 5] -> averages 6, details 2, 1, -1 unnormalised;
    # the orthonormal Haar gives 12, 4, sqrt2, -sqrt2 (scaled by sqrt2 per level).
    spec = TransformSpec("dwt", "haar", 2, "periodization")
    a2, d2, d1 = tf.forward(np.array([9.0, 7.0, 3.0, 5.0]), spec)
    assert a2 == pytest.approx([12.0])
    assert d2 == pytest.approx([4.0])
    assert d1 == pytest.approx([math.sqrt(2), -math.sqrt(2)])
    # unnormalised: divide by sqrt2 per level
    assert a2[0] / 2 == pytest.approx(6.0)
    assert d2[0] / 2 == pytest.approx(2.0)
    assert d1 / math.sqrt(2) == pytest.approx([1.0, -1.0])
    assert tf.inverse([a2, d2, d1], spec, 4) == pytest.approx([9, 7, 3, 5])


def test_db2_filter_taps():
    # Daubechies 1992 (CBMS-NSF series vol. 61, SIAM), Table 6.1: db2 scaling filter
    # (1+sqrt3)/(4 sqrt2), (3+sqrt3)/(4 sqrt2), (3-sqrt3)/(4 sqrt2), (1-sqrt3)/(4 sqrt2).
    r3, d = math.sqrt(3), 4 * math.sqrt(2)
    expected = np.array([1 + r3, 3 + r3, 3 - r3, 1 - r3]) / d
    # Our transform with db2 is PyWavelets' db2: an impulse through the
    # one-level synthesis reproduces the reconstruction low-pass taps.
    spec = TransformSpec("dwt", "db2", 1, "periodization")
    a = np.zeros(8)
    a[2] = 1.0
    d = np.zeros(8)
    out = tf.inverse([a, d], spec, 16)
    nz = out[np.abs(out) > 1e-12]
    assert np.allclose(np.sort(nz), np.sort(expected))
    assert np.allclose(pywt.Wavelet("db2").rec_lo, expected)


@pytest.mark.parametrize("wavelet", ["haar", "db4", "sym8", "coif3", "db10"])
def test_energy_preserved_orthonormal_dwt(wavelet):
    # Mallat, A Wavelet Tour of Signal Processing, 3rd ed.: an orthonormal
    # DWT (periodized) keeps the sum of squares.
    x = np.random.default_rng(3).standard_normal(4096)
    spec = TransformSpec("dwt", wavelet, 5, "periodization")
    coeffs = tf.forward(x, spec)
    assert sum(float(np.dot(c, c)) for c in coeffs) == pytest.approx(float(np.dot(x, x)), rel=1e-12)


def test_swt_energy_split_by_level():
    # Percival & Walden 2000: the normalised undecimated transform splits the
    # sum of squares by level (for a length the transform needs no padding for).
    x = np.random.default_rng(4).standard_normal(2048)
    coeffs = tf.forward(x, TransformSpec("swt", "db4", 4, "periodization"))
    assert sum(float(np.dot(c, c)) for c in coeffs) == pytest.approx(float(np.dot(x, x)), rel=1e-12)


def test_dyadic_band_edges():
    # common practice: detail level j spans fs/2^(j+1) ... fs/2^j;
    # the approximation at level J spans 0 ... fs/2^(J+1).
    fs = 48000.0
    assert tf.band_range_hz(1, 8, fs) == (12000.0, 24000.0)
    assert tf.band_range_hz(3, 8, fs) == (3000.0, 6000.0)
    assert tf.band_range_hz("a", 8, fs) == (0.0, 93.75)


def test_haar_decay_on_smooth_signal():
    # Mallat, Wavelet Tour, ch. 6: at scale 2^j the detail magnitude of a
    # smooth signal grows like s^(alpha + 1/2); Haar has one vanishing moment,
    # so alpha = 1 and magnitudes fall by 2^1.5 per finer level.
    n = 2 ** 14
    t = np.arange(n) / n
    x = np.sin(2 * np.pi * 1.5 * t) + 0.3 * t * t
    spec = TransformSpec("dwt", "haar", 6, "periodization")
    coeffs = tf.forward(x, spec)
    rms = {j: np.sqrt(np.mean(coeffs[tf.band_index(j, 6)][4:-4] ** 2)) for j in range(1, 7)}
    for j in range(1, 5):
        assert rms[j + 1] / rms[j] == pytest.approx(2 ** 1.5, rel=0.02)


WAVELETS = [w for w in pywt.wavelist(kind="discrete")]


@settings(max_examples=60, deadline=None)
@given(wavelet=st.sampled_from(WAVELETS), mode=st.sampled_from(list(tf.MODES)),
       n=st.integers(min_value=64, max_value=700), seed=st.integers(0, 2 ** 16))
def test_dwt_round_trip_every_family(wavelet, mode, n, seed):
    # Perfect reconstruction of every discrete family and boundary mode
    # (PyWavelets' filters; dmey is an FIR approximation of Meyer and is not
    # exactly invertible, so it is checked separately below).
    x = np.random.default_rng(seed).standard_normal(n)
    spec = TransformSpec("dwt", wavelet, None, mode)
    if tf.max_level(n, wavelet) < 1:
        return
    spec = spec.resolved(n)
    coeffs = tf.forward(x, spec)
    y = tf.inverse(coeffs, spec, n)
    tol = 5e-2 if wavelet == "dmey" else 1e-10
    # Rounding follows the largest magnitude the arithmetic meets: the
    # "smooth" mode extrapolates linearly, so at deep levels its padded
    # coefficients can be hundreds of times the signal.
    scale = max(np.max(np.abs(x)), max(np.max(np.abs(c)) for c in coeffs))
    assert np.max(np.abs(y - x)) <= tol * scale


@settings(max_examples=30, deadline=None)
@given(wavelet=st.sampled_from(["haar", "db2", "db4", "sym5", "coif2", "bior2.4"]),
       mode=st.sampled_from(["symmetric", "periodization", "zero", "reflect"]),
       n=st.integers(min_value=40, max_value=600), level=st.integers(1, 4),
       seed=st.integers(0, 2 ** 16))
def test_swt_any_length_round_trip(wavelet, mode, n, level, seed):
    # SWT needs a multiple of 2^level: we pad and trim back exactly.
    x = np.random.default_rng(seed).standard_normal(n)
    if tf.max_level(n, wavelet) < level:
        return
    spec = TransformSpec("swt", wavelet, level, mode).resolved(n)
    y = tf.inverse(tf.forward(x, spec), spec, n)
    assert y.shape == x.shape
    assert np.max(np.abs(y - x)) <= 1e-10 * np.max(np.abs(x))


def _decomposed(wavelet, mode, seed, n=1001):
    """A random signal's level-4 DWT: spec, coefficients and band lengths."""
    x = np.random.default_rng(seed).standard_normal(n)
    spec = TransformSpec("dwt", wavelet, 4, mode).resolved(n)
    return spec, tf.forward(x, spec), tf.band_lengths(n, spec)


def _placed(start, seg, n):
    """A local synthesis (start, segment) as n samples."""
    got = np.zeros(n)
    got[start:start + len(seg)] = seg
    return got


@pytest.mark.parametrize("mode", ["symmetric", "periodization", "zero", "smooth"])
@pytest.mark.parametrize("wavelet", ["haar", "db4", "bior3.5", "coif2"])
def test_local_synthesis_equals_full_inverse(wavelet, mode):
    # Linearity: a window of coefficients alone reconstructs to the same
    # samples whether done locally or with the whole inverse transform.
    n = 1001
    spec, c, lens = _decomposed(wavelet, mode, 5, n)
    assert lens == [len(a) for a in c]
    for key in tf.band_keys(4):
        i = tf.band_index(key, 4)
        for a, b in [(0, 3), (len(c[i]) // 2, len(c[i]) // 2 + 7), (len(c[i]) - 2, len(c[i]))]:
            z = [np.zeros_like(q) for q in c]
            z[i][a:b] = c[i][a:b]
            ref = tf.inverse(z, spec, n)
            got = _placed(*tf.local_synthesis(c[i][a:b], a, key, lens, spec, n), n)
            assert np.max(np.abs(got - ref)) < 1e-12


@pytest.mark.parametrize("mode", ["symmetric", "periodization", "zero", "smooth"])
@pytest.mark.parametrize("wavelet", ["haar", "db4", "bior3.5"])
def test_local_synthesis_of_several_bands_equals_full_inverse(wavelet, mode):
    # Linearity again (reference: PyWavelets' waverec through tf.inverse): windows
    # of several bands at once give the inverse of coefficients that are zero
    # but for those windows, at the edges and inside.
    n = 1001
    spec, c, lens = _decomposed(wavelet, mode, 6, n)
    for picks in ([1, 2, 3], [2, 4, "a"], [1, "a"], [3]):
        for where in ("start", "middle", "end"):
            z = [np.zeros_like(q) for q in c]
            windows = {}
            for key in picks:
                i = tf.band_index(key, 4)
                m = len(c[i])
                a = {"start": 0, "middle": m // 3, "end": m - 5}[where]
                b = min(m, a + 5 + m // 10)
                z[i][a:b] = c[i][a:b]
                windows[key] = (c[i][a:b], a)
            ref = tf.inverse(z, spec, n)
            got = _placed(*tf.local_synthesis_bands(windows, lens, spec, n), n)
            assert np.max(np.abs(got - ref)) < 1e-12


@pytest.mark.parametrize("kind", ["dwt", "swt"])
def test_coefficient_positions_track_an_impulse(kind):
    # An impulse at a known sample gives its largest fine-level coefficient
    # at the coefficient whose stated position is nearest that sample.
    n, at = 4096, 2001
    x = np.zeros(n)
    x[at] = 1.0
    spec = TransformSpec(kind, "db4", 3, "symmetric").resolved(n)
    c = tf.forward(x, spec)
    for j in (1, 2, 3):
        band = c[tf.band_index(j, 3)]
        pos = tf.coefficient_positions(j, spec, band.shape[0])
        k = int(np.argmax(np.abs(band)))
        assert abs(pos[k] - at) <= 2 ** j + 2


def test_default_level_rule():
    # Two short of the deepest level PyWavelets allows, at most 12, at least 1.
    assert tf.default_level(65536, "db8") == pywt.dwt_max_level(65536, 16) - 2
    assert tf.default_level(10 ** 8, "haar") == 12
    assert tf.default_level(20, "db4") == 1


def test_level_too_deep_is_refused():
    with pytest.raises(ValueError, match="deeper"):
        TransformSpec("dwt", "db4", 30).resolved(1000)
    with pytest.raises(ValueError, match="too few"):
        TransformSpec("dwt", "db20").resolved(10)
