"""Band figures (core/band_figures.py, the model's band_table) against outside computations.

Expected values come from PyWavelets itself (wavedec/waverec, swt/iswt: a
band's time-domain component is the band alone through PyWavelets' inverse),
NumPy sums and SciPy's kurtosis; the published facts are named beside each check.
"""

import warnings

import numpy as np
import pytest
import pywt
from scipy.stats import kurtosis as scipy_kurtosis

from scalesieve import api
from scalesieve.core import band_figures as bf
from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit


def _signal(n=3001, seed=2):
    t = np.arange(n) / 1000.0
    rng = np.random.default_rng(seed)
    return (0.5 + 0.3 * t + np.sin(2 * np.pi * 7 * t) + 0.2 * np.sin(2 * np.pi * 180 * t)
            + 0.05 * rng.standard_normal(n))


def _pywt_components(x, wavelet, mode, level):
    """Each band alone through pywt.waverec: (components, coefficients), PyWavelets order."""
    c = pywt.wavedec(x, wavelet, mode=mode, level=level)
    comps = []
    for i in range(len(c)):
        alone = [b if k == i else np.zeros_like(b) for k, b in enumerate(c)]
        comps.append(pywt.waverec(alone, wavelet, mode=mode)[:x.shape[0]])
    return comps, c


@pytest.mark.parametrize("mode", pywt.Modes.modes)
def test_dwt_band_shares_are_the_components_energies_for_every_mode(mode):
    # docs/reference.md: energy = sum of squares of the band's time-domain
    # component; the components come from PyWavelets' waverec, one band at a time.
    x = _signal()
    level = 5
    m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]),
                           TransformSpec("dwt", "db4", level, mode))
    comps, coeffs = _pywt_components(x, "db4", mode, level)
    ex = float(np.sum(x ** 2))
    for row in m.band_table(0):
        idx = tf.band_index("a" if row["kind"] == "approx" else row["level"], level)
        e = float(np.sum(comps[idx] ** 2))
        assert row["energy"] == pytest.approx(e, rel=1e-9, abs=1e-12 * ex)
        assert row["energy_fraction"] == pytest.approx(e / ex, rel=1e-9, abs=1e-12)
        assert row["coef_energy"] == pytest.approx(float(np.sum(coeffs[idx] ** 2)), rel=1e-12)
        assert row["rms"] == pytest.approx(np.sqrt(e / x.shape[0]), rel=1e-9, abs=1e-12)
        assert row["peak"] == pytest.approx(float(np.max(np.abs(comps[idx]))), rel=1e-9,
                                            abs=1e-12)


def test_periodization_orthogonal_shares_sum_to_one():
    # Mallat, Wavelet Tour: the orthonormal periodized DWT keeps sum x^2, so
    # component and coefficient energies agree and the shares sum to 1.
    x = _signal(4096)
    m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]),
                           TransformSpec("dwt", "sym6", 6, "periodization"))
    rows = m.band_table(0)
    assert sum(r["energy_fraction"] for r in rows) == pytest.approx(1.0, rel=1e-10)
    for r in rows:
        assert r["energy"] == pytest.approx(r["coef_energy"], rel=1e-9, abs=1e-12)


def test_symmetric_shares_differ_from_coefficient_shares_where_extension_counts():
    # The point of the contract's change: with a trend, the deep bands'
    # coefficients carry the symmetric extension, so their coefficient share is
    # not what the band adds to the samples (components from PyWavelets).
    x = _signal(3001)
    comps, coeffs = _pywt_components(x, "db4", "symmetric", 7)
    m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]),
                           TransformSpec("dwt", "db4", 7, "symmetric"))
    a = m.band_table(0)[-1]
    coef_share = float(np.sum(coeffs[0] ** 2)) / sum(float(np.sum(c ** 2)) for c in coeffs)
    assert a["energy_fraction"] == pytest.approx(float(np.sum(comps[0] ** 2) / np.sum(x ** 2)),
                                                 rel=1e-9)
    assert abs(a["energy_fraction"] - coef_share) > 1e-3


