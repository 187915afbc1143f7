"""Edits on packet bands: incremental updates against a full PyWavelets reconstruction."""

from __future__ import annotations

import numpy as np
import pytest
import pywt
from scipy.stats import norm

from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit, Recipe, loads

RATE = 8000.0


def _recording(n=6000, seed=5):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / RATE
    x = 0.5 * np.sin(2 * np.pi * 300 * t) + 0.05 * rng.standard_normal(n)
    x[3000:3040] += np.hanning(40) * np.sin(2 * np.pi * 2500 * t[:40])
    return Recording(samples=x[:, None], rate=RATE, channel_names=["ch0"], source="test")


def _reference(x, wavelet, mode, depth, node_values):
    """WaveletPacket.reconstruct with the given node data (reference: PyWavelets)."""
    tree = pywt.WaveletPacket(x, wavelet, mode, maxlevel=depth)
    tree.get_level(depth)
    for path, v in node_values.items():
        tree[path] = v
    return tree.reconstruct(update=False)[:x.shape[0]]


@pytest.mark.parametrize("mode", ["symmetric", "periodization"])
def test_gain_threshold_region_undo_redo_match_pywavelets(mode):
    rec = _recording()
    x = rec.samples[:, 0]
    spec = TransformSpec("packet", "db4", 3, mode)
    m = DecompositionModel(rec, spec)
    names = [m.band_name(k) for k in m.band_keys]
    assert names == [f"w3.{k}" for k in range(8)]
    tree = pywt.WaveletPacket(x, "db4", mode, maxlevel=3)
    nodes = {n.path: n.data for n in tree.get_level(3, "freq")}

    # gain on two named bands: a multiple of their cached components
    ch = m.add_edit(Edit("gain", bands=("w3.2", "w3.5"), gain=0.25))
    assert ch.bands and ch.span == (0, rec.n)
    want = dict(nodes)
    for name in ("w3.2", "w3.5"):
        path = [k.path for k in m.band_keys if m.band_name(k) == name][0]
        want[path] = nodes[path] * 0.25
    np.testing.assert_allclose(m.cleaned(0), _reference(x, "db4", mode, 3, want), atol=1e-10)

    # threshold: universal soft, noise from the level-1 detail (Donoho & Johnstone 1994)
    d1 = pywt.dwt(x, "db4", mode)[1]
    d1 = d1[d1 != 0]
    sigma = np.median(np.abs(d1)) / norm.ppf(0.75)   # 0.6745 = Phi^-1(0.75)
    lam = sigma * np.sqrt(2 * np.log(rec.n))
    m.add_edit(Edit("threshold", levels="details", rule="universal", shape="soft",
                    noise="finest"))
    after = {p: (v if set(p) == {"a"} else pywt.threshold(v, lam, "soft"))
             for p, v in want.items()}
    np.testing.assert_allclose(m.cleaned(0), _reference(x, "db4", mode, 3, after), atol=1e-10)

    # a region on one band: the change is confined near the region
    before = m.cleaned(0).copy()
    ch = m.add_edit(Edit("region", bands=("w3.5",), start_s=0.37, stop_s=0.39, gain=0.0))
    assert ch.span is not None and ch.span[1] - ch.span[0] < rec.n // 4
    changed = np.flatnonzero(m.cleaned(0) != before)
    assert changed.size and changed.min() >= ch.span[0] and changed.max() < ch.span[1]
    fresh = DecompositionModel(rec, spec, m.edits)
    np.testing.assert_allclose(m.cleaned(0), fresh.cleaned(0), atol=1e-12)

    # undo twice, redo once: the same numbers as the reference for that state
    m.undo()
    m.undo()
    np.testing.assert_allclose(m.cleaned(0), _reference(x, "db4", mode, 3, want), atol=1e-10)
    m.redo()
    np.testing.assert_allclose(m.cleaned(0), _reference(x, "db4", mode, 3, after), atol=1e-10)


