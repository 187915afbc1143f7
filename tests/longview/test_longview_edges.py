"""Exact coefficients of a band over a range, against PyWavelets' whole-array ``wavedec``."""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve.core.transforms import TransformSpec
from scalesieve.longview.edges import BandRanges
from scalesieve.longview.span import open_long


@pytest.fixture(autouse=True)
def _cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SCALESIEVE_CACHE_DIR", str(tmp_path / "cache"))


@pytest.mark.parametrize("n", [300007, 1025])
@pytest.mark.parametrize("mode", ["symmetric", "zero", "reflect", "smooth", "constant",
                                  "antisymmetric", "antireflect"])
def test_any_range_of_any_band_equals_wavedec(tmp_path, n, mode):
    rng = np.random.default_rng(1)
    x = rng.standard_normal((n, 2))
    path = str(tmp_path / "two.wav")
    sf.write(path, x, 20000, subtype="DOUBLE")
    level = min(7, pywt.dwt_max_level(n, "db4"))
    lr, _ = open_long(path, TransformSpec(wavelet="db4", mode=mode, level=level))
    ranges = BandRanges(lr)
    for k in (0, 1):
        want = pywt.wavedec(x[:, k], "db4", mode=mode, level=level)
        for key in list(range(1, level + 1)) + ["a"]:
            c = want[0] if key == "a" else want[-key]
            m = c.shape[0]
            for c0, c1 in [(0, 1), (3, 17), (m // 2, m // 2 + 33), (m - 9, m), (0, m)]:
                got = ranges.coefficients(k, key, c0, c1)
                np.testing.assert_allclose(got, c[c0:c1], rtol=0, atol=1e-12)
    made = ranges.made
    ranges.coefficients(1, "a", 0, 1)                 # asked again: kept, not read again
    assert ranges.made == made