@pytest.mark.parametrize("wavelet", ["haar", "db4", "sym5", "coif2", "bior3.5"])
@pytest.mark.parametrize("mode", ["symmetric", "periodization", "zero"])
def test_swt_band_components_equal_pywavelets_iswt(wavelet, mode):
    # The FFT filtering of transforms._swt_band_alone against pywt.iswt with
    # every other band zero (PyWavelets' own inverse, norm=True as forward uses).
    n = 1500
    x = _signal(n, seed=5)
    spec = TransformSpec("swt", wavelet, 5, mode).resolved(n)
    coeffs = tf.forward(x, spec)
    for key in tf.band_keys(5):
        idx = tf.band_index(key, 5)
        alone = [c if i == idx else np.zeros_like(c) for i, c in enumerate(coeffs)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            ref = pywt.iswt(alone, wavelet, norm=True)[:n]
        got = tf.band_component(coeffs, key, spec, n)
        assert np.max(np.abs(got - ref)) <= 1e-12 * max(1.0, float(np.max(np.abs(ref))))


def test_swt_band_table_energies_from_pywavelets():
    # SWT: components from pywt.swt / pywt.iswt (padded as the model pads, then cut).
    n = 2000
    x = _signal(n, seed=8)
    m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]),
                           TransformSpec("swt", "db2", 4, "periodization"))
    total = tf.swt_padded_length(n, 4)
    xp = pywt.pad(x, (0, total - n), "periodic")
    c = pywt.swt(xp, "db2", level=4, trim_approx=True, norm=True)
    for row in m.band_table(0):
        idx = tf.band_index("a" if row["kind"] == "approx" else row["level"], 4)
        alone = [b if i == idx else np.zeros_like(b) for i, b in enumerate(c)]
        comp = pywt.iswt(alone, "db2", norm=True)[:n]
        assert row["energy"] == pytest.approx(float(np.sum(comp ** 2)), rel=1e-9)
        assert row["coef_energy"] == pytest.approx(float(np.sum(c[idx] ** 2)), rel=1e-12)


def test_kurtosis_is_pearson_of_the_coefficients():
    # SciPy's kurtosis with fisher=False is Pearson's E[(x-m)^4]/var^2.
    rng = np.random.default_rng(11)
    c = rng.standard_t(5, 50001)
    _, k = bf.coefficient_moments(c)
    assert k == pytest.approx(float(scipy_kurtosis(c, fisher=False)), rel=1e-10)
    # Gaussian: 3 (normal distribution), within sampling error
    assert bf.coefficient_moments(rng.standard_normal(200000))[1] == pytest.approx(3.0, abs=0.05)


@pytest.mark.parametrize("kind", ["dwt", "swt"])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_constant_recording_has_no_kurtosis_in_its_details(kind, dtype):
    # A constant has no detail at all (every wavelet has a zero mean: Daubechies
    # 1992); what the details hold is round-off, and the table says null.
    rec = Recording(np.full((4096, 1), 0.7, dtype=dtype), 8000.0, ["c"])
    m = DecompositionModel(rec, TransformSpec(kind, "db4", 6, "symmetric"))
    rows = m.band_table(0)
    assert all(r["kurtosis"] is None for r in rows if r["kind"] == "detail")


def test_a_quiet_real_band_keeps_its_kurtosis():
    # A tone 120 dB below the rest is far above float64 round-off (eps 2.2e-16).
    n = 8192
    t = np.arange(n)
    x = np.sin(2 * np.pi * t / 512) + 1e-6 * np.random.default_rng(1).standard_normal(n)
    m = DecompositionModel(Recording(x[:, None], 1.0, ["x"]),
                           TransformSpec("dwt", "db8", 5, "periodization"))
    assert m.band_table(0)[0]["kurtosis"] == pytest.approx(3.0, abs=0.5)


