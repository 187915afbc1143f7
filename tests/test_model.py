"""The shared decomposition model: incremental edits equal a fresh computation."""

import numpy as np
import pytest
import pywt
from hypothesis import given, settings
from hypothesis import strategies as st

from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit


def _rec(n=6000, ch=2, seed=0, rate=1000.0):
    x = np.random.default_rng(seed).standard_normal((n, ch))
    return Recording(x, rate, [f"c{k}" for k in range(ch)])


@settings(max_examples=40, deadline=None)
@given(wavelet=st.sampled_from(pywt.wavelist(kind="discrete")),
       mode=st.sampled_from(list(tf.MODES)), kind=st.sampled_from(["dwt", "swt"]),
       n=st.integers(min_value=50, max_value=900), seed=st.integers(0, 999))
def test_empty_recipe_gives_input_back(wavelet, mode, kind, n, seed):
    # Property: with no edits the cleaned signal is the input (1e-10 relative).
    if tf.max_level(n, wavelet) < 1:
        return
    rec = _rec(n, 1, seed)
    m = DecompositionModel(rec, TransformSpec(kind, wavelet, None, mode))
    x = rec.samples[:, 0]
    assert np.max(np.abs(m.cleaned(0) - x)) <= 1e-10 * np.max(np.abs(x))


EDITS = st.one_of(
    st.builds(lambda lv, g: Edit("gain", levels=(lv,), gain=g),
              st.integers(1, 4), st.sampled_from([0.0, 0.5, 2.0])),
    st.builds(lambda lv, t0, w, g: Edit("region", levels=(lv,), start_s=t0, stop_s=t0 + w, gain=g),
              st.integers(1, 4), st.floats(0, 5.5), st.floats(0.01, 0.5), st.sampled_from([0.0, 0.3])),
    st.builds(lambda rule, shape, noise: Edit("threshold", levels="details", rule=rule,
                                              shape=shape, noise=noise),
              st.sampled_from(["universal", "sure", "bayes", "minimax"]),
              st.sampled_from(["hard", "soft", "garrote"]), st.sampled_from(["finest", "level"])),
    st.just(Edit("gain", levels=("a",), gain=0.0)),
)


@settings(max_examples=40, deadline=None)
@given(edits=st.lists(EDITS, min_size=1, max_size=5), kind=st.sampled_from(["dwt", "swt"]),
       mode=st.sampled_from(["symmetric", "periodization", "zero"]))
def test_incremental_equals_fresh_and_parts_add_up(edits, kind, mode):
    # Linearity of the inverse transform: applying edits one by one to a
    # live model gives what a fresh model of the final recipe gives, and
    # cleaned + removed is the original.
    rec = _rec(6000, 2, 1)
    spec = TransformSpec(kind, "db4", 4, mode)
    live = DecompositionModel(rec, spec)
    for i in range(len(edits)):
        live.set_edits(edits[: i + 1])
    fresh = DecompositionModel(rec, spec, edits)
    assert np.allclose(live.cleaned(), fresh.cleaned(), rtol=0, atol=1e-9)
    assert np.allclose(live.cleaned() + live.removed(), rec.samples, rtol=0, atol=1e-12)
    live.settle()
    assert np.array_equal(live.cleaned(), fresh.cleaned())


def test_region_edit_leaves_outside_untouched():
    # CONTRACT: outside the region widened by the filters' support the
    # signal is unchanged (db4: L = 8; level j reaches (L-1) 2^j samples).
    rec = _rec(20000, 1, 2)
    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 5, "symmetric"))
    m.add_edit(Edit("region", levels=(1, 2, 3), start_s=8.0, stop_s=8.5, gain=0.0))
    x, y = rec.samples[:, 0], m.cleaned(0)
    reach = 7 * 2 ** 3 + 8
    lo, hi = int(8.0 * 1000) - reach, int(8.5 * 1000) + reach
    assert np.array_equal(y[:lo], x[:lo])
    assert np.array_equal(y[hi:], x[hi:])
    assert not np.allclose(y[lo:hi], x[lo:hi])


