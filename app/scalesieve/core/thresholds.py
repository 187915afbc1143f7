"""Noise estimates, threshold rules and threshold shapes.

References
----------
D. L. Donoho and I. M. Johnstone, "Ideal spatial adaptation by wavelet
shrinkage", Biometrika 81:425-455, 1994 (MAD noise estimate, universal and
minimax thresholds).
D. L. Donoho and I. M. Johnstone, "Adapting to unknown smoothness via wavelet
shrinkage", JASA 90:1200-1224, 1995 (SURE threshold, SureShrink hybrid).
S. G. Chang, B. Yu and M. Vetterli, "Adaptive wavelet thresholding for image
denoising and compression", IEEE TIP 9:1532-1546, 2000 (BayesShrink).
I. M. Johnstone and B. W. Silverman, "Wavelet threshold estimators for data
with correlated noise", JRSS-B 59:319-351, 1997 (level-dependent noise).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import pywt

RULES = ("universal", "sure", "bayes", "minimax", "manual")
SHAPES = ("hard", "soft", "garrote")
NOISE = ("finest", "level")

# Phi^-1(0.75): the MAD of a standard normal variable.
MAD_TO_SIGMA = 0.6744897501960817

def mad_sigma(d: np.ndarray) -> float:
    """Robust noise level ``median(|d|) / 0.6745`` over the non-zero coefficients.

    Zeros are left out (as scikit-image's ``estimate_sigma`` does) so that
    padding or muted coefficients do not pull the estimate down.  The median
    is worked out in the coefficients' own precision and equals
    ``numpy.median``'s bit for bit.  On a long band it is found in two stages
    (the slowest step of detection and of noise estimates otherwise): the
    median of a strided sample brackets it; one pass, block by block in
    cache, counts the non-zero values below the bracket and gathers those
    inside it; only those few are partitioned.  When the bracket misses
    (only if the sample is very unlike the rest) the full partition runs.
    """
    c = np.asarray(d)
    if c.size >= _BRACKET_MIN:
        sample = np.abs(c[:: c.size // _BRACKET_SAMPLE])
        sample = np.sort(sample[sample != 0])
        m = sample.size
        if m >= 16:
            half = int(math.ceil(_BRACKET_SE * 0.5 * math.sqrt(m)))   # 5 SE of the quantile
            lo = sample[max(0, m // 2 - half)]
            hi = sample[min(m - 1, m // 2 + half)]
            nonzero = below = 0
            inside = []
            buf = np.empty(_BRACKET_BLOCK, dtype=sample.dtype)
            for i in range(0, c.size, _BRACKET_BLOCK):
                a = np.abs(c[i:i + _BRACKET_BLOCK], out=buf[: min(_BRACKET_BLOCK, c.size - i)])
                nz = int(np.count_nonzero(a))
                nonzero += nz
                below += int(np.count_nonzero(a < lo)) - (a.size - nz)   # zeros are below lo
                inside.append(a[(a >= lo) & (a <= hi)])
            k0, k1 = (nonzero - 1) // 2, nonzero // 2
            inside_all = np.concatenate(inside)
            if nonzero and below <= k0 and k1 < below + inside_all.size:
                part = np.partition(inside_all, (k0 - below, k1 - below))
                return float(np.mean(part[[k0 - below, k1 - below]]) / MAD_TO_SIGMA)
    a = np.abs(c)
    if np.count_nonzero(a) < a.size:
        a = a[a != 0]
    if a.size == 0:
        return 0.0
    k0, k1 = (a.size - 1) // 2, a.size // 2          # the middle one, or the middle two
    mid = np.partition(a, (k0, k1))[[k0, k1]]
    return float(np.mean(mid) / MAD_TO_SIGMA)


#: below this many values the plain partition is quick enough
_BRACKET_MIN = 1 << 16
#: values in the strided sample that brackets the median
_BRACKET_SAMPLE = 1 << 14
#: half-width of the bracket in standard errors of the sample median
_BRACKET_SE = 5.0
#: values per block of the counting pass (cache-sized)
_BRACKET_BLOCK = 1 << 16


def white_noise_gain(kind: str, key, level: int) -> float:
    """How a transform carries white noise's sigma from level 1 to band ``key``.

    1 at every level of the orthogonal DWT; 2^-(j-1)/2 at level j of the
    normalised SWT (its level-j filters have energy 2^-j: Percival & Walden
    2000, *Wavelet Methods for Time Series Analysis*, MODWT), the
    approximation ``"a"`` taking its level's.  ``noise: finest`` multiplies
    level 1's sigma by this.
    """
    if kind != "swt":
        return 1.0
    j = level if key == "a" else int(key)
    return 2.0 ** (-(j - 1) / 2.0)


def universal_threshold(sigma: float, n: int) -> float:
    """VisuShrink: ``sigma * sqrt(2 ln n)`` (Donoho & Johnstone 1994)."""
    if n < 2:
        return 0.0
    return float(sigma * math.sqrt(2.0 * math.log(n)))


def bayes_threshold(d: np.ndarray, sigma: float) -> float:
    """BayesShrink: ``sigma^2 / sqrt(max(mean(d^2) - sigma^2, eps))``.

    When the band's variance does not exceed the noise the threshold grows
    large and the band is removed, as in Chang, Yu & Vetterli (2000).
    """
    d = np.asarray(d, dtype=np.float64)
    var = sigma * sigma
    if d.size == 0 or var == 0.0:
        return 0.0
    dvar = float(np.mean(d * d))
    eps = float(np.finfo(np.float64).eps)
    return float(var / math.sqrt(max(dvar - var, eps)))


def sure_risk(x: np.ndarray, t: np.ndarray | float) -> np.ndarray:
    """Stein's unbiased risk of soft thresholding unit-variance data at t.

    SURE(t; x) = n - 2 #{|x_i| <= t} + sum_i min(x_i^2, t^2).
    """
    x = np.abs(np.asarray(x, dtype=np.float64))
    t = np.atleast_1d(np.asarray(t, dtype=np.float64))
    n = x.size
    out = np.empty(t.shape)
    for i, ti in enumerate(t):
        out[i] = n - 2 * np.count_nonzero(x <= ti) + np.sum(np.minimum(x * x, ti * ti))
    return out


def sure_threshold(x: np.ndarray) -> float:
    """Threshold minimising SURE for unit-variance data (candidates 0 and |x_i|).

    O(n log n): sort once, then the risk at each candidate follows from
    cumulative sums.
    """
    a = np.sort(np.abs(np.asarray(x, dtype=np.float64)))
    n = a.size
    if n == 0:
        return 0.0
    sq = a * a
    cum = np.cumsum(sq)
    k = np.arange(1, n + 1)
    # threshold at a[k-1]: k values at or below (assuming distinct), their
    # squares summed, the rest contribute t^2 each.
    risk = n - 2 * k + cum + (n - k) * sq
    risk0 = float(n)  # t = 0: no shrinkage, risk n - 0 + 0
    i = int(np.argmin(risk))
    if risk[i] < risk0:
        return float(a[i])
    return 0.0


def sureshrink_threshold(d: np.ndarray, sigma: float) -> float:
    """SureShrink hybrid (Donoho & Johnstone 1995) in signal units.

    Sparse bands (little energy beyond the noise) get the universal
    threshold; the rest the SURE minimiser, capped at the universal one.
    """
    d = np.asarray(d, dtype=np.float64)
    n = d.size
    if n == 0 or sigma == 0.0:
        return 0.0
    x = d / sigma
    univ = math.sqrt(2.0 * math.log(n)) if n > 1 else 0.0
    s2 = (float(np.sum(x * x)) - n) / n
    gamma = math.log2(n) ** 1.5 / math.sqrt(n) if n > 1 else 0.0
    if s2 <= gamma:
        return float(sigma * univ)
    return float(sigma * min(sure_threshold(x), univ))


#: exp element by element through the C library, as math.exp: NumPy's own exp takes a
#: vector path on some processors (AVX-512) that differs from it in the last bit, and the
#: minimax threshold below, found by a numerical search over this risk, would then differ
#: from one machine to another in its last bits, and with it every cleaned sample
_exp_each = np.frompyfunc(math.exp, 1, 1)


def _exp(z: np.ndarray) -> np.ndarray:
    return _exp_each(z).astype(np.float64)


def soft_risk(lam: float, mu: np.ndarray) -> np.ndarray:
    """Risk E(eta_soft(x, lam) - mu)^2 for x ~ N(mu, 1) (Donoho & Johnstone 1994)."""
    from scipy.special import ndtr

    mu = np.asarray(mu, dtype=np.float64)
    phi = lambda z: _exp(-0.5 * z * z) / math.sqrt(2 * math.pi)  # noqa: E731
    return (1 + lam ** 2 + (mu ** 2 - lam ** 2 - 1) * (ndtr(lam - mu) - ndtr(-lam - mu))
            - (lam - mu) * phi(lam + mu) - (lam + mu) * phi(lam - mu))


@lru_cache(maxsize=64)
def minimax_lambda(n: int) -> float:
    """Minimax threshold lambda*(n) for unit noise (Donoho & Johnstone 1994).

    Computed from its definition rather than read from a table: the lambda
    minimising sup_mu rho_soft(lambda, mu) / (1/n + min(mu^2, 1)).
    Zero below 32 samples, where thresholding does not pay (their table
    starts at n = 64).
    """
    from scipy.optimize import minimize_scalar

    if n < 32:
        return 0.0
    mus = np.concatenate([np.linspace(0.0, 1.0, 2001), np.linspace(1.0, 20.0, 19001)[1:]])
    ideal = 1.0 / n + np.minimum(mus * mus, 1.0)

    def worst(lam):
        return float(np.max(soft_risk(lam, mus) / ideal))

    top = math.sqrt(2.0 * math.log(n))
    res = minimize_scalar(worst, bounds=(0.0, top), method="bounded",
                          options={"xatol": 1e-7})
    return float(res.x)


def apply_shape(values: np.ndarray, threshold: float, shape: str) -> np.ndarray:
    """Hard, soft or non-negative garrote thresholding (PyWavelets' definitions)."""
    if shape not in SHAPES:
        raise ValueError(f"threshold shape {shape!r} is not one of {', '.join(SHAPES)}")
    if threshold <= 0.0:
        return np.array(values, dtype=np.float64, copy=True)
    return pywt.threshold(values, threshold, mode=shape)