def test_metrics_are_the_same_bits_with_or_without_neighbours():
    # The same samples give the same figures: a mono recording against the
    # same column inside a two-channel one (numbers compared with ==).
    n = 50000
    rng = np.random.default_rng(4)
    x = rng.standard_normal(n)
    other = rng.standard_normal(n)
    edits = [Edit("threshold", levels="details", rule="universal", shape="soft")]
    mono = DecompositionModel(Recording(x[:, None].copy(), 1000.0, ["x"]),
                              TransformSpec("dwt", "db4", 6), edits)
    both = DecompositionModel(Recording(np.column_stack([other, x]), 1000.0, ["o", "x"]),
                              TransformSpec("dwt", "db4", 6), edits)
    a, b = mono.metrics(0), both.metrics(1)
    for key in ("energy_removed_fraction", "rms_original", "rms_cleaned", "rms_removed",
                "snr_db", "peak_change"):
        assert a[key] == b[key], key
    assert mono.band_table(0) == both.band_table(1)


@pytest.mark.parametrize("kind", ["dwt", "swt"])
def test_undoing_every_edit_gives_the_recording_exactly(kind):
    x = _signal(4000, seed=3)
    m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]), TransformSpec(kind, "db4", 5))
    m.add_edit(Edit("gain", levels=(2,), gain=0.3))
    m.add_edit(Edit("region", levels=(1,), start_s=1.0, stop_s=1.5, gain=0.0))
    m.undo()
    m.undo()
    assert np.array_equal(m.cleaned(0), x)            # not x plus round-off
    assert not m.removed(0).any()


def test_swt_finest_noise_follows_each_levels_white_noise():
    # Percival & Walden 2000 (MODWT): white noise of sigma gives sigma 2^-j/2 at
    # level j of the normalised SWT; measured here with PyWavelets' swt and NumPy.
    rng = np.random.default_rng(9)
    x = rng.standard_normal(1 << 16)
    c = pywt.swt(x, "db4", level=6, trim_approx=True, norm=True)
    s1 = float(np.std(c[-1]))
    for j in range(1, 7):
        measured = float(np.std(c[tf.band_index(j, 6)])) / s1
        assert th.white_noise_gain("swt", j, 6) == pytest.approx(measured, rel=0.03)
    assert th.white_noise_gain("dwt", 5, 6) == 1.0


def test_swt_universal_finest_keeps_the_tones_of_a_noisy_recording():
    # VisuShrink (Donoho & Johnstone 1994) with sigma from d1 carried per level:
    # on tones plus white noise the SWT removes about what the DWT removes (level
    # 1's sigma unchanged at every level would take a large part of the tones).
    rate = 8000.0
    t = np.arange(1 << 15) / rate
    tones = 0.3 * np.sin(2 * np.pi * 173 * t) + 0.2 * np.sin(2 * np.pi * 25 * t)
    x = tones + 0.01 * np.random.default_rng(2).standard_normal(t.size)
    removed, kept = {}, {}
    for kind in ("dwt", "swt"):
        m = api.build_model(Recording(x[:, None], rate, ["x"]),
                            transform=TransformSpec(kind, "db4", 8),
                            edits=[Edit("threshold", levels="details", rule="universal",
                                        shape="soft", noise="finest")])
        removed[kind] = m.metrics(0)["energy_removed_fraction"]
        # what is left of each tone's FFT bin (numpy.fft)
        spec_x = np.abs(np.fft.rfft(x))
        spec_c = np.abs(np.fft.rfft(m.cleaned(0)))
        for f in (25, 173):
            k = int(round(f * t.size / rate))
            kept[kind, f] = spec_c[k] / spec_x[k]
    assert removed["dwt"] < 0.01 and removed["swt"] < 2 * removed["dwt"], removed
    for f in (25, 173):
        assert kept["dwt", f] > 0.9 and kept["swt", f] > kept["dwt", f] - 0.03, kept


