"""How often impacts repeat: the envelope spectrum of one band.

The band's time-domain component is demodulated through its analytic signal
(the signal plus i times its Hilbert transform, made in the frequency
domain: negative frequencies removed, positive ones doubled); the envelope
is its magnitude, and the envelope spectrum is the single-sided amplitude
spectrum of the envelope with its mean removed, under a Hann window
(amplitudes corrected by the window's coherent gain, common practice).

References
----------
R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A
tutorial", Mech. Syst. Signal Process. 25:485-520, 2011 (envelope analysis).
"""

from __future__ import annotations

import numpy as np

#: how many of the largest local maxima an envelope spectrum reports
PEAKS = 10


def analytic(x: np.ndarray) -> np.ndarray:
    """Analytic signal of a real signal (as scipy.signal.hilbert defines it)."""
    from scipy import fft as sfft

    x = np.asarray(x, dtype=np.float64)
    n = x.shape[0]
    spec = sfft.fft(x, workers=2)
    h = np.zeros(n)
    h[0] = 1.0
    if n % 2 == 0:
        h[n // 2] = 1.0
        h[1:n // 2] = 2.0
    else:
        h[1:(n + 1) // 2] = 2.0
    spec *= h
    return sfft.ifft(spec, workers=2, overwrite_x=True)


def envelope(x: np.ndarray) -> np.ndarray:
    """Magnitude of the analytic signal."""
    return np.abs(analytic(x))


def spectrum(env: np.ndarray, rate: float) -> tuple[np.ndarray, np.ndarray]:
    """(frequencies in Hz, amplitudes) of an envelope, mean removed, Hann window."""
    from scipy import fft as sfft

    env = np.asarray(env, dtype=np.float64)
    n = env.shape[0]
    win = np.hanning(n)
    gain = win.sum()
    amp = np.abs(sfft.rfft((env - env.mean()) * win, workers=2)) * (2.0 / gain)
    amp[0] = 0.0                            # the mean is taken out: no DC line
    freqs = np.arange(amp.shape[0]) * (rate / n)
    return freqs, amp


def local_maxima(amp: np.ndarray) -> np.ndarray:
    """Indices i with amp[i-1] < amp[i] >= amp[i+1] (no end points)."""
    a = np.asarray(amp)
    if a.shape[0] < 3:
        return np.zeros(0, dtype=np.int64)
    mid = a[1:-1]
    return np.flatnonzero((mid > a[:-2]) & (mid >= a[2:])) + 1


def largest_peaks(freqs: np.ndarray, amp: np.ndarray, count: int = PEAKS,
                  max_hz: float | None = None) -> list[dict]:
    """The ``count`` largest local maxima as ``{"hz", "amplitude"}``, largest first."""
    idx = local_maxima(amp)
    if max_hz is not None:
        idx = idx[freqs[idx] <= max_hz]
    order = idx[np.argsort(amp[idx], kind="stable")[::-1][:count]]
    return [{"hz": float(freqs[i]), "amplitude": float(amp[i])} for i in order]


def band_envelope_spectrum(component: np.ndarray, rate: float) -> dict:
    """Envelope, spectrum and peaks of one band's time-domain component."""
    env = envelope(component)
    freqs, amp = spectrum(env, rate)
    return {"resolution_hz": rate / component.shape[0], "freqs": freqs, "amplitude": amp,
            "peaks": largest_peaks(freqs, amp)}


def report(x: np.ndarray, rate: float, band: str = "best", wavelet: str = "db4",
           mode: str = "symmetric", depth: int = 6, geometry=None,
           shaft_hz: float | None = None) -> dict:
    """The envelope spectrum of one packet band of ``x``, with bearing lines if given.

    ``band`` is a name ``wJ.K`` or ``"best"`` (the band of largest kurtosis
    over depths 1 .. ``depth``, core/impulsive_bands.py).  Returns the
    ``envelope --json`` fields (shared/CONTRACT.md) plus ``"freqs"`` and
    ``"amplitude"`` (the whole spectrum, numpy arrays) and, for ``best``,
    ``"kurtosis"`` (the table it was chosen from).
    """
    from scalesieve.core import bearing as br
    from scalesieve.core import impulsive_bands as ib
    from scalesieve.core import packets as wp

    x = np.asarray(x, dtype=np.float64)
    table = None
    if band == "best":
        table = ib.table(x, rate, wavelet, mode, depth)
        if table["best"] is None:
            raise ValueError("no band carries anything beyond round-off (a constant signal?)")
        path = table["best"]["path"]
    else:
        jk = wp.parse_name(band)
        if jk is None or jk[0] < 1:
            raise ValueError(f"band {band!r} is not a packet band name like w3.2, nor best")
        top = int(np.floor(np.log2(max(2, x.shape[0]))))
        if jk[0] > top:
            raise ValueError(f"band {band!r} is deeper than the recording allows")
        path = wp.path_of(*jk)
    lo, hi = wp.range_hz(path, rate)
    comp = wp.band_signal(x, path, wavelet, mode)
    spec = band_envelope_spectrum(comp, rate)
    del comp
    out = {"band": {"name": f"w{len(path)}.{wp.freq_index(path)}", "low_hz": lo,
                    "high_hz": hi, "path": path},
           "resolution_hz": spec["resolution_hz"], "peaks": spec["peaks"],
           "freqs": spec["freqs"], "amplitude": spec["amplitude"]}
    if table is not None:
        out["kurtosis"] = table
    if geometry is not None:
        if shaft_hz is None:
            raise ValueError("--bearing needs --shaft HZ (the shaft's rotation rate)")
        f = br.frequencies(geometry, shaft_hz)
        out["bearing"] = f
        out["lines"] = br.match(br.lines(f, shaft_hz), spec["freqs"], spec["amplitude"])
    return out
