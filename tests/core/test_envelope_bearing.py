"""Kurtosis table, envelope spectrum and bearing lines against outside references."""

from __future__ import annotations

import math

import numpy as np
import pytest
import pywt
from scipy import signal, stats

from scalesieve.core import bearing as br
from scalesieve.core import envelope as en
from scalesieve.core import impulsive_bands as ib


def test_kurtosis_table_is_scipy_kurtosis_of_pywt_packet_nodes():
    # reference: scipy.stats.kurtosis(fisher=False) of WaveletPacket node data, freq order
    rng = np.random.default_rng(0)
    x = rng.standard_normal(4096)
    x[::500] += 8.0
    t = ib.table(x, 1000.0, "db4", "symmetric", 3)
    tree = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=3)
    for lv in t["levels"]:
        nodes = tree.get_level(lv["level"], "freq")
        assert [b["path"] for b in lv["bands"]] == [n.path for n in nodes]
        for b, n in zip(lv["bands"], nodes):
            assert b["kurtosis"] == pytest.approx(stats.kurtosis(n.data, fisher=False), rel=1e-9)
    # the choice reads the interior coefficients (see tests/core/test_band_choice.py)
    allk = [b["interior_kurtosis"] for lv in t["levels"] for b in lv["bands"]]
    assert t["best"]["interior_kurtosis"] == max(k for k in allk if k is not None)


def test_gaussian_noise_gives_kurtosis_near_three():
    # normal distribution: Pearson kurtosis 3; sampling sd about sqrt(24/n) (common practice)
    x = np.random.default_rng(1).standard_normal(1 << 16)
    t = ib.table(x, 1.0, "db4", "periodization", 4)
    for lv in t["levels"]:
        n = (1 << 16) >> lv["level"]
        for b in lv["bands"]:
            assert abs(b["kurtosis"] - 3.0) < 6 * math.sqrt(24 / n)


def test_impulsive_band_is_found_where_the_bursts_ring():
    rate = 16000.0
    rng = np.random.default_rng(2)
    n = 1 << 15
    x = 0.05 * rng.standard_normal(n)
    # ringing of 2 ms: its spectrum (about 1/(pi tau) = 160 Hz wide) sits inside one band;
    # a much shorter ring leaks its onset into the neighbours, which kurtosis then favours
    tt = np.arange(200) / rate
    for k in range(100, n - 200, 1600):
        x[k:k + 200] += np.exp(-tt / 0.002) * np.sin(2 * np.pi * 5250.0 * tt)
    best = ib.table(x, rate, "db8", "symmetric", 4)["best"]
    assert best["low_hz"] <= 5250.0 <= best["high_hz"]


def test_envelope_is_scipy_hilbert_magnitude():
    # reference: scipy.signal.hilbert (analytic signal) for even and odd lengths
    rng = np.random.default_rng(3)
    for n in (1000, 1001):
        x = rng.standard_normal(n)
        np.testing.assert_allclose(en.envelope(x), np.abs(signal.hilbert(x)), atol=1e-10)


def test_envelope_spectrum_of_am_tone_shows_the_modulation_rate():
    # an AM tone (1 + m cos 2 pi fm t) cos 2 pi fc t has envelope 1 + m cos 2 pi fm t:
    # a line at fm of amplitude m (Hann window corrected by its coherent gain)
    rate, n = 10000.0, 20000
    t = np.arange(n) / rate
    x = (1 + 0.4 * np.cos(2 * np.pi * 37.0 * t)) * np.cos(2 * np.pi * 2000.0 * t)
    f, a = en.spectrum(en.envelope(x), rate)
    peak = en.largest_peaks(f, a, 1)[0]
    assert peak["hz"] == pytest.approx(37.0, abs=rate / n)
    assert peak["amplitude"] == pytest.approx(0.4, rel=0.02)


def test_bearing_formulas_evaluated_independently():
    # Randall & Antoni 2011, eqs. 1-4, written out here for one invented bearing
    n, d, D, phi, fr = 12, 9.5, 46.0, 15.0, 25.0
    c = (d / D) * math.cos(math.radians(phi))
    want = {"ftf_hz": 0.5 * fr * (1 - c), "bpfo_hz": 0.5 * n * fr * (1 - c),
            "bpfi_hz": 0.5 * n * fr * (1 + c), "bsf_hz": 0.5 * (D / d) * fr * (1 - c * c)}
    got = br.frequencies(br.Geometry(n, d, D, phi), fr)
    for key in want:
        assert got[key] == pytest.approx(want[key], rel=1e-12)
    # identities of the same formulas: BPFO + BPFI = n f_r, BPFO = n FTF
    assert got["bpfo_hz"] + got["bpfi_hz"] == pytest.approx(n * fr)
    assert got["bpfo_hz"] == pytest.approx(n * got["ftf_hz"])


