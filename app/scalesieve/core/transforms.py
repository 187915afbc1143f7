"""Forward and inverse wavelet transforms, band names, band frequency ranges.

A decomposition of one channel is a list of bands, ordered as PyWavelets
orders them: ``[a_J, d_J, ..., d_1]``.  Band keys are ``"a"`` for the
approximation and the integer level for details (1 is the finest).

References
----------
S. Mallat, *A Wavelet Tour of Signal Processing*, 3rd ed. (orthonormal DWT,
energy preservation).  D. B. Percival and A. T. Walden, *Wavelet Methods for
Time Series Analysis*, 2000 (normalised undecimated transform, energy split
by level).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np
import pywt

# band keys and names (their own module; kept importable from here)
from scalesieve.core.band_keys import (band_index, band_keys, band_name,  # noqa: F401
                                       basis_paths, key_named, spec_keys, table_keys)
# one SWT band alone by FFT filtering (names reachable here as before)
from scalesieve.core.swt_synthesis import (SWT_RESPONSES_KEPT,  # noqa: F401
                                           _swt_band_alone, _swt_band_response,
                                           _swt_level_one_spectra)

KINDS = ("dwt", "swt", "packet")
#: kinds whose coefficient windows are synthesised locally (their cost follows the window)
LOCAL_KINDS = ("dwt", "packet")
MODES = tuple(pywt.Modes.modes)
DEFAULT_WAVELET = "db4"
DEFAULT_MODE = "symmetric"
# Deepest default level: the approximation of a 1 kHz logger then ends near 0.1 Hz.
MAX_DEFAULT_LEVEL = 12


def discrete_wavelets() -> list[str]:
    return pywt.wavelist(kind="discrete")


@dataclass(frozen=True)
class TransformSpec:
    """What transform to run.  ``level=None`` means "choose for the data"."""

    kind: str = "dwt"
    wavelet: str = DEFAULT_WAVELET
    level: int | None = None
    mode: str = DEFAULT_MODE
    #: packet transform only: "full", "best" or a tuple of node paths (see core/packets.py)
    basis: object = "full"
    #: packet transform only: the best-basis cost, "shannon" or "log-energy"
    cost: str = "shannon"

    def validate(self) -> "TransformSpec":
        if self.kind not in KINDS:
            raise ValueError(f"transform kind {self.kind!r} is not one of {', '.join(KINDS)}")
        if self.wavelet not in discrete_wavelets():
            raise ValueError(
                f"wavelet {self.wavelet!r} is not a discrete PyWavelets wavelet "
                f"(for example db4, sym8, coif3, bior3.5, haar)")
        if self.mode not in MODES:
            raise ValueError(f"boundary mode {self.mode!r} is not one of {', '.join(MODES)}")
        if self.level is not None:
            if isinstance(self.level, bool) or not isinstance(self.level, (int, np.integer)):
                raise ValueError(f"level {self.level!r} is not a whole number")
            if self.level < 1:
                raise ValueError(f"level {self.level} must be at least 1")
        if self.kind == "packet":
            from scalesieve.core import packets as wp

            if self.cost not in wp.COSTS:
                raise ValueError(f"cost {self.cost!r} is not one of {', '.join(wp.COSTS)}")
            if isinstance(self.basis, str):
                if self.basis not in wp.BASES:
                    raise ValueError(f"basis {self.basis!r} is not full, best or a list of "
                                     "node paths")
            else:
                wp.check_basis(self.basis, self.level or 64)
        return self

    def resolved(self, n: int) -> "TransformSpec":
        """The same spec with ``level`` filled in and checked against ``n`` samples."""
        self.validate()
        top = max_level(n, self.wavelet)
        if top < 1:
            raise ValueError(
                f"{n} samples are too few for wavelet {self.wavelet} "
                f"(filter length {filter_length(self.wavelet)}); "
                f"use a shorter wavelet such as haar or a longer recording")
        if self.kind == "packet":
            from scalesieve.core import packets as wp

            spec = self
            if not isinstance(self.basis, str):
                deepest = max(len(p) for p in self.basis)
                spec = replace(self, basis=wp.check_basis(self.basis, self.level or deepest),
                               level=self.level or deepest)
            elif self.level is None:
                spec = replace(self, level=wp.default_depth(n, self.wavelet))
            if spec.level > top:
                raise ValueError(f"level {spec.level} is deeper than {n} samples allow for "
                                 f"{self.wavelet} (at most {top})")
            return spec
        if self.level is None:
            return replace(self, level=default_level(n, self.wavelet))
        if self.kind == "swt":
            top = swt_max_level(n)
        if self.level > top:
            raise ValueError(
                f"level {self.level} is deeper than {n} samples allow for {self.wavelet} "
                f"(at most {top})")
        return self

    def to_json(self) -> dict:
        d = {"kind": self.kind, "wavelet": self.wavelet, "mode": self.mode}
        if self.level is not None:
            d["level"] = int(self.level)
        if self.kind == "packet":
            d["basis"] = self.basis if isinstance(self.basis, str) else list(self.basis)
            if self.basis == "best":
                d["cost"] = self.cost
        return {k: d[k] for k in ("kind", "wavelet", "level", "mode", "basis", "cost") if k in d}


@lru_cache(maxsize=256)
def filter_length(wavelet: str) -> int:
    # cached: region edits ask for it many times per change, and building a
    # pywt.Wavelet each time would cost more than the edit itself
    return pywt.Wavelet(wavelet).dec_len


def max_level(n: int, wavelet: str) -> int:
    """Deepest level at which the filter still fits the data (PyWavelets' rule)."""
    return pywt.dwt_max_level(n, filter_length(wavelet))


def swt_max_level(n: int) -> int:
    """Deepest SWT level for ``n`` samples: floor(log2 n).

    ``pywt.swt_max_level(n)`` counts how often 2 divides n (the levels the
    samples take as they are), never more than floor(log2 n); the transform
    pads the signal to a multiple of 2^J (``swt_padded_length``), which for
    2^J <= n at most doubles it, so every level up to floor(log2 n) is open.
    """
    n = int(n)
    return 0 if n < 2 else n.bit_length() - 1


def default_level(n: int, wavelet: str) -> int:
    """Two levels short of the deepest the data allow, at most 12, at least 1.

    Two short of ``pywt.dwt_max_level`` leaves the coarsest band about four
    filter lengths of coefficients, so it is not all boundary effect.
    """
    return int(max(1, min(max_level(n, wavelet) - 2, MAX_DEFAULT_LEVEL)))


def band_range_hz(key, level: int, rate: float) -> tuple[float, float]:
    """Nominal frequency range of a band (common practice: dyadic halving).

    Detail level j spans fs/2^(j+1) ... fs/2^j; the approximation at level J
    spans 0 ... fs/2^(J+1).  Packet band wJ.K spans K fs/2^(J+1) ... (K+1) fs/2^(J+1).
    """
    if hasattr(key, "path"):
        from scalesieve.core import packets as wp

        return wp.range_hz(key.path, rate)
    if key == "a":
        return 0.0, rate / 2 ** (level + 1)
    j = int(key)
    return rate / 2 ** (j + 1), rate / 2 ** j


def describe_wavelet(name: str) -> str:
    """One line for a user: family, vanishing moments, filter length, orthogonality."""
    w = pywt.Wavelet(name)
    bits = [f"{w.family_name}"]
    if w.vanishing_moments_psi is not None:
        bits.append(f"{w.vanishing_moments_psi} vanishing moments")
    bits.append(f"filter length {w.dec_len}")
    if w.orthogonal:
        bits.append("orthogonal")
    elif w.biorthogonal:
        bits.append("biorthogonal (not orthogonal)")
    bits.append("symmetric" if w.symmetry == "symmetric" else
                "near symmetric" if w.symmetry == "near symmetric" else "asymmetric")
    return ", ".join(bits)


# --------------------------------------------------------------------------
# forward / inverse


def swt_padded_length(n: int, level: int) -> int:
    step = 2 ** level
    return int(math.ceil(n / step) * step)


def _swt_pad_mode(mode: str) -> str:
    # pywt.pad knows every signal-extension mode except periodization.
    return "periodic" if mode == "periodization" else mode


def forward(x: np.ndarray, spec: TransformSpec, dtype=np.float64,
            progress=None) -> list[np.ndarray]:
    """Decompose one channel; ``spec`` must be resolved (level set).

    Parameters
    ----------
    x : ndarray
        One channel (a strided column is fine).
    spec : TransformSpec
    dtype : float64 or float32
        Working precision of the coefficients; float32 halves their memory.
    progress : callable(fraction), optional
        Told how far the DWT has got, block by block; it may raise to stop.

    The DWT runs level by level as ``pywt.wavedec`` does, each level in
    blocks (boundary modes that extend from nearby samples only), and gives
    the same numbers, bit for bit.
    """
    x = np.asarray(x, dtype=dtype)
    if spec.kind == "dwt":
        from scalesieve.core.cascade import _wavedec_blocked

        return _wavedec_blocked(x, spec, progress)
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        return wp.forward(x, spec.wavelet, spec.mode, basis_paths(spec))
    n = x.shape[0]
    total = swt_padded_length(n, spec.level)
    if total != n:
        x = pywt.pad(x, (0, total - n), _swt_pad_mode(spec.mode))
    with warnings.catch_warnings():
        # norm=True on a biorthogonal wavelet still inverts exactly; only the
        # energy split is approximate, which band tables say by their numbers.
        warnings.simplefilter("ignore", UserWarning)
        return pywt.swt(x, spec.wavelet, level=spec.level, trim_approx=True, norm=True)


#: output samples per block of the blocked passes: about 2 MB of float64, cache-sized
BLOCK = 1 << 18
#: from this many samples a DWT, forward or inverse, splits the work between two threads
THREADS_FROM = 1 << 22
#: threads a DWT, forward or inverse, may use (PyWavelets' C code runs without the GIL)
TRANSFORM_THREADS = 2
# Boundary modes whose signal extension reads only samples near the edge it
# extends; "periodic" reads the far end, so that level is done in one call.
_LOCAL_MODES = frozenset(MODES) - {"periodic", "periodization"}


def inverse(coeffs: list[np.ndarray], spec: TransformSpec, n: int) -> np.ndarray:
    """Reconstruct ``n`` samples from a coefficient list of ``forward``."""
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        return wp.inverse(coeffs, basis_paths(spec), spec.wavelet, spec.mode, n)
    if spec.kind == "dwt":
        out = pywt.waverec(coeffs, spec.wavelet, mode=spec.mode)
    else:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            out = pywt.iswt(coeffs, spec.wavelet, norm=True)
    return np.ascontiguousarray(out[:n])


def inverse_into(band, lengths: list[int], spec: TransformSpec, n: int, out: np.ndarray,
                 base: np.ndarray | None = None) -> np.ndarray:
    """``out[:] = base - inverse(bands)``, or ``inverse(bands)`` without ``base``.

    Parameters
    ----------
    band : callable(index) -> ndarray or None
        The band at PyWavelets index ``index`` (``a_J`` first), or None for a
        band of zeros.  Called once per band, coarse to fine.
    lengths : list of int
        Coefficient count of every band, in PyWavelets order.
    out : ndarray of n samples
        May be ``base`` itself.

    For the DWT the short coarse levels run as ``pywt.waverec`` runs them;
    the long fine ones are a cascade per block of output: each block of
    ``out`` is synthesised through those levels from the windows of
    coefficients it reads (a window of level j holds every tap its outputs
    need), so no level's approximation is ever made whole and nothing but
    ``out`` is written at full length.  From ``THREADS_FROM`` samples on the
    blocks are shared between two threads.  The numbers are ``inverse``'s,
    bit for bit; a None band gives what zeros give (up to the sign of a zero).
    """
    level = spec.level
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        basis = basis_paths(spec)
        r = wp.inverse([band(i) for i in range(len(basis))], basis, spec.wavelet, spec.mode,
                       n, out.dtype)
        _finish(out, base, r, 0)
        return out
    if spec.kind != "dwt":
        full = [band(i) for i in range(level + 1)]
        given = [i for i, b in enumerate(full) if b is not None]
        if len(given) == 1 and lengths[given[0]] <= SWT_FFT_MAX:
            # one band alone (a component): one filtering, not a whole iswt
            i = given[0]
            r = _swt_band_alone(full[i], "a" if i == 0 else level - i + 1, spec, n)
            del full
            _finish(out, base, r, 0)
            return out
        full = [np.zeros(lengths[i], dtype=out.dtype) if b is None else b
                for i, b in enumerate(full)]
        r = inverse(full, spec, n)
        del full
        _finish(out, base, r, 0)
        return out
    w = pywt.Wavelet(spec.wavelet)
    mode = spec.mode
    # what step i (1 .. level) makes: the next band's length, and n at the end
    made = [0] + [lengths[i + 1] for i in range(1, level)] + [n]
    a = band(0)
    d = None
    i = 1
    while i <= level and (mode == "periodization" or made[i] <= 4 * BLOCK):
        del d                            # the last level's band goes before the next is made
        d = band(i)
        if a is not None and a.shape[0] == lengths[i] + 1:
            a = a[:lengths[i]]           # as waverec trims an odd approximation
        a = None if a is None and d is None else pywt.idwt(a, d, w, mode)
        i += 1
    if i > level:
        _finish(out, base, a, 0)
        return out
    del d
    details = {k: band(k) for k in range(i, level + 1)}
    first = i

    def blocks(lo: int, hi: int) -> None:
        for s0 in range(lo, hi, BLOCK):
            s1 = min(s0 + BLOCK, hi)
            _finish(out[s0:s1], None if base is None else base[s0:s1],
                    _synthesise(a, details, first, level, lengths, s0, s1, w, mode), 0)

    starts = range(0, n, BLOCK)
    if TRANSFORM_THREADS > 1 and n >= THREADS_FROM and len(starts) > 1:
        from concurrent.futures import ThreadPoolExecutor

        cut = starts[len(starts) // 2]
        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="scalesieve-idwt") as pool:
            other = pool.submit(blocks, cut, n)
            blocks(0, cut)
            other.result()
    else:
        blocks(0, n)
    return out


def _synthesise(a, details: dict, first: int, level: int, lengths: list[int], s0: int,
                s1: int, w: pywt.Wavelet, mode: str):
    """Outputs s0 .. s1 of steps ``first`` .. ``level`` of the inverse, from windows.

    ``a`` is the approximation step ``first`` starts from (None: zeros).
    Step i makes output m from coefficients k with 0 <= m - 2k + L - 2 < L,
    so outputs lo .. hi need coefficients lo // 2 .. (hi + L - 2) / 2, and
    ``pywt.idwt`` of such a window gives output 2 k0 first.
    """
    L = w.rec_len
    need = [(0, 0)] * (level + 1)
    lo, hi = s0, s1
    for i in range(level, first - 1, -1):
        need[i] = (lo, hi)
        lo, hi = lo // 2, min(lengths[i], -(-(hi + L - 2) // 2))
    win, win_lo = a, 0               # the approximation window and its first index
    for i in range(first, level + 1):
        lo, hi = need[i]
        k0, k1 = lo // 2, min(lengths[i], -(-(hi + L - 2) // 2))
        d = details[i]
        if win is None and d is None:
            win = None
            continue
        seg = pywt.idwt(None if win is None else win[k0 - win_lo:k1 - win_lo],
                        None if d is None else d[k0:k1], w, mode)
        win, win_lo = seg[lo - 2 * k0:hi - 2 * k0], lo
    return win


def _finish(out: np.ndarray, base, r, start: int) -> None:
    """out = base - r[start:...] (or r, or base, or zeros when parts are missing)."""
    m = out.shape[0]
    if r is None:
        if base is None:
            out[...] = 0.0
        elif base is not out:
            out[...] = base
        return
    seg = r[start:start + m]
    if base is None:
        out[...] = seg
    else:
        np.subtract(base, seg, out=out)


def coefficient_slice(key, spec: TransformSpec, count: int, lo: float, hi: float) -> slice:
    """Indices of the coefficients whose position lies in ``[lo, hi]`` samples.

    The same slice as ``searchsorted(positions, lo, "left")`` ..
    ``searchsorted(positions, hi, "right")`` over ``coefficient_positions``,
    found from the positions' formula in constant time (no positions array:
    for the finest level that would be half the recording again).
    """
    step, shift = _position_formula(key, spec)
    return slice(_first_position(lo, step, shift, count, False),
                 _first_position(hi, step, shift, count, True))


@lru_cache(maxsize=1024)
def _position_formula(key, spec: TransformSpec) -> tuple[float, float]:
    """(step, shift): coefficient k sits at ``step * k + shift`` samples."""
    j = key.depth if hasattr(key, "path") else spec.level if key == "a" else int(key)
    if spec.kind in LOCAL_KINDS:
        L = filter_length(spec.wavelet)
        s = (L - 1) / 2 - _offset(spec.wavelet, spec.mode)
        return float(2 ** j), s * (2 ** j - 1)
    return 1.0, _swt_shift(spec.wavelet, j, key == "a")


def _first_position(v: float, step: float, shift: float, count: int, right: bool) -> int:
    """First index whose position is >= v (or > v when ``right``), as searchsorted finds it.

    Positions are computed as coefficient_positions computes them (a product
    of integers, exact, then one rounded addition), so comparisons agree.
    """
    if not v == v:                        # NaN sorts last, as searchsorted puts it
        return count
    guess = (v - shift) / step
    k = count if guess >= count else 0 if guess <= 0 else int(guess)
    if right:
        while k > 0 and step * (k - 1) + shift > v:
            k -= 1
        while k < count and step * k + shift <= v:
            k += 1
    else:
        while k > 0 and step * (k - 1) + shift >= v:
            k -= 1
        while k < count and step * k + shift < v:
            k += 1
    return k


def band_lengths(n: int, spec: TransformSpec) -> list[int]:
    """Coefficient count of each band, in PyWavelets order."""
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        lengths = wp.node_lengths(n, spec.wavelet, spec.mode, spec.level)
        return [lengths[len(p)] for p in basis_paths(spec)]
    if spec.kind == "swt":
        return [swt_padded_length(n, spec.level)] * (spec.level + 1)
    L = filter_length(spec.wavelet)
    lengths = []
    m = n
    for _ in range(spec.level):
        m = pywt.dwt_coeff_len(m, L, spec.mode)
        lengths.append(int(m))
    return [lengths[-1]] + lengths[::-1]


def band_component(coeffs: list[np.ndarray], key, spec: TransformSpec, n: int,
                   values: np.ndarray | None = None) -> np.ndarray:
    """Time-domain component of one band (the band alone, others zero).

    ``values`` replaces that band's coefficients (for an edited band).
    """
    level = spec.level
    idx = band_index(key, level)
    band = coeffs[idx] if values is None else values
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        return wp.component(band, key.path, spec.wavelet, spec.mode, n)
    if spec.kind == "swt":
        if band.shape[0] <= SWT_FFT_MAX:
            return _swt_band_alone(band, key, spec, n)
        zeros = [np.zeros_like(coeffs[0]) if i != idx else band for i in range(len(coeffs))]
        return inverse(zeros, spec, n)
    w = pywt.Wavelet(spec.wavelet)
    # Start at the band's own level and carry an approximation downwards:
    # cheaper than a full waverec with zeros, and the same numbers.
    if key == "a":
        a = pywt.idwt(band, None, w, spec.mode)
        start = level
    else:
        a = pywt.idwt(None, band, w, spec.mode)
        start = int(key)
    for j in range(start - 1, 0, -1):
        target = coeffs[band_index(j, level)].shape[0]
        if a.shape[0] > target:
            a = a[:target]
        a = pywt.idwt(a, None, w, spec.mode)
    return np.ascontiguousarray(a[:n])


#: SWT bands up to this many coefficients are synthesised alone by one FFT filtering
SWT_FFT_MAX = 1 << 24


# --------------------------------------------------------------------------
# time positions and local synthesis (DWT)


def _offset(wavelet: str, mode: str) -> int:
    """Index offset of PyWavelets' synthesis: out[m] = sum_k c[k] f[m - 2k + off]."""
    L = filter_length(wavelet)
    return L // 2 - 1 if mode == "periodization" else L - 2


def coefficient_positions(key, spec: TransformSpec, count: int) -> np.ndarray:
    """Sample position (centre of the synthesis function) of each coefficient.

    For the DWT the centre follows from the synthesis formula, level by
    level; for the SWT coefficient k sits at sample k shifted by the
    filters' centre of energy at that level.
    """
    level = spec.level
    j = key.depth if hasattr(key, "path") else level if key == "a" else int(key)
    if spec.kind in LOCAL_KINDS:
        L = filter_length(spec.wavelet)
        s = (L - 1) / 2 - _offset(spec.wavelet, spec.mode)
        return (2 ** j) * np.arange(count, dtype=np.float64) + s * (2 ** j - 1)
    shift = _swt_shift(spec.wavelet, j, key == "a")
    return np.arange(count, dtype=np.float64) + shift


@lru_cache(maxsize=256)
def _swt_shift(wavelet: str, j: int, approx: bool) -> float:
    """Centre of energy of an SWT synthesis function at level j, minus its index."""
    L = filter_length(wavelet)
    n = 2 ** (j + 1) * max(8, L)
    zeros = [np.zeros(n) for _ in range(j + 1)]
    k = n // 2
    zeros[0 if approx else 1][k] = 1.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        r = pywt.iswt(zeros, wavelet, norm=True)
    e = r * r
    centre = float(np.sum(np.arange(n) * e) / np.sum(e))
    return centre - k


def local_synthesis(values: np.ndarray, k0: int, key, coeffs_lengths: list[int],
                    spec: TransformSpec, n: int) -> tuple[int, np.ndarray]:
    """Time-domain effect of DWT coefficients ``values`` at indices k0.. of one band.

    Returns ``(start, segment)``: the samples ``start .. start+len(segment)``
    of the inverse transform of a coefficient set that is zero except for
    this window.  Cost follows the window, not the recording.
    ``coeffs_lengths`` are the band lengths in PyWavelets order.
    """
    return local_synthesis_bands({key: (values, k0)}, coeffs_lengths, spec, n)


def local_synthesis_bands(windows: dict, coeffs_lengths: list[int], spec: TransformSpec,
                          n: int) -> tuple[int, np.ndarray]:
    """``local_synthesis`` of windows of several bands at once: the sum of their effects.

    ``windows`` maps a band key to ``(values, k0)``.  One cascade from the
    coarsest band down: at each level the approximation made so far and that
    level's own window are synthesised and added, so the fine levels are
    worked through once for all the bands (a region over three levels costs
    about as much as its finest one alone).
    """
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        return wp.local_synthesis({key.path: v for key, v in windows.items()},
                                  spec.wavelet, spec.mode, n)
    w = pywt.Wavelet(spec.wavelet)
    level = spec.level
    off = _offset(spec.wavelet, spec.mode)
    periodic = spec.mode == "periodization"
    L = w.rec_len
    top = max(level if key == "a" else int(key) for key in windows)
    seg, start = None, 0                 # the approximation window entering a level
    for lev in range(top, 0, -1):
        pieces = [] if seg is None else [("a", seg, start)]
        if lev == level and "a" in windows:
            pieces.append(("a",) + tuple(windows["a"]))
        if lev in windows:
            pieces.append(("d",) + tuple(windows[lev]))
        if not pieces:
            continue
        band_len = coeffs_lengths[band_index(lev, level)]
        # length of the next finer approximation (or the signal)
        out_len = n if lev == 1 else coeffs_lengths[band_index(lev - 1, level)]
        full_len = 2 * band_len if periodic else 2 * band_len - L + 2
        # upsample by two and filter, all of it (PyWavelets' C: no zeros stored)
        convs = [(pywt.upcoef(part, np.asarray(v, dtype=np.float64), w, level=1, take=0),
                  2 * int(k) - off) for part, v, k in pieces]
        if len(convs) == 1:
            conv, m0 = convs[0]
        else:
            m0 = min(m for _, m in convs)
            conv = np.zeros(max(m + c.shape[0] for c, m in convs) - m0)
            for c, m in convs:
                conv[m - m0:m - m0 + c.shape[0]] += c
        del convs
        if periodic:
            idx = (np.arange(conv.shape[0]) + m0) % full_len
            lo, hi = int(idx.min()), int(idx.max()) + 1
            if m0 >= 0 and m0 + conv.shape[0] <= full_len:
                seg, start = conv, m0
            else:
                # wrapped: fold into the whole level (rare: a window at an edge)
                acc = np.zeros(full_len)
                np.add.at(acc, idx, conv)
                seg, start = acc[lo:hi], lo
        else:
            seg, start = conv, m0
        # keep what lies inside the (trimmed) next level
        a, b = max(start, 0), min(start + seg.shape[0], out_len)
        if b <= a:
            seg, start = None, 0
            continue
        seg = seg[a - start:b - start]
        start = a
    if seg is None:
        return 0, np.zeros(0)
    return start, seg


_MOVED_TO_CASCADE = ("_wavedec_blocked", "_wavedec_by_level", "_Cascade", "_Carry")


def __getattr__(name: str):
    # The blocked forward cascade lives in core/cascade.py; its names stay reachable here.
    if name in _MOVED_TO_CASCADE:
        from scalesieve.core import cascade

        return getattr(cascade, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
