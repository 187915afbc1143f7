"""The model's engine for long recordings: lean states, progress, float32 work.

Incremental updates are checked against a fresh model of the final recipe
(linearity of the inverse transform: both must agree, and ``settle`` makes
them bit-identical); float32 work against float64 within float32's relative
precision (IEEE 754 single: 2**-23, with headroom for sums of a few terms).
"""

from dataclasses import replace

import numpy as np
import pytest

from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit


def _rec(n=20000, ch=1, seed=0, dtype=np.float64):
    x = np.random.default_rng(seed).standard_normal((n, ch)).astype(dtype)
    return Recording(x, 1000.0, [f"c{k}" for k in range(ch)])


@pytest.fixture
def small_blocks(monkeypatch):
    monkeypatch.setattr(tf, "BLOCK", 512)


def _agrees(live, rec, spec):
    fresh = DecompositionModel(rec, spec, live.edits)
    assert np.allclose(live.cleaned(), fresh.cleaned(), rtol=0, atol=1e-9)
    live.settle()
    assert np.array_equal(live.cleaned(), fresh.cleaned())


@pytest.mark.parametrize("rule", ["universal", "bayes", "sure"])
def test_region_moved_around_a_threshold(small_blocks, rule):
    # A region before and after a threshold, moved step by step, as a user drags it.
    rec = _rec()
    spec = TransformSpec("dwt", "db4", 5, "symmetric")
    m = DecompositionModel(rec, spec)
    region = Edit("region", levels=(1, 2, 3), start_s=3.0, stop_s=3.05, gain=0.0)
    m.add_edit(region)
    m.add_edit(Edit("threshold", levels="details", rule=rule, shape="soft"))
    m.add_edit(replace(region, levels=(4, 5, "a"), gain=0.5))
    for i in range(1, 6):
        m.replace_edit(0, replace(region, start_s=3.0 + 0.4 * i, stop_s=3.05 + 0.4 * i))
        m.replace_edit(2, replace(region, levels=(4, 5, "a"), gain=0.5,
                                  start_s=9.0 + 0.7 * i, stop_s=9.2 + 0.7 * i))
    _agrees(m, rec, spec)


def test_region_move_touches_only_its_span():
    # CONTRACT (region): outside the region widened by the filters' support the
    # signal is unchanged; moving it reports a span, not the whole recording.
    rec = _rec()
    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 5, "symmetric"))
    region = Edit("region", levels=(1, 2, 3), start_s=5.0, stop_s=5.05, gain=0.0)
    m.add_edit(region)
    before = m.cleaned(0).copy()
    change = m.replace_edit(0, replace(region, start_s=6.0, stop_s=6.05))
    lo, hi = change.span
    assert hi - lo < 2000
    after = m.cleaned(0)
    assert np.array_equal(after[:lo], before[:lo]) and np.array_equal(after[hi:], before[hi:])


def test_gain_slider_on_bands_that_move_together(small_blocks):
    # One gain edit on several bands: the bands move by the same factor and share
    # one cached component; every step agrees with a fresh model.
    rec = _rec(8000, 2, 1)
    spec = TransformSpec("dwt", "sym4", 4, "periodization")
    m = DecompositionModel(rec, spec, [Edit("threshold", levels=(1,), rule="universal")])
    gain = Edit("gain", levels="details", gain=1.0)
    m.add_edit(gain)
    for g in (0.8, 0.5, 0.2, 0.0, 1.5):
        m.replace_edit(1, replace(gain, gain=g))
        fresh = DecompositionModel(rec, spec, m.edits)
        assert np.allclose(m.cleaned(), fresh.cleaned(), rtol=0, atol=1e-9)
    assert m.band_gain(0, 1) is None and m.band_gain(0, 2) == 1.5 and m.band_gain(0, "a") == 1.0
    _agrees(m, rec, spec)


def test_undo_redo_through_every_kind(small_blocks):
    rec = _rec(6000, 1, 2)
    spec = TransformSpec("swt", "db2", 3, "symmetric")
    m = DecompositionModel(rec, spec)
    steps = [Edit("gain", levels=(1,), gain=0.0),
             Edit("region", levels=(2,), start_s=1.0, stop_s=1.5, gain=0.0),
             Edit("threshold", levels="details", rule="bayes", noise="level")]
    for e in steps:
        m.add_edit(e)
    m.undo()
    m.undo()
    m.redo()
    _agrees(m, rec, spec)


