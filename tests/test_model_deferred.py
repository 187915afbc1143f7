"""Deferred gain passes (what the window uses on long recordings) give exact numbers.

A model with ``defer_from`` set records a gain change's full pass instead
of making it; ``cleaned_view``/``cleaned_at`` must still give the cleaned
signal exactly, every other reader pays what is owed first, and paying it
step by step must end where an eager model is.  References: PyWavelets'
``waverec`` of the scaled coefficients (the cleaned signal of a gain-only
recipe, by definition of the inverse transform), and the same model
without deferral.
"""

from dataclasses import replace

import numpy as np
import pytest
import pywt

from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit

SPEC = TransformSpec("dwt", "db4", 5, "symmetric")


def _rec(n=30001, seed=3):
    x = np.random.default_rng(seed).standard_normal((n, 1))
    x[:, 0] += np.sin(np.arange(n) / 300.0)
    return Recording(x, 1000.0, ["c0"])


def _waverec_with_gains(x, gains):
    # Reference: PyWavelets' inverse of the decomposition with bands scaled.
    c = pywt.wavedec(x, "db4", mode="symmetric", level=5)
    keys = ["a"] + list(range(5, 0, -1))
    c = [ci * gains.get(k, 1.0) for ci, k in zip(c, keys)]
    return pywt.waverec(c, "db4", mode="symmetric")[:x.shape[0]]


def _mute(levels, gain=0.0):
    return Edit("gain", levels=tuple(levels), gain=gain)


def test_deferred_gain_is_owed_and_read_exactly():
    rec = _rec()
    x = rec.samples[:, 0]
    m = DecompositionModel(rec, SPEC)
    m.defer_from = 0
    m.add_edit(_mute([2]))
    assert m.deferred(0) == 0                       # nothing paid yet
    ref = _waverec_with_gains(x, {2: 0.0})
    n = rec.n
    assert np.allclose(m.cleaned_view(0, 0, n), ref, rtol=0, atol=1e-10)
    idx = np.random.default_rng(0).integers(0, n, 500)
    assert np.allclose(m.cleaned_at(0, idx), ref[idx], rtol=0, atol=1e-10)
    # Readers pay first: cleaned() is exact and nothing is owed after it.
    assert np.allclose(m.cleaned(0), ref, rtol=0, atol=1e-10)
    assert m.deferred(0) is None


def test_paid_step_by_step_ends_where_an_eager_model_is():
    rec = _rec()
    n = rec.n
    lazy = DecompositionModel(rec, SPEC)
    lazy.defer_from = 0
    eager = DecompositionModel(rec, SPEC)
    region = Edit("region", levels=(1, 2), start_s=5.0, stop_s=5.4, gain=0.0)
    steps = [lambda m: m.add_edit(_mute([1])),
             lambda m: m.add_edit(region),
             lambda m: m.add_edit(_mute(["a"], 0.5)),
             lambda m: m.replace_edit(2, _mute(["a"], 0.25)),
             lambda m: m.add_edit(Edit("threshold", levels="details", rule="universal",
                                       shape="soft")),
             lambda m: m.replace_edit(1, replace(region, start_s=12.0, stop_s=12.3))]
    spans = []
    for i, step in enumerate(steps):
        step(lazy)
        step(eager)
        # part paid, part owed: every span read exactly
        for _ in range(i % 3):
            got = lazy.flush_step(4096)
            if got is not None:
                spans.append(got)
        ref = eager.cleaned(0)
        assert np.allclose(lazy.cleaned_view(0, 0, n), ref, rtol=0, atol=1e-10)
        assert np.allclose(lazy.cleaned_view(0, 7000, 9000), ref[7000:9000], rtol=0,
                           atol=1e-10)
    # paid piece by piece: contiguous steps that end at n
    while (got := lazy.flush_step(4096)) is not None:
        spans.append(got)
    assert lazy.deferred(0) is None
    assert spans and all(0 <= a < b <= n for _, a, b in spans)
    assert np.allclose(lazy.cleaned(0), eager.cleaned(0), rtol=0, atol=1e-10)
    lazy.settle()
    eager.settle()
    assert np.array_equal(lazy.cleaned(0), eager.cleaned(0))


def test_evicted_component_is_paid_before_it_is_reused():
    # Muting more bands than the component cache holds reuses an evicted
    # component's array; what was owed on it must be paid before.
    rec = _rec()
    x = rec.samples[:, 0]
    m = DecompositionModel(rec, SPEC)
    m.defer_from = 0
    gains = {}
    for key in (1, 3, 4, 5, "a"):
        gains[key] = 0.5
        m.set_edits(m.edits + (_mute([key], 0.5),))
    assert np.allclose(m.cleaned_view(0, 0, rec.n), _waverec_with_gains(x, gains),
                       rtol=0, atol=1e-10)
    assert np.allclose(m.removed(0), x - _waverec_with_gains(x, gains), rtol=0, atol=1e-10)


def test_metrics_and_undo_pay_what_is_owed():
    rec = _rec()
    eager = DecompositionModel(rec, SPEC)
    lazy = DecompositionModel(rec, SPEC)
    lazy.defer_from = 0
    for m in (eager, lazy):
        m.add_edit(_mute([1, 2]))
    a, b = eager.metrics(0), lazy.metrics(0)
    assert a["snr_db"] == pytest.approx(b["snr_db"], rel=1e-12)
    lazy.add_edit(_mute(["a"]))
    lazy.undo()
    lazy.undo()
    # all undone: the recording itself (a fresh model with no edits is the input)
    assert np.allclose(lazy.cleaned(0), rec.samples[:, 0], rtol=0, atol=1e-10)
    lazy.settle()
    assert np.array_equal(lazy.cleaned(0), rec.samples[:, 0])


def test_short_recordings_are_not_deferred():
    rec = _rec()
    m = DecompositionModel(rec, SPEC)
    m.defer_from = rec.n + 1
    m.add_edit(_mute([1]))
    assert m.deferred(0) is None


@pytest.mark.parametrize("kind", ["dwt", "swt"])
def test_two_channels_paid_in_turn_match_an_eager_model(kind):
    # Reference: the same recipe on a model that never defers (itself checked
    # against PyWavelets above and in test_model.py).
    x = np.random.default_rng(11).standard_normal((9000, 2))
    rec = Recording(x, 500.0, ["left", "right"])
    spec = TransformSpec(kind, "db4", 4, "symmetric")
    lazy, eager = DecompositionModel(rec, spec), DecompositionModel(rec, spec)
    lazy.defer_from = 0
    for m in (lazy, eager):
        m.add_edit(_mute([1]))
        m.add_edit(Edit("gain", levels=(3,), gain=0.5, channels=(1,)))
    assert lazy.deferred(0) == 0 and lazy.deferred(1) == 0
    seen = set()
    while (got := lazy.flush_step(2048)) is not None:
        seen.add(got[0])
        for k in (0, 1):
            assert np.allclose(lazy.cleaned_view(k, 0, rec.n), eager.cleaned(k), rtol=0,
                               atol=1e-10)
    assert seen == {0, 1}
    assert np.allclose(lazy.cleaned(), eager.cleaned(), rtol=0, atol=1e-10)
