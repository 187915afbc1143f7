"""Band figures: a band's energy, share, RMS, peak and kurtosis (pure functions of arrays).

The one implementation of these figures.  The model's ``band_table`` calls
``band_table`` here, and everything else (``bands --json``, the band table
export, the scripting API) reads the model's table; the window reads it too,
or, on a long recording, has this same function run on the same arrays in
its background thread (the same numbers, bit for bit).

Definitions (docs/reference.md, ``bands --json``):

* ``energy``: sum of squared samples of the band's time-domain component
  (the band alone through the inverse transform), the band's own share of
  the samples; ``energy_fraction``: that over the signal's sum of squares.
  With a boundary-extended mode the coefficients also carry the extension,
  so a share of coefficient sums would be wrong; only an orthogonal wavelet
  with ``periodization`` makes both agree (Mallat, *A Wavelet Tour of Signal
  Processing*, 3rd ed., ch. 7; PyWavelets' documentation on signal extension).
* ``coef_energy``: sum of squared coefficients of the band.
* ``rms``, ``peak``: of the time-domain component.
* ``kurtosis``: Pearson kurtosis E[(c - mean)^4] / var^2 of the coefficients
  (3 for Gaussian noise), None where the band holds only round-off.

Sums run block by block over contiguous copies, so the same samples give
the same bits whether they come as a strided column or a contiguous array.
"""

from __future__ import annotations

import math

import numpy as np

from scalesieve.core import packets as wp
from scalesieve.core import transforms as tf

#: samples summed at a time (cache-sized)
BLOCK = 1 << 16
#: a band whose coefficient energy is below (ROUNDOFF_FACTOR * eps)^2 of the
#: signal's holds round-off only (a constant's details); its kurtosis means nothing.
#: [robustness] 1024 eps: well above the round-off of a few hundred filter taps
ROUNDOFF_FACTOR = 1024.0


def _blocks(a: np.ndarray, block: int = BLOCK):
    """Blocks of ``a`` as float64, each copied into one buffer of our own.

    The same values then sit at the same alignment whatever the layout they
    came in (a strided column, a view into a longer array), so every sum
    below adds them in the same order and gives the same bits.
    """
    buf = np.empty(min(block, a.shape[0]), dtype=np.float64)
    for i in range(0, a.shape[0], block):
        b = buf[:min(block, a.shape[0] - i)]
        np.copyto(b, a[i:i + block], casting="same_kind")
        yield b


def _sumsq(b: np.ndarray) -> float:
    # einsum, not np.dot: BLAS's threads cost milliseconds per call on a busy machine
    return float(np.einsum("i,i->", b, b))


def signal_energy(x: np.ndarray) -> float:
    """Sum of squares of a signal in float64 (the denominator of every share)."""
    total = 0.0
    for b in _blocks(x):
        total += _sumsq(b)
    return total


def roundoff_floor(signal_energy_: float, dtype) -> float:
    """Coefficient energy at or below which a band holds round-off only."""
    eps = float(np.finfo(np.dtype(dtype) if np.dtype(dtype).kind == "f" else np.float64).eps)
    return (ROUNDOFF_FACTOR * eps) ** 2 * signal_energy_


def coefficient_moments(c: np.ndarray) -> tuple[float, float | None]:
    """(sum of squares, Pearson kurtosis or None) of a band's coefficients, blocked."""
    n = c.shape[0]
    if n == 0:
        return 0.0, None
    total = 0.0
    e = 0.0
    for b in _blocks(c):
        total += float(b.sum())
        e += _sumsq(b)
    if n < 2:
        return e, None
    mean = total / n
    s2 = s4 = 0.0
    for b in _blocks(c):
        d = b - mean
        d2 = d * d
        s2 += float(d2.sum())
        s4 += _sumsq(d2)
    m2 = s2 / n
    if m2 <= 0.0 or not math.isfinite(m2):
        return e, None
    return e, (s4 / n) / (m2 * m2)


def component_figures(component: np.ndarray) -> tuple[float, float, float]:
    """(energy, RMS, peak |value|) of a band's time-domain component, blocked."""
    n = component.shape[0]
    e = 0.0
    top = 0.0
    for b in _blocks(component):
        e += _sumsq(b)
        if b.size:
            top = max(top, float(np.max(np.abs(b))))
    return e, (math.sqrt(e / n) if n else 0.0), top


