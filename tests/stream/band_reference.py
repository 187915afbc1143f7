"""The CONTRACT's figures of one band, from the whole-array PyWavelets outputs: the reference
the stream tests hold the band figures in blocks to (DWT, SWT and packet bands alike)."""

from __future__ import annotations

import numpy as np
from scipy import stats


def band_row(coefficients: np.ndarray, component: np.ndarray, total: float) -> dict:
    """Energy, share, coefficient energy, RMS, peak, kurtosis and count of one band.

    ``component`` is the band's time-domain component (the inverse transform of the band
    alone), ``total`` the recording's energy.
    """
    e = float(np.dot(component, component))
    return {"energy": e, "energy_fraction": e / total,
            "coef_energy": float(np.dot(coefficients, coefficients)),
            "rms": float(np.sqrt(np.mean(component * component))),
            "peak": float(np.max(np.abs(component))),
            # Pearson kurtosis (3 for a Gaussian): scipy.stats, fisher=False
            "kurtosis": float(stats.kurtosis(coefficients, fisher=False, bias=True)),
            "count": coefficients.shape[0]}


#: the figures held to the reference within 1e-9 relative (issue's "band figures" tolerance)
FIGURES = ("energy", "energy_fraction", "coef_energy", "rms", "peak", "kurtosis")


def assert_figures(got: dict, want: dict) -> None:
    """Every one of ``FIGURES`` of the band ``got`` equals ``want``'s within 1e-9 relative."""
    import pytest

    for field in FIGURES:
        assert got[field] == pytest.approx(want[field], rel=1e-9, abs=1e-300), \
            (got["name"], field)
