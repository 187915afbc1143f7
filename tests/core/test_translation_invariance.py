"""Translation-invariant denoising beats decimated denoising (Coifman & Donoho 1995).

R. R. Coifman and D. L. Donoho, "Translation-invariant de-noising", in
Wavelets and Statistics, Springer LNS 103, 1995:
thresholding the undecimated transform (the average over all shifts) gives
a lower mean squared error than thresholding the decimated one, and fewer
pseudo-Gibbs artefacts, on the Donoho-Johnstone test functions.  Those
functions come from PyWavelets (``pywt.data.demo_signal``); the signal is
scaled to a standard deviation of 7 against unit noise, the signal-to-noise
ratio Donoho & Johnstone 1994 (Biometrika 81:425) used.
"""

import numpy as np
import pytest
import pywt

from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit

N = 2048


def _mse(kind, f, noise, seed):
    y = f + np.random.default_rng(seed).standard_normal(N)
    m = DecompositionModel(Recording(y[:, None], 1.0, ["y"]),
                           TransformSpec(kind, "db4", 5, "periodization"),
                           [Edit("threshold", levels="details", rule="universal",
                                 shape="hard", noise=noise)])
    return float(np.mean((m.cleaned(0) - f) ** 2))


@pytest.mark.parametrize("name", ["Blocks", "Bumps", "HeaviSine", "Doppler"])
@pytest.mark.parametrize("noise", ["level", "finest"])
def test_undecimated_denoising_has_the_lower_error(name, noise):
    f = np.asarray(pywt.data.demo_signal(name, N), dtype=np.float64)
    f = 7.0 * f / np.std(f)
    seeds = range(3)
    dwt = np.mean([_mse("dwt", f, noise, s) for s in seeds])
    swt = np.mean([_mse("swt", f, noise, s) for s in seeds])
    assert swt < dwt, (name, noise, swt, dwt)
    # and both are well below the noise's own mean square (1): denoising happened
    assert dwt < 0.6
