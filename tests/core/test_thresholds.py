"""Threshold rules against their published definitions and scikit-image."""

import math

import numpy as np
import pytest
import pywt
from scipy import stats
from scipy.optimize import minimize_scalar
from skimage.restoration import denoise_wavelet, estimate_sigma

from scalesieve.core import thresholds as th
from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit


def test_mad_constant_is_normal_quartile():
    # Donoho & Johnstone 1994: sigma = median|d1| / 0.6745, 0.6745 = Phi^-1(0.75)
    # (scipy.stats.norm.ppf as the reference).
    assert th.MAD_TO_SIGMA == pytest.approx(stats.norm.ppf(0.75), abs=1e-15)


def test_mad_sigma_matches_skimage_estimate():
    # scikit-image estimate_sigma uses the finest diagonal detail of a db2 DWT.
    rng = np.random.default_rng(11)
    x = 0.3 * rng.standard_normal(8192)
    d1 = pywt.wavedecn(x, "db2", level=1)[-1]["d"]
    assert th.mad_sigma(d1) == pytest.approx(estimate_sigma(x), rel=1e-12)


def _test_signal(n=4096, seed=7):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / n
    clean = 0.6 * np.sin(2 * np.pi * 5 * t) + 0.3 * (t > 0.4) - 0.2 * (t > 0.7)
    return clean + 0.05 * rng.standard_normal(n)


@pytest.mark.parametrize("shape", ["soft", "hard"])
@pytest.mark.parametrize("wavelet,level", [("db4", 5), ("sym8", 4), ("haar", 6)])
def test_visushrink_equals_skimage(shape, wavelet, level):
    # Reference: skimage.restoration.denoise_wavelet(method="VisuShrink") with
    # sigma from the finest detail level (its default) and symmetric mode.
    x = _test_signal()
    ref = denoise_wavelet(x, wavelet=wavelet, mode=shape, wavelet_levels=level,
                          method="VisuShrink", rescale_sigma=True)
    rec = Recording(x, 1000.0, ["x"])
    m = DecompositionModel(rec, TransformSpec("dwt", wavelet, level, "symmetric"),
                           [Edit("threshold", levels="details", rule="universal", shape=shape,
                                 noise="finest")])
    assert np.allclose(m.cleaned(0), ref, rtol=0, atol=1e-10)


@pytest.mark.parametrize("shape", ["soft", "hard"])
@pytest.mark.parametrize("wavelet,level", [("db4", 5), ("coif2", 4)])
def test_bayesshrink_equals_skimage(shape, wavelet, level):
    # Reference: skimage.restoration.denoise_wavelet(method="BayesShrink"):
    # per-level lambda_j = sigma^2 / sqrt(max(mean(d_j^2) - sigma^2, eps)),
    # Chang, Yu & Vetterli 2000.
    x = _test_signal(seed=8)
    ref = denoise_wavelet(x, wavelet=wavelet, mode=shape, wavelet_levels=level,
                          method="BayesShrink", rescale_sigma=True)
    rec = Recording(x, 1000.0, ["x"])
    m = DecompositionModel(rec, TransformSpec("dwt", wavelet, level, "symmetric"),
                           [Edit("threshold", levels="details", rule="bayes", shape=shape,
                                 noise="finest")])
    assert np.allclose(m.cleaned(0), ref, rtol=0, atol=1e-10)


def test_universal_threshold_formula():
    # Donoho & Johnstone 1994: lambda = sigma sqrt(2 ln n).
    assert th.universal_threshold(2.0, 1000) == pytest.approx(2.0 * math.sqrt(2 * math.log(1000)))


def _sure_brute(x, t):
    # Donoho & Johnstone 1995, eq. for Stein's unbiased risk of soft
    # thresholding with unit noise, written out term by term.
    x = np.asarray(x)
    return x.size - 2 * np.sum(np.abs(x) <= t) + np.sum(np.minimum(x ** 2, t ** 2))


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_sure_threshold_is_brute_force_minimum(seed):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal(500)
    x[:40] += rng.uniform(2, 6, 40) * rng.choice([-1, 1], 40)   # some signal
    t = th.sure_threshold(x)
    grid = np.concatenate([[0.0], np.abs(x), np.linspace(0, 5, 2001)])
    risks = np.array([_sure_brute(x, g) for g in grid])
    assert _sure_brute(x, t) == pytest.approx(risks.min(), abs=1e-9)
    assert th.sure_risk(x, t)[0] == pytest.approx(_sure_brute(x, t))


