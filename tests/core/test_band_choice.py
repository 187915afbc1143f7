"""The choice of the most impulsive band reads the coefficients the boundary left alone."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import pywt
import soundfile as sf
from scipy import stats

from scalesieve.core import band_choice as bc
from scalesieve.core import impulsive_bands as ib

SAMPLES = Path(__file__).resolve().parents[2] / "sample_signals"


@pytest.mark.parametrize("wavelet", ["haar", "db4", "sym8", "coif3", "bior3.5"])
@pytest.mark.parametrize("n", [1000, 4096, 4099])
def test_edge_counts_are_the_coefficients_pywt_modes_disagree_on(wavelet, n):
    # reference: PyWavelets' wavedec itself. Modes differ only in the extension,
    # so a coefficient the extension does not touch is the same in every mode,
    # and each touched one (next to the interior) differs for a random signal.
    rng = np.random.default_rng(3)
    x = rng.standard_normal(n)
    L = pywt.Wavelet(wavelet).dec_len
    depth = min(5, pywt.dwt_max_level(n, L))
    out = {m: pywt.wavedec(x, wavelet, m, level=depth) for m in ("symmetric", "zero", "constant")}
    edges = bc.dwt_edges(n, L, depth)
    for j in range(1, depth + 1):
        left, right = edges[j - 1]
        ds = [out[m][depth - j + 1] for m in out]
        k = ds[0].shape[0]
        assert all(d.shape[0] == k for d in ds)
        for d in ds[1:]:
            np.testing.assert_allclose(d[left:k - right], ds[0][left:k - right], rtol=0,
                                       atol=1e-12)
        # and the count is tight: the coefficients where some mode differs reach
        # to within one of it (filters with zero end taps, bior*, touch fewer)
        differs = np.flatnonzero(np.max(np.abs(np.array(ds[1:]) - ds[0]), axis=0) > 1e-12)
        seen_left = differs[differs < k // 2].max() + 1 if (differs < k // 2).any() else 0
        seen_right = k - differs[differs >= k // 2].min() if (differs >= k // 2).any() else 0
        if not wavelet.startswith("bior"):
            assert left - 1 <= seen_left <= left and right - 1 <= seen_right <= right


def test_swt_edge_is_where_the_periodic_wrap_stops_mattering():
    # reference: pywt.swt (periodic): a change in the last sample reaches the
    # first coefficients of level j only through the wrap, at most swt_edge of them
    rng = np.random.default_rng(4)
    x = rng.standard_normal(1024)
    y = x.copy()
    y[-1] += 1.0
    L = pywt.Wavelet("db4").dec_len
    a = pywt.swt(x, "db4", level=4, trim_approx=True, norm=True)
    b = pywt.swt(y, "db4", level=4, trim_approx=True, norm=True)
    for j in range(1, 5):
        d = np.abs(a[-j] - b[-j])
        changed = np.flatnonzero(d > 1e-12)
        front = changed[changed < 512]
        assert front.size and front.max() < bc.swt_edge(L, j)


@pytest.mark.parametrize("depth", range(2, 11))
def test_fan_bearing_choice_lands_in_the_resonance_region(depth):
    # sample_signals/README.md: the invented fan's impacts ring at 5200 Hz,
    # the 3.2-6.4 kHz band; the choice must land there at every depth 2..10
    x, rate = sf.read(SAMPLES / "fan_bearing.wav", dtype="float64", always_2d=True)
    best = ib.table(x[:, 0], rate, "db4", "symmetric", depth)["best"]
    assert 3200.0 <= best["low_hz"] and best["high_hz"] <= 6400.0, best


def test_gaussian_noise_interior_kurtosis_is_near_three_and_is_scipy_kurtosis():
    # normal distribution: Pearson kurtosis 3, sampling sd about sqrt(24/n) (common practice);
    # reference: scipy.stats.kurtosis(fisher=False) of the same interior node data
    rng = np.random.default_rng(11)
    x = rng.standard_normal(1 << 16)
    depth = 9
    t = ib.table(x, 1000.0, "db4", "symmetric", depth)
    tree = pywt.WaveletPacket(x, "db4", "symmetric", maxlevel=depth)
    edges = bc.dwt_edges(x.shape[0], 8, depth)
    seen = 0
    for lv in t["levels"]:
        left, right = edges[lv["level"] - 1]
        for b in lv["bands"]:
            c = tree[b["path"]].data
            inner = c[left:c.shape[0] - right]
            if inner.shape[0] < bc.MIN_INTERIOR:
                assert b["interior_kurtosis"] is None
                continue
            seen += 1
            assert b["interior_kurtosis"] == pytest.approx(
                stats.kurtosis(inner, fisher=False), rel=1e-9)
            assert abs(b["interior_kurtosis"] - 3.0) < 7 * math.sqrt(24 / inner.shape[0])
    assert seen > 200


def test_edge_heavy_band_is_not_chosen_over_the_impacts():
    # a drift whose ends differ: the symmetric extension folds it into a kink at
    # each end, which fills the deep bands' edge coefficients; the impacts ring
    # at 300 Hz (fs 1000 Hz) and the choice must land on them
    rng = np.random.default_rng(5)
    rate = 1000.0
    n = 1 << 14
    x = 0.05 * rng.standard_normal(n) + np.linspace(0.0, 30.0, n)
    ring = np.exp(-np.arange(40) / 8.0) * np.sin(2 * np.pi * 300.0 * np.arange(40) / rate)
    for s in range(200, n - 200, 400):
        x[s:s + 40] += ring
    t = ib.table(x, rate, "db4", "symmetric", 8)
    best = t["best"]
    assert best["low_hz"] <= 300.0 <= best["high_hz"], best


def test_kurtosis_z_is_scipys_kurtosistest():
    # Reference: scipy.stats.kurtosistest (Anscombe & Glynn 1983) on the same values
    from scipy import stats

    from scalesieve.core.band_choice import kurtosis_z
    from scalesieve.core.impulsive_bands import kurtosis as pearson

    rng = np.random.default_rng(11)
    for n in (20, 128, 700, 20000):
        for burst in (1.0, 3.0, 8.0):
            x = rng.standard_normal(n)
            x[: max(1, n // 100)] *= burst
            want = stats.kurtosistest(x).statistic
            assert abs(kurtosis_z(pearson(x), n) - want) < 1e-9 * max(1.0, abs(want))


def test_is_impulsive_at_its_level_on_gaussian_noise_and_on_bursts():
    from statistics import NormalDist

    from scalesieve.core.band_choice import is_impulsive, kurtosis_z
    from scalesieve.core.impulsive_bands import kurtosis as pearson

    rng = np.random.default_rng(5)
    x = rng.standard_normal(4096)
    assert not is_impulsive(pearson(x), x.size, bands=10)
    y = x.copy()
    y[::512] = 12.0                      # eight clear impacts
    assert is_impulsive(pearson(y), y.size, bands=10)
    # Bonferroni: the same figure passes for one band and may fail for many
    z1 = NormalDist().inv_cdf(0.99)
    z10 = NormalDist().inv_cdf(1 - 0.01 / 10)
    assert z10 > z1
    assert not is_impulsive(None, 4096)
    assert kurtosis_z(3.0, 4096) < z1


@pytest.mark.parametrize("n", [5, 200, ib.MOMENT_BLOCK + 37, 3 * ib.MOMENT_BLOCK])
@pytest.mark.parametrize("offset", [0.0, 50.0])
def test_kurtosis_pair_is_scipy_kurtosis_of_all_and_of_the_interior(n, offset):
    # reference: scipy.stats.kurtosis(fisher=False) of the whole array and of its
    # interior slice; lengths across the moment blocks, a mean that needs the
    # central (two-pass) moments, and an interior too short to count
    rng = np.random.default_rng(5)
    c = offset + rng.standard_t(5, n)
    left, right = 7, 4
    k, inner = ib.kurtosis_pair(c, left, right, bc.MIN_INTERIOR)
    assert k == pytest.approx(stats.kurtosis(c, fisher=False), rel=1e-9)
    if n - left - right < bc.MIN_INTERIOR:
        assert inner is None
    else:
        assert inner == pytest.approx(stats.kurtosis(c[left:n - right], fisher=False), rel=1e-9)
        assert inner == bc.interior_kurtosis(c, left, right)
