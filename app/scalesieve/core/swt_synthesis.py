"""One SWT band synthesised alone by an FFT filtering: ``pywt.iswt``'s numbers, two FFTs.

Used by ``scalesieve.core.transforms.band_component`` for SWT bands up to
``transforms.SWT_FFT_MAX`` coefficients.  The responses are taken from
``pywt.iswt`` itself (it is linear and commutes with circular shifts) and the
most recent ones are kept, up to ``SWT_RESPONSES_KEPT`` bytes.
"""

from __future__ import annotations

import threading
import warnings
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np
import pywt

if TYPE_CHECKING:                  # annotations only: transforms imports this module
    from scalesieve.core.transforms import TransformSpec


@lru_cache(maxsize=2)
def _swt_level_one_spectra(wavelet: str, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Spectra (full FFT, ``count`` bins) of one level of PyWavelets' normalised iswt.

    ``pywt.iswt`` is linear and commutes with circular shifts, so one level
    is a circular filtering of its approximation and of its detail; its
    impulse responses, taken from ``pywt.iswt`` itself, give the filters.
    """
    imp = np.zeros(count)
    imp[0] = 1.0
    zero = np.zeros(count)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        lo = pywt.iswt([imp, zero], wavelet, norm=True)
        hi = pywt.iswt([zero, imp], wavelet, norm=True)
    return np.fft.fft(lo), np.fft.fft(hi)


def _swt_band_alone(band: np.ndarray, key, spec: TransformSpec, n: int) -> np.ndarray:
    """``inverse`` of the SWT with every band but ``key`` zero, by one FFT filtering.

    Level l of the iswt applies level one's filters upsampled by 2^(l-1)
    (PyWavelets runs level one on every 2^(l-1)-th sample), so a band's
    synthesis is the product of those filters' spectra at 2^(l-1) times the
    frequency.  The same numbers as ``pywt.iswt`` up to round-off (a test
    compares them); the cost is two FFTs instead of a Python loop per offset.
    """
    count = band.shape[0]
    resp = _swt_band_response(spec.wavelet, key, spec.level, count)
    out = np.fft.irfft(np.fft.rfft(np.asarray(band, dtype=np.float64)) * resp, count)
    return np.ascontiguousarray(out[:n], dtype=band.dtype)


#: bytes of SWT band responses kept (a window shows the same bands again and again)
SWT_RESPONSES_KEPT = 32 << 20
_swt_responses: dict = {}
_swt_responses_lock = threading.Lock()     # the window's threads share it


def _swt_band_response(wavelet: str, key, level: int, count: int) -> np.ndarray:
    """rfft-sized response of band ``key``'s synthesis (see ``_swt_band_alone``)."""
    name = (wavelet, key if key == "a" else int(key), level if key == "a" else 0, count)
    with _swt_responses_lock:
        resp = _swt_responses.pop(name, None)
        if resp is not None:
            _swt_responses[name] = resp      # most recently used last
            return resp
    with _swt_responses_lock:
        lo, hi = _swt_level_one_spectra(wavelet, count)
    top = level if key == "a" else int(key)
    k = np.arange(count // 2 + 1)
    resp = (lo if key == "a" else hi)[(k << (top - 1)) % count]
    for j in range(1, top):
        resp *= lo[(k << (j - 1)) % count]
    with _swt_responses_lock:
        while _swt_responses and (sum(r.nbytes for r in _swt_responses.values())
                                  + resp.nbytes > SWT_RESPONSES_KEPT):
            _swt_responses.pop(next(iter(_swt_responses)))
        if resp.nbytes <= SWT_RESPONSES_KEPT:
            _swt_responses[name] = resp
    return resp