def band_figures(component: np.ndarray, coefficients: np.ndarray, total_energy: float,
                 floor: float) -> dict:
    """The figures of one band (keys as in ``bands --json``).

    Parameters
    ----------
    component : ndarray
        The band's time-domain component (as many samples as the signal).
    coefficients : ndarray
        The band's coefficients.
    total_energy : float
        ``signal_energy`` of the signal.
    floor : float
        ``roundoff_floor``: coefficient energy at or below which ``kurtosis`` is None.
    """
    return figures_of(component_figures(component)[::2], component.shape[0], coefficients,
                      total_energy, floor)


def figures_of(component_energy_peak: tuple[float, float], n: int, coefficients: np.ndarray,
               total_energy: float, floor: float) -> dict:
    """``band_figures`` from the component's (energy, peak) over its ``n`` samples."""
    e, peak = component_energy_peak
    rms = math.sqrt(e / n) if n else 0.0
    ce, kurt = coefficient_moments(coefficients)
    return {
        "count": int(coefficients.shape[0]),
        "energy": e,
        "energy_fraction": e / total_energy if total_energy > 0 else 0.0,
        "coef_energy": ce,
        "rms": rms,
        "peak": peak,
        "kurtosis": kurt if ce > floor else None,
    }


def band_table(x: np.ndarray, coeffs: list[np.ndarray], spec, rate: float,
               dtype=np.float64) -> list[dict]:
    """Every band's figures, d1 ... dJ then aJ, or packet bands in frequency order.

    Parameters
    ----------
    x : ndarray
        The channel's samples (a strided column is fine; it is only read).
    coeffs : list of ndarray
        Its decomposition by ``transforms.forward``, in PyWavelets order.
    spec : TransformSpec
        The resolved transform of ``coeffs``.
    rate : float
        Sampling rate in Hz (for the bands' Hz ranges).
    dtype : float64 or float32
        The working precision (it sets the round-off floor).

    Each band's time-domain component is the band alone through
    ``transforms.inverse_into``, made in one buffer band after band; a packet
    band's energy and peak come from its coefficients through
    ``packets.component_figures`` (the same numbers up to round-off, at a
    small part of the cost).
    """
    level = spec.level
    n = x.shape[0]
    lengths = [c.shape[0] for c in coeffs]
    total = signal_energy(x)
    floor = roundoff_floor(total, dtype)
    comp = np.empty(n, dtype=coeffs[0].dtype)
    rows = []
    packet_figures = {}
    if spec.kind == "packet":
        # energy and peak from each node's coefficients, the component never made whole
        # (packets.component_figures); from wp.THREADS_FROM samples in two threads
        todo = [(key, coeffs[tf.band_index(key, level)]) for key in tf.table_keys(spec)]

        def work(item):
            key, c = item
            return key, wp.component_figures(c, key.path, spec.wavelet, spec.mode, n)

        if n >= wp.THREADS_FROM and len(todo) > 1:
            from concurrent.futures import ThreadPoolExecutor

            with ThreadPoolExecutor(max_workers=2) as pool:
                packet_figures = dict(pool.map(work, todo))
        else:
            packet_figures = dict(map(work, todo))
    for key in tf.table_keys(spec):      # d1 ... dJ, aJ; packet bands in frequency order
        idx = tf.band_index(key, level)
        c = coeffs[idx]
        if spec.kind == "packet":
            meta = {"name": key.name, "kind": "packet", "level": key.depth,
                    "index": key.index, "path": key.path}
            fig = packet_figures[key]
            if fig is not None:
                lo, hi = tf.band_range_hz(key, level, rate)
                rows.append({**meta, "low_hz": lo, "high_hz": hi,
                             **figures_of(fig, n, c, total, floor)})
                continue
            comp = tf.band_component(coeffs, key, spec, n)
        else:
            tf.inverse_into(lambda i: c if i == idx else None, lengths, spec, n, comp)
            meta = {"name": tf.band_name(key, level),
                    "kind": "approx" if key == "a" else "detail",
                    "level": level if key == "a" else int(key)}
        lo, hi = tf.band_range_hz(key, level, rate)
        rows.append({**meta, "low_hz": lo, "high_hz": hi,
                     **band_figures(comp, c, total, floor)})
    return rows