def test_undo_redo_and_listeners():
    rec = _rec(4000, 1, 3)
    m = DecompositionModel(rec, TransformSpec("dwt", "sym4", 4))
    seen = []
    m.add_listener(seen.append)
    m.add_edit(Edit("gain", levels=(1,), gain=0.0))
    after_one = m.cleaned(0).copy()
    m.add_edit(Edit("threshold", levels="details", rule="universal"))
    assert m.can_undo and not m.can_redo
    m.undo()
    assert np.allclose(m.cleaned(0), after_one, atol=1e-12)
    m.undo()
    assert np.allclose(m.cleaned(0), rec.samples[:, 0], atol=1e-12)
    assert not m.can_undo
    m.redo()
    assert np.allclose(m.cleaned(0), after_one, atol=1e-12)
    assert [c.kind for c in seen] == ["recipe"] * 5
    assert seen[0].bands == [1]


def test_gain_edit_is_a_multiple_of_the_band():
    # Muting d1 removes exactly d1's time-domain component (linearity), taken
    # from PyWavelets: waverec of d1 alone.
    rec = _rec(4096, 1, 4)
    x = rec.samples[:, 0]
    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 4))
    c = pywt.wavedec(x, "db4", mode="symmetric", level=4)
    comps = [pywt.waverec([b if i == k else np.zeros_like(b) for i, b in enumerate(c)],
                          "db4", mode="symmetric")[:4096] for k in range(len(c))]
    m.add_edit(Edit("gain", levels=(1,), gain=0.0))
    assert np.allclose(m.removed(0), comps[-1], rtol=0, atol=1e-12)
    # the model's components are PyWavelets' and add up to the signal
    for key in m.band_keys:
        assert np.allclose(m.band_component(0, key, edited=False),
                           comps[0 if key == "a" else 5 - key], rtol=0, atol=1e-12)
    assert np.allclose(sum(comps), x, atol=1e-10)


def test_channels_key_limits_an_edit():
    rec = _rec(4096, 2, 5)
    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 4),
                           [Edit("gain", levels="details", gain=0.0, channels=(1,))])
    assert np.array_equal(m.cleaned(0), rec.samples[:, 0])
    assert not np.allclose(m.cleaned(1), rec.samples[:, 1])


def test_bad_level_names_the_edit():
    rec = _rec(4096, 1, 6)
    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 4))
    with pytest.raises(ScalesieveError, match="edit 1 .*level 7"):
        m.add_edit(Edit("gain", levels=(7,), gain=0.0))


def test_metrics_and_band_table():
    rec = _rec(8192, 1, 7)
    m = DecompositionModel(rec, TransformSpec("dwt", "haar", 3, "periodization"))
    table = m.band_table(0)
    assert [r["name"] for r in table] == ["d1", "d2", "d3", "a3"]
    assert sum(r["energy_fraction"] for r in table) == pytest.approx(1.0)
    # white noise: d1 holds about half the energy (orthonormal Haar)
    assert table[0]["energy_fraction"] == pytest.approx(0.5, abs=0.03)
    m.add_edit(Edit("gain", levels=(1,), gain=0.0))
    met = m.metrics(0)
    assert met["changed_fraction"] == pytest.approx(0.5, abs=1e-3)
    assert met["bands"][0]["zeroed"] == table[0]["count"]
    # Haar, periodization: d1 alone through the inverse is the difference of
    # neighbours, x[2k] - x[2k+1] halved with opposite signs (Haar worked example:
    # Stollnitz, DeRose & Salesin 1995), so its energy is sum (x[2k]-x[2k+1])^2 / 2.
    x = rec.samples[:, 0]
    e = float(np.sum(x ** 2))
    e_d1 = float(np.sum((x[0::2] - x[1::2]) ** 2) / 2)
    assert table[0]["energy"] == pytest.approx(e_d1, rel=1e-9)
    assert met["energy_removed_fraction"] == pytest.approx(e_d1 / e, rel=1e-9)
    assert met["snr_db"] == pytest.approx(10 * np.log10(e / e_d1), rel=1e-9)
