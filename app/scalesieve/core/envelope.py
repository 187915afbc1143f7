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
    # the weights h (1 at DC and Nyquist, 2 between, 0 above) keep only the bins a
    # real FFT gives: those are made, the rest of the spectrum stays zero
    half = sfft.rfft(x, workers=2)
    spec = np.zeros(n, dtype=complex)
    spec[:half.shape[0]] = half
    del half
    top = n // 2 if n % 2 == 0 else (n + 1) // 2
    spec[1:top] *= 2.0
    return sfft.ifft(spec, workers=2, overwrite_x=True)


def envelope(x: np.ndarray) -> np.ndarray:
    """Magnitude of the analytic signal."""
    return np.abs(analytic(x))


def spectrum(env: np.ndarray, rate: float,
             window: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(frequencies in Hz, amplitudes) of an envelope, mean removed, Hann window.

    ``window``, if given, is ``np.hanning(len(env))`` already made (``env`` is not changed).
    """
    from scipy import fft as sfft

    env = np.asarray(env, dtype=np.float64)
    n = env.shape[0]
    win = np.hanning(n) if window is None else window
    gain = win.sum()
    y = np.subtract(env, env.mean())
    y *= win
    amp = np.abs(sfft.rfft(y, workers=2))
    del y
    amp *= 2.0 / gain
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
    if idx.shape[0] > 4 * count > 0:
        # only the maxima at least as large as the count-th largest (ties kept) are
        # sorted: the same order as sorting them all
        vals = amp[idx]
        cut = np.partition(vals, vals.shape[0] - count)[vals.shape[0] - count]
        idx = idx[vals >= cut]
    order = idx[np.argsort(amp[idx], kind="stable")[::-1][:count]]
    return [{"hz": float(freqs[i]), "amplitude": float(amp[i])} for i in order]


#: the bins kept around a band, in band widths either side (its filters' skirts) ...
MARGIN = 1.0
#: ... unless that leaves out more than this share of the energy: then every bin is kept
MAX_LEFT_OUT = 1e-4


def band_envelope(x: np.ndarray, rate: float, low_hz: float, high_hz: float,
                  margin: float = MARGIN) -> tuple[np.ndarray, float, float]:
    """Envelope of a band-limited signal, sampled as slowly as its band allows.

    The analytic signal's spectrum lives where the band's does, so it is
    made from those bins only: one real FFT of ``x``, the bins of
    ``low_hz`` .. ``high_hz`` widened by ``margin`` band widths either side,
    doubled, moved down to 0 Hz (which leaves the magnitude alone) and
    inverted at a length m = n / q that holds them (q a whole divisor of n);
    when those bins would leave out more than ``MAX_LEFT_OUT`` of the energy,
    every bin is kept (q = 1).
    The magnitude is then ``abs(scipy.signal.hilbert(x))[::q]``, exactly so
    when nothing of ``x`` lies outside the bins kept; the share of the
    energy left outside is returned so a reader can judge.

    Returns ``(envelope, envelope_rate, left_out_share)``.
    """
    from scipy import fft as sfft

    x = np.asarray(x, dtype=np.float64)
    n = x.shape[0]
    spec = sfft.rfft(x, workers=2)
    df = rate / n
    width = max(0.0, high_hz - low_hz)
    k0 = max(0, int(np.floor((low_hz - margin * width) / df)))
    k1 = min(spec.shape[0], int(np.ceil((high_hz + margin * width) / df)) + 1)
    power = spec.real * spec.real + spec.imag * spec.imag
    total = float(power.sum())
    kept = float(power[k0:k1].sum())
    if total > 0 and kept < (1 - MAX_LEFT_OUT) * total:
        k0, k1, kept = 0, spec.shape[0], total     # wide skirts: the exact envelope
    del power
    # every q-th sample, q a divisor of n: the envelope then sits on samples of x
    need = max(2, k1 - k0)
    q = max(1, n // need)
    while q > 1 and n % q:
        q -= 1
    m = n // q
    y = np.zeros(m, dtype=complex)
    y[:k1 - k0] = 2.0 * spec[k0:k1]
    if k0 == 0:
        y[0] = spec[0]                       # DC is not doubled
    if n % 2 == 0 and k1 == spec.shape[0]:
        y[k1 - k0 - 1] = spec[-1]            # nor is the Nyquist bin
    del spec
    z = sfft.ifft(y, workers=2, overwrite_x=True)
    env = np.abs(z) * (m / n)
    share = 0.0 if total <= 0 else max(0.0, 1.0 - kept / total)
    return env, rate * m / n, share


def band_envelope_spectrum(component: np.ndarray, rate: float, low_hz: float = 0.0,
                           high_hz: float | None = None) -> dict:
    """Envelope, spectrum and peaks of one band's time-domain component."""
    hi = rate / 2 if high_hz is None else high_hz
    env, env_rate, share = band_envelope(component, rate, low_hz, hi)
    freqs, amp = spectrum(env, env_rate)
    return {"resolution_hz": env_rate / env.shape[0], "freqs": freqs, "amplitude": amp,
            "peaks": largest_peaks(freqs, amp), "envelope_rate": env_rate,
            "left_out": share}


def over_recording(c: np.ndarray, depth: int, n: int, wavelet: str, mode: str) -> np.ndarray:
    """The n // 2^J coefficients of a depth-J node that lie over the recording.

    Outside ``periodization`` a node also holds the boundary extension:
    coefficient i is centred near sample 2^J i - (2^J - 1)(L - 3)/2 (L the
    filter length), so the first few lie before the recording; they and the
    last few are left out.  Then the spectrum's bins are rate / n apart
    whenever 2^J divides n, as for the full-rate envelope.
    """
    import pywt

    P = 2 ** depth
    m = max(1, min(c.shape[0], n // P))
    if mode == "periodization":
        return c[:m]
    L = pywt.Wavelet(wavelet).dec_len
    i0 = int(round((P - 1) * (L - 3) / (2 * P)))
    i0 = max(0, min(c.shape[0] - m, i0))
    return c[i0:i0 + m]


def _magnitude(z: np.ndarray, scale: float) -> np.ndarray:
    """``np.abs(z) * scale`` without a second full-length array."""
    env = np.abs(z)
    del z
    env *= scale
    return env


def node_envelope_spectrum(c: np.ndarray, depth: int, rate: float,
                           threads: int | None = None) -> dict:
    """Envelope, spectrum and peaks of a packet band from its node's own coefficients.

    A node at depth J is its band filtered, moved down to 0 .. fs/2^(J+1)
    (mirrored after an odd number of detail steps, which leaves a magnitude
    alone) and kept every 2^J-th sample.  Its analytic signal's magnitude,
    divided by 2^(J/2) (the orthonormal filters' gain), is the band's envelope
    at the node's rate fs/2^J.

    What this is, exactly: the envelope of what the node holds.  It is the
    envelope of the band's time-domain component up to two differences: the
    component's content outside the band (the filters' skirts) enters folded
    back into the band instead of where it lies, and in the band's flanks the
    node sees the analysis filter once where the component has it twice.
    Peaks of the envelope spectrum lie at the same frequencies; amplitudes
    differ by those flanks and the folded skirts.  ``band_envelope_spectrum``
    of ``packets.component`` is the component's own envelope.
    With ``threads`` other than 1 the window is made in a second thread (the same numbers).
    """
    c = np.asarray(c, dtype=np.float64)
    window = None
    if (threads is None or threads > 1) and c.shape[0] >= 1 << 16:
        # the Hann window (cosines of every sample) is made beside the FFTs
        from concurrent.futures import ThreadPoolExecutor

        with ThreadPoolExecutor(max_workers=1) as pool:
            made = pool.submit(np.hanning, c.shape[0])
            env = _magnitude(analytic(c), 2.0 ** (-depth / 2.0))
            window = made.result()
    else:
        env = _magnitude(analytic(c), 2.0 ** (-depth / 2.0))
    env_rate = rate / 2 ** depth
    freqs, amp = spectrum(env, env_rate, window)
    return {"resolution_hz": env_rate / env.shape[0], "freqs": freqs, "amplitude": amp,
            "peaks": largest_peaks(freqs, amp), "envelope_rate": env_rate,
            "left_out": None}


def report(x: np.ndarray, rate: float, band: str = "best", wavelet: str = "db4",
           mode: str = "symmetric", depth: int = 6, geometry=None,
           shaft_hz: float | None = None, exact: bool = False, check=None,
           table: dict | None = None, threads: int | None = None) -> dict:
    """The envelope spectrum of one packet band of ``x``, with bearing lines if given.

    ``band`` is a name ``wJ.K`` or ``"best"`` (the band of largest interior kurtosis
    over depths 1 .. ``depth``, core/impulsive_bands.py).  Returns the
    ``envelope --json`` fields (docs/reference.md) plus ``"freqs"`` and
    ``"amplitude"`` (the whole spectrum, numpy arrays) and, for ``best``,
    ``"kurtosis"`` (the table it was chosen from).

    The envelope is the node's own (``node_envelope_spectrum``: its cost
    follows the node, n / 2^J samples); with ``exact`` it is that of the
    band's time-domain component at the full rate (``band_envelope_spectrum``:
    full-length syntheses and FFTs), ``"envelope": "component"`` in the result.
    ``check()``, if given, is called between the steps and may raise to stop.
    ``table``, for ``best``: the kurtosis table of these samples already made
    (``impulsive_bands.table(..., keep_best=True)`` with this wavelet, mode and
    depth); it is read, not changed, and not made again.
    ``threads``: as ``impulsive_bands.table`` (default ``core.threads.count()``); the
    numbers do not depend on it.
    """
    from scalesieve.core import impulsive_bands as ib
    from scalesieve.core import packets as wp

    x = np.asarray(x, dtype=np.float64)
    c = None
    if band != "best":
        table = None
    if band == "best":
        if table is None:
            table = ib.table(x, rate, wavelet, mode, depth, keep_best=True, check=check,
                             threads=threads)
        table = dict(table)
        c = table.pop("best_coefficients")
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
    if check is not None:
        check()
    if c is None:
        c = wp.forward(x, wavelet, mode, [path])[0]     # only the band's own branch
    if exact:
        comp = wp.component(c, path, wavelet, mode, x.shape[0])
        spec = band_envelope_spectrum(comp, rate, lo, hi)
        del comp
    else:
        if threads is None:
            from scalesieve.core import threads as th

            threads = th.count()
        spec = node_envelope_spectrum(over_recording(c, len(path), x.shape[0], wavelet, mode),
                                      len(path), rate, threads)
    del c
    out = {"band": {"name": f"w{len(path)}.{wp.freq_index(path)}", "low_hz": lo,
                    "high_hz": hi, "path": path},
           "resolution_hz": spec["resolution_hz"], "peaks": spec["peaks"],
           "envelope": "component" if exact else "node",
           "energy_left_out": spec["left_out"],
           "freqs": spec["freqs"], "amplitude": spec["amplitude"]}
    if table is not None:
        out["kurtosis"] = table
    if geometry is not None:
        add_bearing(out, geometry, shaft_hz)
    return out


def add_bearing(rep: dict, geometry, shaft_hz: float | None) -> dict:
    """Put a bearing's frequencies and lines matched to peaks in a ``report`` (in place).

    The spectrum is not recomputed: a new geometry or shaft rate costs only the
    matching (the window marks lines again this way).
    """
    from scalesieve.core import bearing as br

    if shaft_hz is None:
        raise ValueError("--bearing needs --shaft HZ (the shaft's rotation rate)")
    f = br.frequencies(geometry, shaft_hz)
    rep["bearing"] = f
    rep["lines"] = br.match(br.lines(f, shaft_hz), rep["freqs"], rep["amplitude"])
    return rep
