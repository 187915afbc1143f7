"""The SWT's level limit is PyWavelets' SWT limit, not the DWT's."""

from __future__ import annotations

import numpy as np
import pytest
import pywt

from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel


@pytest.mark.parametrize("n", [1024, 4096, 8192, 3 * 1024])
def test_swt_limit_is_at_least_pywt_swt_max_level(n):
    # reference: pywt.swt_max_level (4096 -> 12, while dwt_max_level(4096, 8) is 9)
    assert tf.swt_max_level(n) >= pywt.swt_max_level(n)
    spec = TransformSpec("swt", "db4", pywt.swt_max_level(n), "symmetric").resolved(n)
    assert spec.level == pywt.swt_max_level(n)
    with pytest.raises(ValueError, match=f"at most {tf.swt_max_level(n)}"):
        TransformSpec("swt", "db4", tf.swt_max_level(n) + 1, "symmetric").resolved(n)


def test_dwt_limit_is_unchanged():
    # reference: pywt.dwt_max_level(4096, db4's 8 taps) = 9
    with pytest.raises(ValueError, match="at most 9"):
        TransformSpec("dwt", "db4", 10, "symmetric").resolved(4096)


def test_deep_swt_is_pywt_swt_and_inverts():
    # reference: pywt.swt / pywt.iswt (normalised) at PyWavelets' deepest level
    rng = np.random.default_rng(1)
    x = rng.standard_normal(4096)
    level = pywt.swt_max_level(x.shape[0])
    m = DecompositionModel(Recording(x[:, None], 8000.0, ["c0"]),
                           TransformSpec("swt", "db4", level, "symmetric"))
    want = pywt.swt(x, "db4", level=level, trim_approx=True, norm=True)
    for j in range(1, level + 1):
        np.testing.assert_allclose(m.coefficients(0, j), want[-j], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(m.cleaned(0), x, atol=1e-9)


def test_swt_on_a_length_not_a_power_of_two_pads_and_inverts():
    # 3000 = 8 * 375: pywt.swt_max_level(3000) is 3; padding to a multiple of 2^11 allows 11
    rng = np.random.default_rng(2)
    x = rng.standard_normal(3000)
    assert pywt.swt_max_level(3000) == 3
    m = DecompositionModel(Recording(x[:, None], 8000.0, ["c0"]),
                           TransformSpec("swt", "db4", 11, "symmetric"))
    np.testing.assert_allclose(m.cleaned(0), x, atol=1e-9)