def test_edited_coefficients_window_and_gain_state():
    rec = _rec(4096, 1, 3)
    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 4),
                           [Edit("region", levels=(1,), start_s=1.0, stop_s=2.0, gain=0.0)])
    full = m.edited_coefficients(0, 1)
    assert np.array_equal(m.edited_coefficients(0, 1, 300, 900), full[300:900])
    assert m.band_gain(0, 1) is None
    assert np.array_equal(m.band_gain_state(0, 1), full)
    assert m.band_gain_state(0, 2) == 1.0
    t = m.coefficient_times(0, 1)
    assert not full[(t >= 1.0) & (t <= 2.0)].any()


def test_float32_recording_works_in_float32():
    # float32 samples: float32 coefficients and cleaned signal (half the memory),
    # within float32 precision of the float64 result.
    rec64 = _rec(20000, 1, 4)
    rec32 = Recording(rec64.samples.astype(np.float32), rec64.rate, rec64.channel_names)
    edits = [Edit("threshold", levels="details", rule="universal"),
             Edit("region", levels=(1, 2), start_s=4.0, stop_s=4.2, gain=0.0),
             Edit("gain", levels=("a",), gain=0.5)]
    spec = TransformSpec("dwt", "db4", 6, "symmetric")
    m32 = DecompositionModel(rec32, spec)
    for i in range(len(edits)):
        m32.set_edits(edits[:i + 1])
    m64 = DecompositionModel(Recording(rec32.samples.astype(np.float64), rec64.rate,
                                       rec64.channel_names), spec, edits)
    assert m32.cleaned(0).dtype == np.float32
    assert m32.coefficients(0, 1).dtype == np.float32
    scale = float(np.max(np.abs(m64.cleaned(0))))
    assert np.max(np.abs(m32.cleaned(0) - m64.cleaned(0))) < 64 * 2.0 ** -23 * scale
    m32.settle()
    assert np.array_equal(m32.cleaned(0), DecompositionModel(rec32, spec, edits).cleaned(0))


def test_progress_and_cancel():
    rec = _rec(300000, 2, 5)
    seen = []
    DecompositionModel(rec, TransformSpec("dwt", "db4", 6),
                       [Edit("gain", levels=(1,), gain=0.0)],
                       progress=lambda f, text: seen.append((f, text)))
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0
    assert any("channel 2 of 2" in t for _, t in seen)
    assert any("recipe" in t for _, t in seen)

    class Stop(Exception):
        pass

    def stop_half_way(f, text):
        if f > 0.3:
            raise Stop

    with pytest.raises(Stop):
        DecompositionModel(rec, TransformSpec("dwt", "db4", 6), progress=stop_half_way)

    m = DecompositionModel(rec, TransformSpec("dwt", "db4", 6),
                           [Edit("gain", levels=(1,), gain=0.0)])
    before = m.cleaned().copy()
    m._progress = stop_half_way
    with pytest.raises(Stop):
        m.set_transform(TransformSpec("dwt", "sym8", 5))
    # a cancelled change of transform leaves the model as it was
    assert m.spec == TransformSpec("dwt", "db4", 6, "symmetric")
    assert np.array_equal(m.cleaned(), before)


def test_bad_recipe_refused_before_decomposing():
    rec = _rec(4096, 1, 6)
    seen = []
    with pytest.raises(Exception, match="level 9"):
        DecompositionModel(rec, TransformSpec("dwt", "db4", 4),
                           [Edit("gain", levels=(9,), gain=0.0)],
                           progress=lambda f, t: seen.append(f))
    assert seen == []


def test_noise_estimate_equals_mad_formula():
    # Donoho & Johnstone 1994: sigma = median |d| / Phi^-1(0.75) over the non-zero
    # coefficients, written here with NumPy and scipy.stats.norm (not our code).
    from scipy.stats import norm

    rng = np.random.default_rng(7)
    for n in (1, 2, 3, 10, 1001, 100000):
        d = rng.standard_normal(n)
        d[::7] = 0.0
        for v in (d, np.abs(d) + 1, d.astype(np.float32), np.zeros(n)):
            nz = np.abs(v[v != 0]).astype(np.float64)
            want = float(np.median(nz)) / norm.ppf(0.75) if nz.size else 0.0
            rel = 1e-6 if v.dtype == np.float32 else 1e-12     # the median taken in float32
            assert th.mad_sigma(v) == pytest.approx(want, rel=rel, abs=0.0)
            # numpy.median in the coefficients' own precision, bit for bit
            want_bits = float(np.median(np.abs(v[v != 0])) / th.MAD_TO_SIGMA) if nz.size else 0.0
            assert th.mad_sigma(v) == want_bits