def test_sureshrink_uses_universal_on_pure_noise():
    # Donoho & Johnstone 1995 hybrid: a sparse (noise-only) level gets the
    # universal threshold.
    rng = np.random.default_rng(9)
    d = rng.standard_normal(4096)
    assert th.sureshrink_threshold(d, 1.0) == pytest.approx(math.sqrt(2 * math.log(4096)))


def _soft_risk(lam, mu):
    # Risk of soft thresholding one N(mu, 1) observation (Donoho & Johnstone 1994),
    # written with scipy.stats.norm.
    phi, Phi = stats.norm.pdf, stats.norm.cdf
    return (1 + lam ** 2 + (mu ** 2 - lam ** 2 - 1) * (Phi(lam - mu) - Phi(-lam - mu))
            - (lam - mu) * phi(lam + mu) - (lam + mu) * phi(lam - mu))


@pytest.mark.parametrize("n", [128, 1024, 16384])
def test_minimax_lambda_minimises_its_definition(n):
    # lambda*(n) minimises sup_mu rho(lambda, mu) / (1/n + min(mu^2, 1)),
    # Donoho & Johnstone 1994; the sup and argmin recomputed here with SciPy.
    mus = np.concatenate([np.linspace(0, 1, 1001), np.linspace(1, 15, 8001)])

    def worst(lam):
        return np.max(_soft_risk(lam, mus) / (1.0 / n + np.minimum(mus ** 2, 1.0)))

    best = minimize_scalar(worst, bounds=(0.1, 5.0), method="bounded",
                           options={"xatol": 1e-6}).x
    assert th.minimax_lambda(n) == pytest.approx(best, abs=2e-3)


@pytest.mark.parametrize("n,table", [(64, 1.474), (128, 1.669), (256, 1.860)])
def test_minimax_lambda_near_published_table(n, table):
    # Donoho & Johnstone 1994, table of minimax thresholds (values from memory).
    assert th.minimax_lambda(n) == pytest.approx(table, abs=0.005)
@pytest.mark.parametrize("shape", ["hard", "soft", "garrote"])
def test_shapes_follow_pywavelets(shape):
    x = np.linspace(-3, 3, 61)
    assert np.array_equal(th.apply_shape(x, 1.0, shape), pywt.threshold(x, 1.0, mode=shape))


def test_soft_is_gain_max_0_1_minus_lambda_over_c():
    # DESIGN: soft thresholding is the per-coefficient gain max(0, 1 - lambda/|c|).
    x = np.array([-3.0, -0.5, 0.2, 1.0, 2.0, 4.0])
    gain = np.maximum(0, 1 - 1.0 / np.abs(x))
    assert np.allclose(th.apply_shape(x, 1.0, "soft"), gain * x)


def test_soft_risk_takes_exp_from_the_c_library():
    # The minimax threshold is a numerical search over this risk; NumPy's vector exp on
    # some processors differs from the C library's in the last bit, which moved the
    # search's end from machine to machine.  Reference: Python's math.exp, element by
    # element, in the risk's closed form (Donoho & Johnstone 1994).
    from scipy.special import ndtr

    mu = np.linspace(0.0, 20.0, 4001)
    lam = 2.3
    phi = lambda z: np.array([math.exp(-0.5 * v * v) for v in z]) / math.sqrt(2 * math.pi)  # noqa: E731
    want = (1 + lam ** 2 + (mu ** 2 - lam ** 2 - 1) * (ndtr(lam - mu) - ndtr(-lam - mu))
            - (lam - mu) * phi(lam + mu) - (lam + mu) * phi(lam - mu))
    assert np.array_equal(th.soft_risk(lam, mu), want)