def test_bearing_geometry_errors_are_plain():
    for bad in ("9,7.5,34.7", "x,1,2,0", "9,40,34.7,0", "9,7.5,34.7,95", "0,1,2,0"):
        with pytest.raises(ValueError):
            br.parse_geometry(bad)


def test_lines_are_matched_to_the_nearest_peak():
    f = np.arange(0, 500, 0.25)
    a = np.full_like(f, 1e-3)
    for h in (1, 2, 3):
        a[np.argmin(np.abs(f - 90.25 * h))] = 0.05 / h       # BPFO 90 Hz with a little slip
    freqs = {"ftf_hz": 9.0, "bpfo_hz": 90.0, "bpfi_hz": 150.0, "bsf_hz": 60.0}
    rows = br.match(br.lines(freqs, 20.0), f, a)
    bpfo = [r for r in rows if r["name"] == "bpfo"]
    assert [r["found_hz"] for r in bpfo] == [90.25, 180.5, 270.75]
    assert bpfo[0]["snr_db"] == pytest.approx(20 * math.log10(0.05 / 1e-3))
    sidebands = [r for r in rows if r["name"] == "bpfi" and r["sideband"]]
    assert sorted(r["hz"] for r in sidebands)[:2] == [130.0, 170.0]


def test_band_envelope_is_scipy_hilbert_on_every_qth_sample():
    # reference: scipy.signal.hilbert; a signal made only of bins inside the band is
    # demodulated exactly from those bins, at every q-th sample
    rng = np.random.default_rng(4)
    n, rate = 60000, 12000.0
    spec = np.zeros(n // 2 + 1, dtype=complex)
    k = np.arange(int(2000 / (rate / n)), int(2600 / (rate / n)))
    spec[k] = rng.standard_normal(k.size) + 1j * rng.standard_normal(k.size)
    x = np.fft.irfft(spec, n)
    env, env_rate, share = en.band_envelope(x, rate, 2000.0, 2600.0)
    q = n // env.shape[0]
    assert q > 1 and env_rate == rate / q and share < 1e-20
    np.testing.assert_allclose(env, np.abs(signal.hilbert(x))[::q], atol=1e-12 * np.abs(x).max())


def test_band_envelope_of_a_packet_band_is_close_to_scipy_hilbert():
    # a packet band leaks beyond its nominal range; what is left out is reported
    from scalesieve.core import packets as wp

    x = np.random.default_rng(5).standard_normal(50000)
    for path in ("dd", "adda"):
        c = wp.band_signal(x, path, "db8", "symmetric")
        lo, hi = wp.range_hz(path, 8000.0)
        env, _, share = en.band_envelope(c, 8000.0, lo, hi)
        ref = np.abs(signal.hilbert(c))[::c.shape[0] // env.shape[0]]
        assert share <= en.MAX_LEFT_OUT
        assert np.sqrt(np.mean((env - ref) ** 2)) <= 3 * np.sqrt(share) * np.sqrt(np.mean(ref ** 2)) + 1e-12


def test_node_envelope_is_scipy_hilbert_of_the_node_coefficients():
    # reference: scipy.signal.hilbert of PyWavelets' node data, scaled by the
    # orthonormal filters' gain 2^(-J/2)
    x = np.random.default_rng(8).standard_normal(1 << 14)
    for path in ("d", "add", "dada"):
        c = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=len(path))[path].data
        rep = en.node_envelope_spectrum(c, len(path), 8000.0)
        env = np.abs(signal.hilbert(c)) * 2.0 ** (-len(path) / 2)
        freqs, amp = en.spectrum(env, 8000.0 / 2 ** len(path))
        np.testing.assert_allclose(rep["amplitude"], amp, atol=1e-12)
        assert rep["resolution_hz"] == pytest.approx(8000.0 / 2 ** len(path) / c.shape[0])


def test_node_envelope_and_component_envelope_find_the_same_modulation():
    # an invented AM tone inside w3.5 (2500-3000 Hz at 8 kHz): the modulation
    # rate is the largest envelope peak both ways, and the component's envelope
    # amplitude (SciPy's Hilbert transform) is matched within a few per cent
    rate, n = 8000.0, 1 << 16
    t = np.arange(n) / rate
    x = (1 + 0.5 * np.cos(2 * np.pi * 31.25 * t)) * np.sin(2 * np.pi * 2750.0 * t)
    fast = en.report(x, rate, "w3.5", "db8", "symmetric", 3)
    slow = en.report(x, rate, "w3.5", "db8", "symmetric", 3, exact=True)
    assert fast["envelope"] == "node" and slow["envelope"] == "component"
    assert fast["resolution_hz"] == pytest.approx(rate / n)          # 2^3 divides n
    for rep in (fast, slow):
        assert rep["peaks"][0]["hz"] == pytest.approx(31.25, abs=rate / n)
    assert fast["peaks"][0]["amplitude"] == pytest.approx(slow["peaks"][0]["amplitude"], rel=0.05)


@pytest.mark.parametrize("mode", ["symmetric", "zero", "smooth", "periodic", "periodization"])
@pytest.mark.parametrize("wavelet", ["haar", "db4", "bior3.5", "coif2"])
def test_dwt_in_two_halves_is_pywt_dwt_bit_for_bit(wavelet, mode):
    # reference: pywt.dwt of the whole array
    from concurrent.futures import ThreadPoolExecutor

    x = np.random.default_rng(9).standard_normal(5001)
    with ThreadPoolExecutor(max_workers=2) as pool:
        a, d = ib._dwt_halves(x, pywt.Wavelet(wavelet), mode, pool)
    want_a, want_d = pywt.dwt(x, wavelet, mode)
    np.testing.assert_array_equal(a, want_a)
    np.testing.assert_array_equal(d, want_d)


def test_kurtosis_with_a_large_mean_and_in_blocks_is_scipy_kurtosis():
    # reference: scipy.stats.kurtosis (Pearson); a mean 1e4 times the spread takes
    # the two-pass way, a long band the blocked raw sums
    rng = np.random.default_rng(10)
    for c in (1e4 + rng.standard_normal(5000), rng.standard_t(5, 3 * ib.MOMENT_BLOCK + 17)):
        assert ib.kurtosis(c) == pytest.approx(stats.kurtosis(c, fisher=False), rel=1e-9)


def test_kurtosis_table_in_two_threads_is_scipy_kurtosis_of_pywt_nodes():
    # from ib.THREADS_FROM samples the root is split in halves and nodes shared
    # between threads; reference: scipy.stats.kurtosis of PyWavelets' node data
    x = np.random.default_rng(12).standard_t(6, ib.THREADS_FROM + 3)
    t = ib.table(x, 1000.0, "db4", "symmetric", 2)
    tree = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=2)
    for lv in t["levels"]:
        for b in lv["bands"]:
            want = stats.kurtosis(tree[b["path"]].data, fisher=False)
            assert b["kurtosis"] == pytest.approx(want, rel=1e-9)


