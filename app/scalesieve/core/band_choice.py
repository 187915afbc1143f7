"""Which band is the most impulsive: kurtosis on the coefficients the boundary left alone.

A band's coefficients near either end are made partly of the boundary
extension (``symmetric``, ``zero``, ... copy or invent samples beyond the
ends; ``periodic`` and ``periodization`` wrap the far end round).  At a deep
level those few coefficients are a large share of a short band, and a step
at the edge makes them stand out: the band looks impulsive while it holds no
impacts.  The choice of "most impulsive" therefore reads the Pearson
kurtosis of the *interior* coefficients only - those whose taps, through
every level of the tree above them, touch original samples alone - and only
where at least ``MIN_INTERIOR`` of them are left.  The figure that ``bands
--json`` calls ``kurtosis`` (all coefficients) is not changed.

How many coefficients the extension touches (DWT and packet nodes)
----------------------------------------------------------------------
PyWavelets' ``dwt`` of n samples with a filter of length L gives
m = floor((n + L - 1) / 2) outputs, output i reading extended samples
2i + 2 - L ... 2i + 1.  If the first e and the last r inputs of a level are
themselves touched by the extension (e = r = 0 for the signal), output i is
touched on the left when 2i + 2 - L <= e - 1, that is for the first
floor((e + L - 1) / 2) outputs, and on the right when 2i + 1 >= n - r, that is
for the last m - ceil((n - r - 1) / 2).  On an odd-length level that right
count can be one more than the coefficients an extension really changes (a
safe side: one interior coefficient too few); filters with zero end taps
(``bior*``) touch fewer than counted.  Level 1 loses floor((L - 1) / 2) per
side; the count grows level by level towards about L - 2 per side.  Both
children of a packet node have the same length and filter, so every node of
one depth loses the same counts.  The periodic modes are counted the same
way (their wrapped coefficients mix both ends).

For the normalised SWT (undecimated, periodic), level j's filters are level
one's upsampled by 2^(j-1), so the wrap reaches (L - 1)(2^j - 1) coefficients
from each end in all.
"""

from __future__ import annotations

import math

import numpy as np

from scalesieve.core.impulsive_bands import kurtosis

#: fewest interior coefficients a band needs for its kurtosis to take part in
#: the choice.  Common practice: the sample kurtosis of n Gaussian values has a
#: standard error of about sqrt(24 / n) (0.43 at n = 128), so below some
#: hundred values one chance outlier decides it.
MIN_INTERIOR = 128


