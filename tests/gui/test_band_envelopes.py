"""Band envelopes made block by block, checked against PyWavelets' own inverse."""

import numpy as np
import pytest
import pywt

from scalesieve.core.transforms import TransformSpec, band_index
from scalesieve.gui.band_envelopes import unit_envelope
from scalesieve.recipe import Edit


def _reference_component(x, key, wavelet, level, mode):
    # Reference: pywt.waverec of the coefficients with every other band zeroed.
    coeffs = pywt.wavedec(x, wavelet, mode=mode, level=level)
    idx = band_index(key, level)
    parts = [c if i == idx else np.zeros_like(c) for i, c in enumerate(coeffs)]
    return coeffs, pywt.waverec(parts, wavelet, mode=mode)[:x.shape[0]]


@pytest.mark.parametrize("mode", ["symmetric", "zero", "periodization"])
@pytest.mark.parametrize("key", [1, 3, "a"])
def test_unit_envelope_equals_the_envelope_of_the_inverse(key, mode):
    n, block, level = 300_001, 64, 5
    x = np.random.default_rng(7).standard_normal(n)
    coeffs, comp = _reference_component(x, key, "db4", level, mode)
    spec = TransformSpec("dwt", "db4", level, mode)
    env = unit_envelope(coeffs, key, spec, n, block)
    starts = np.arange(0, n, block)
    # Local synthesis adds the same products in another order: round-off only.
    np.testing.assert_allclose(env.lo, np.minimum.reduceat(comp, starts), rtol=0, atol=1e-12)
    np.testing.assert_allclose(env.hi, np.maximum.reduceat(comp, starts), rtol=0, atol=1e-12)


def test_a_stop_request_ends_the_work():
    class Stop(Exception):
        pass

    calls = []

    def check():
        calls.append(1)
        if len(calls) > 2:
            raise Stop()

    x = np.random.default_rng(1).standard_normal(2_000_000)
    spec = TransformSpec("dwt", "db4", 4, "symmetric")
    coeffs = pywt.wavedec(x, "db4", mode="symmetric", level=4)
    with pytest.raises(Stop):
        unit_envelope(coeffs, 2, spec, x.shape[0], 64, check)


def test_the_window_shows_first_and_draws_every_band_after(window):
    from sample_files import sample

    window.open_path(sample("pump_bearing.wav"), ask_text_settings=False)
    assert window.adapter.wait_idle(60, bands=False) is None
    model = window.adapter.model
    assert model is not None
    # Edits are taken while the band envelopes are still coming.
    assert window.adapter.add_edit(Edit("gain", levels=(1,), gain=0.0))
    assert window.adapter.wait_idle(60) is None
    pic = window.adapter.pictures(0)
    # only the open lanes' envelopes are made
    assert set(pic.unit) == set(window.bands.open_keys) != set()
    n = model.recording.n
    for key in model.band_keys:
        window.bands.set_lane(key, True)       # every band's lane open
    assert window.adapter.wait_idle(60) is None
    assert pic.missing_bands() == []
    for key in model.band_keys:
        # Reference: PyWavelets' inverse of that band alone (as above), at the
        # envelope's blocks; the muted band's envelope is zero.
        coeffs, comp = _reference_component(model.original(0), key, model.spec.wavelet,
                                            model.level, model.spec.mode)
        gain = 0.0 if key == 1 else 1.0
        env = pic.band_envelope(key)
        starts = np.arange(0, n, pic.block)
        top = np.max(np.abs(comp))
        np.testing.assert_allclose(env.hi, gain * np.maximum.reduceat(comp, starts),
                                   rtol=0, atol=1e-9 * top + 1e-15)
        xs, ys = window.bands.rows[key].curve.getData()
        assert ys is not None and ys.size > 0