def test_the_kurtosis_table_stops_when_asked_and_asks_once_per_depth():
    # the window's worker stops a table nobody waits for: check() runs before each depth
    x = np.random.default_rng(3).standard_normal(4096)
    calls = []
    ib.table(x, 1000.0, "db4", "symmetric", 4, check=lambda: calls.append(1))
    assert len(calls) == 4

    class Enough(Exception):
        pass

    def stop_at_third():
        calls.append(1)
        if len(calls) > 6:
            raise Enough()

    with pytest.raises(Enough):
        ib.table(x, 1000.0, "db4", "symmetric", 4, check=stop_at_third)


def test_largest_peaks_with_many_tied_maxima_keep_the_full_sort_order():
    # reference: numpy's stable argsort of every local maximum (the order the
    # peaks are defined by), here on values rounded so that many tie
    rng = np.random.default_rng(4)
    amp = np.round(rng.standard_normal(50_000), 1)
    freqs = np.arange(amp.shape[0]) * 0.5
    mid = amp[1:-1]
    idx = np.flatnonzero((mid > amp[:-2]) & (mid >= amp[2:])) + 1
    ref = idx[np.argsort(amp[idx], kind="stable")[::-1][:10]]
    got = en.largest_peaks(freqs, amp)
    assert [p["hz"] for p in got] == [float(freqs[i]) for i in ref]