def dwt_edges(n: int, filter_len: int, depth: int) -> list[tuple[int, int]]:
    """(left, right) extension-touched coefficient counts at levels 1 .. ``depth``.

    ``n`` samples, filter length ``filter_len`` (``pywt.Wavelet(w).dec_len``);
    see the module docstring for the derivation.
    """
    L = int(filter_len)
    out = []
    e = r = 0
    for _ in range(depth):
        m = (n + L - 1) // 2
        e = min(m, (e + L - 1) // 2)
        first_right = math.ceil((n - r - 1) / 2)
        r = min(m, max(0, m - first_right))
        out.append((e, r))
        n = m
    return out


def swt_edge(filter_len: int, level: int) -> int:
    """Coefficients touched by the periodic wrap from each end at SWT level ``level``."""
    return (int(filter_len) - 1) * (2 ** int(level) - 1)


def interior(c: np.ndarray, left: int, right: int) -> np.ndarray:
    """The coefficients between the ``left`` and ``right`` touched ones (maybe empty)."""
    c = np.asarray(c)
    stop = c.shape[0] - right
    return c[left:stop] if stop > left else c[:0]


def interior_kurtosis(c: np.ndarray, left: int, right: int,
                      minimum: int = MIN_INTERIOR) -> float | None:
    """Pearson kurtosis of the interior coefficients; None with fewer than ``minimum``."""
    inner = interior(c, left, right)
    if inner.shape[0] < max(4, minimum):
        return None
    return kurtosis(inner)


def most_impulsive(candidates):
    """The key with the largest interior kurtosis from ``(key, value)`` pairs.

    Values of None take no part; ties go to the first (callers list shallower,
    wider bands first).  None when no band qualifies.
    """
    best_key, best_val = None, None
    for key, val in candidates:
        if val is not None and (best_val is None or val > best_val):
            best_key, best_val = key, val
    return best_key


#: chance that pure Gaussian noise is called impulsive, over all bands compared together
IMPULSIVE_ALPHA = 0.01


def kurtosis_z(kurt: float, count: int) -> float:
    """How many standard deviations a Pearson kurtosis lies above Gaussian noise's.

    The normal score of the sample kurtosis b2 of ``count`` values by the
    transformation of Anscombe & Glynn ("Distribution of the kurtosis
    statistic b2 for normal samples", Biometrika 70:227-234, 1983), the test
    SciPy's ``scipy.stats.kurtosistest`` makes: b2 is standardised with its
    exact mean 3(n-1)/(n+1) and variance for normal samples, then its skewed
    distribution is mapped onto the normal one.  (The plain sqrt(24 / n)
    standard error would call noise impulsive too often at a few hundred
    coefficients.)
    """
    n = float(count)
    if n < 5:
        return 0.0
    mean = 3.0 * (n - 1) / (n + 1)
    var = 24.0 * n * (n - 2) * (n - 3) / ((n + 1) ** 2 * (n + 3) * (n + 5))
    x = (kurt - mean) / math.sqrt(var)
    root_beta1 = (6.0 * (n * n - 5 * n + 2) / ((n + 7) * (n + 9))
                  * math.sqrt(6.0 * (n + 3) * (n + 5) / (n * (n - 2) * (n - 3))))
    a = 6.0 + 8.0 / root_beta1 * (2.0 / root_beta1 + math.sqrt(1.0 + 4.0 / root_beta1 ** 2))
    term1 = 1.0 - 2.0 / (9.0 * a)
    denom = 1.0 + x * math.sqrt(2.0 / (a - 4.0))
    if denom <= 0:
        return -math.inf                 # far below: flatter than any noise sample
    term2 = ((1.0 - 2.0 / a) / denom) ** (1.0 / 3.0)
    return (term1 - term2) / math.sqrt(2.0 / (9.0 * a))


def is_impulsive(kurt: float | None, count: int, bands: int = 1,
                 alpha: float = IMPULSIVE_ALPHA) -> bool:
    """Whether a band's kurtosis stands out of Gaussian noise at level ``alpha``.

    One-sided: :func:`kurtosis_z` above the normal quantile at
    ``alpha / bands`` (Bonferroni: the largest of ``bands`` figures is the
    one compared).
    """
    from statistics import NormalDist

    if kurt is None or count < 5:
        return False
    return kurtosis_z(kurt, count) > NormalDist().inv_cdf(1.0 - alpha / max(1, int(bands)))


def interior_count(n: int, wavelet: str, depth: int, mode: str = "symmetric") -> int:
    """Interior coefficients of a packet node at ``depth`` of ``n`` samples (all nodes alike)."""
    import pywt

    L = pywt.Wavelet(wavelet).dec_len
    m = n
    for _ in range(depth):
        m = pywt.dwt_coeff_len(m, L, mode)
    left, right = dwt_edges(n, L, depth)[depth - 1]
    return max(0, m - left - right)


def best_stands_out(table: dict, n: int, wavelet: str, mode: str,
                    alpha: float = IMPULSIVE_ALPHA) -> bool | None:
    """Whether the most impulsive band of a kurtosis table (``impulsive_bands.table``)
    stands out of Gaussian noise: :func:`is_impulsive` on its interior kurtosis, the
    largest of every band of the table compared together.  None when it cannot be told:
    no best band, or one too short for an interior figure.
    """
    best = table.get("best")
    if not best or best.get("interior_kurtosis") is None:
        return None
    bands = sum(len(lv["bands"]) for lv in table["levels"])
    count = interior_count(n, wavelet, best["level"], mode)
    return bool(is_impulsive(best["interior_kurtosis"], count, bands, alpha))
