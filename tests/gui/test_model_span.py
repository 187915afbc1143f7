"""DecompositionModel.band_component_span (added for the window's zoomed views).

Reference: PyWavelets' ``waverec`` of a coefficient list that is zero except
for one band, which is that band's time-domain component by definition.
"""

import numpy as np
import pytest
import pywt

from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit


def pywt_component(x, spec, key, values=None):
    c = pywt.wavedec(x, spec.wavelet, mode=spec.mode, level=spec.level)
    i = 0 if key == "a" else spec.level - int(key) + 1
    keep = c[i] if values is None else values
    z = [np.zeros_like(v) for v in c]
    z[i] = keep
    return pywt.waverec(z, spec.wavelet, mode=spec.mode)[: x.shape[0]]


@pytest.mark.parametrize("wavelet,mode", [("haar", "symmetric"), ("db4", "symmetric"),
                                          ("sym8", "zero"), ("bior3.5", "reflect"),
                                          ("db4", "periodization")])
def test_span_equals_the_band_alone(wavelet, mode):
    rng = np.random.default_rng(7)
    x = rng.standard_normal(3001)
    m = DecompositionModel(Recording(x, 1000.0, ["a"]), TransformSpec("dwt", wavelet, 5, mode))
    for key in m.band_keys:
        ref = pywt_component(x, m.spec, key)
        for a, b in ((0, 3001), (0, 17), (1200, 1450), (2990, 3001), (5, 6)):
            got = m.band_component_span(0, key, a, b, edited=False)
            np.testing.assert_allclose(got, ref[a:b], rtol=0, atol=1e-10)


def test_span_of_an_edited_band_follows_the_edits():
    rng = np.random.default_rng(8)
    x = rng.standard_normal(4096)
    m = DecompositionModel(Recording(x, 1000.0, ["a"]), TransformSpec("dwt", "db4", 6))
    m.add_edit(Edit("region", levels=(2,), start_s=1.0, stop_s=1.5, gain=0.0))
    edited = m.edited_coefficients(0, 2).copy()
    ref = pywt_component(x, m.spec, 2, edited)
    got = m.band_component_span(0, 2, 900, 1700)
    np.testing.assert_allclose(got, ref[900:1700], rtol=0, atol=1e-10)
    assert np.abs(got[100:500]).max() < np.abs(pywt_component(x, m.spec, 2)[1000:1400]).max()