@pytest.mark.parametrize("rule", ["sure", "bayes", "minimax"])
def test_rules_with_noise_per_band_match_a_fresh_model_and_pywavelets(rule):
    rec = _recording(4096)
    x = rec.samples[:, 0]
    spec = TransformSpec("packet", "sym4", 2, "symmetric")
    m = DecompositionModel(rec, spec)
    m.add_edit(Edit("gain", bands=("w2.3",), gain=0.5))
    m.add_edit(Edit("threshold", levels="all", rule=rule, shape="hard", noise="level"))
    fresh = DecompositionModel(rec, spec, m.edits)
    np.testing.assert_allclose(m.cleaned(0), fresh.cleaned(0), atol=1e-12)
    if rule == "bayes":
        # BayesShrink per band, sigma from the band's own MAD (Chang, Yu & Vetterli 2000)
        tree = pywt.WaveletPacket(x, "sym4", "symmetric", maxlevel=2)
        want = {}
        for k, node in enumerate(tree.get_level(2, "freq")):
            c = node.data * (0.5 if k == 3 else 1.0)   # w2.3: 4th in PyWavelets' freq order
            s = np.median(np.abs(node.data[node.data != 0])) / norm.ppf(0.75)
            lam = s * s / np.sqrt(max(np.mean(c * c) - s * s, np.finfo(float).tiny))
            want[node.path] = pywt.threshold(c, lam, "hard")
        got = m.cleaned(0)
        ref = _reference(x, "sym4", "symmetric", 2, want)
        assert np.max(np.abs(got - ref)) < 1e-6 * np.max(np.abs(x))


def test_best_basis_recipe_replays_the_same_tiling():
    rec = _recording()
    m = DecompositionModel(rec, TransformSpec("packet", "db2", 4, "symmetric", basis="best"))
    saved = m.recipe().to_json()
    assert isinstance(saved["transform"]["basis"], list)
    back = loads(Recipe(m.spec, ()).dumps())
    other = Recording(samples=np.random.default_rng(1).standard_normal((5000, 1)), rate=RATE,
                      channel_names=["x"], source="other")
    m2 = DecompositionModel(other, back.transform)
    assert [k.path for k in m2.band_keys] == [k.path for k in m.band_keys]


def test_levels_on_a_packet_transform_are_refused_with_a_message():
    rec = _recording()
    with pytest.raises(ScalesieveError, match="no detail levels"):
        DecompositionModel(rec, TransformSpec("packet", "db2", 2), [Edit("gain", levels=(1,))])
    with pytest.raises(ScalesieveError, match="w9.0"):
        DecompositionModel(rec, TransformSpec("packet", "db2", 2),
                           [Edit("gain", bands=("w9.0",))])


def test_band_names_work_for_the_dwt_too():
    rec = _recording()
    a = DecompositionModel(rec, TransformSpec("dwt", "db4", 4), [Edit("gain", bands=("d2", "a4"),
                                                                     gain=0.0)])
    b = DecompositionModel(rec, TransformSpec("dwt", "db4", 4), [Edit("gain", levels=(2, "a"),
                                                                     gain=0.0)])
    np.testing.assert_array_equal(a.cleaned(0), b.cleaned(0))


def test_packet_band_table_has_contract_fields():
    rec = _recording()
    m = DecompositionModel(rec, TransformSpec("packet", "db4", 3, "periodization"))
    rows = m.band_table(0)
    assert [r["index"] for r in rows] == list(range(8))
    for r in rows:
        assert r["kind"] == "packet" and r["level"] == 3
        assert r["low_hz"] == r["index"] * RATE / 16 and r["high_hz"] == (r["index"] + 1) * RATE / 16
    # orthogonal wavelet with periodization: the shares sum to 1 (Mallat, energy preservation)
    assert abs(sum(r["energy_fraction"] for r in rows) - 1.0) < 1e-9


@pytest.mark.parametrize("mode", ["symmetric", "periodization", "zero"])
def test_a_span_of_a_packet_band_is_the_slice_of_its_whole_component(mode):
    # local synthesis against the whole component (itself checked against PyWavelets)
    rec = _recording(5000)
    m = DecompositionModel(rec, TransformSpec("packet", "db4", 3, mode),
                           [Edit("region", bands=("w3.6",), start_s=0.2, stop_s=0.3, gain=0.0)])
    for key in (m.band_keys[0], m.band_keys[6], m.band_keys[7]):
        whole = m.band_component(0, key)
        for a, b in ((0, 50), (1000, 2600), (4900, 5000), (0, 5000)):
            np.testing.assert_allclose(m.band_component_span(0, key, a, b), whole[a:b],
                                       atol=1e-12)