def test_threshold_drawn_is_the_threshold_applied():
    # BayesShrink (Chang, Yu & Vetterli 2000) on the band as it stands when the
    # edit applies: lambda = sigma^2 / sqrt(max(mean(d^2) - sigma^2, eps)), here
    # worked out with NumPy from PyWavelets' coefficients.
    x = 0.05 * np.random.default_rng(6).standard_normal(4096)
    x[100::400] += 2.0                       # sparse spikes: a band above its noise
    e = Edit("threshold", levels=(2,), rule="bayes", shape="soft", noise="level")
    m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]),
                           TransformSpec("dwt", "db4", 4, "symmetric"), [e])
    d2 = pywt.wavedec(x, "db4", mode="symmetric", level=4)[-2]
    nz = np.abs(d2[d2 != 0])
    sigma = float(np.median(nz)) / 0.6744897501960817
    lam = sigma ** 2 / np.sqrt(float(np.mean(d2 ** 2)) - sigma ** 2)
    assert m.threshold_for(0, 2, m.edits[0]) == pytest.approx(lam, rel=1e-9)
    np.testing.assert_allclose(m.edited_coefficients(0, 2), pywt.threshold(d2, lam, "soft"),
                               rtol=1e-9, atol=1e-12)


def test_swt_universal_on_the_demo_removes_about_what_the_dwt_removes():
    # The demo pump recording (sample_signals/README.md): white noise sigma 0.008
    # against an RMS of 0.102, i.e. 0.6 % of the energy, plus tones and impacts.
    # A universal soft threshold with level 1's sigma carried per level takes
    # a small share with either transform, and the SWT shrinks the blade-pass
    # tone (173.25 Hz) no more than the DWT does (soft shrinkage takes ~1/7 of it).
    import os

    path = os.path.join(os.path.dirname(__file__), "..", "..", "sample_signals",
                        "pump_bearing.wav")
    rec = api.load(path)
    x = rec.samples[:, 0]
    out, kept = {}, {}
    for kind in ("dwt", "swt"):
        m = api.build_model(rec, transform=TransformSpec(kind=kind),
                            edits=[Edit("threshold", levels="details", rule="universal",
                                        shape="soft")])
        out[kind] = m.metrics(0)["energy_removed_fraction"]
        k = int(round(173.25 * x.shape[0] / rec.rate))
        kept[kind] = abs(np.fft.rfft(m.cleaned(0))[k]) / abs(np.fft.rfft(x)[k])
    assert out["dwt"] < 0.03 and out["swt"] < 1.5 * out["dwt"], out
    assert kept["dwt"] > 0.8 and kept["swt"] > kept["dwt"] - 0.05, kept


def test_rows_come_in_the_contracts_order():
    # docs/reference.md: bands listed d1 ... dJ, then aJ.
    x = _signal(2048)
    for kind in ("dwt", "swt"):
        m = DecompositionModel(Recording(x[:, None], 1000.0, ["x"]),
                               TransformSpec(kind, "db2", 4))
        assert [r["name"] for r in m.band_table(0)] == ["d1", "d2", "d3", "d4", "a4"]


def test_demo_shares_are_pywavelets_component_energies():
    # The demo pump recording, default transform (db4, symmetric, level 11):
    # a11 and d9 shares against the components' energies from pywt.waverec.
    import os

    path = os.path.join(os.path.dirname(__file__), "..", "..", "sample_signals",
                        "pump_bearing.wav")
    rec = api.load(path)
    x = rec.samples[:, 0]
    rows = {r["name"]: r for r in api.build_model(rec).band_table(0)}
    comps, _ = _pywt_components(x, "db4", "symmetric", 11)
    ex = float(np.sum(x ** 2))
    assert rows["a11"]["energy_fraction"] == pytest.approx(np.sum(comps[0] ** 2) / ex, rel=1e-9)
    assert rows["d9"]["energy_fraction"] == pytest.approx(
        np.sum(comps[tf.band_index(9, 11)] ** 2) / ex, rel=1e-9)
