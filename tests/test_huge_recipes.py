"""The largest recipes cost what their edits cost: linear in the number of edits.

Counted, not timed (timings live in tests/perf/bench_huge_recipe.py): the
number of ``Edit.__hash__`` calls while a model applies N threshold edits,
and the thresholds found along a long chain, checked against
``core.edits.apply_chain``, which finds each threshold directly from the
band as it stands (the definition the cached walk must reproduce).
"""

from __future__ import annotations

import numpy as np
import pytest

from scalesieve.core import edits as ed
from scalesieve.core.recording import Recording
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit


def _hashes_to_build(n_edits: int, monkeypatch) -> int:
    # Bands longer than one block take the block-by-block path of a long recording.
    monkeypatch.setattr(tf, "BLOCK", 512)
    rng = np.random.default_rng(3)
    x = rng.standard_normal(4096)
    rec = Recording(x[:, None], 1000.0, ["ch0"], source="")
    chain = tuple(Edit("threshold", levels="details", rule="universal", shape="soft",
                       scale=1.0 + 1e-3 * k) for k in range(n_edits))
    calls = [0]
    real = Edit.__hash__

    def counting(self):
        calls[0] += 1
        return real(self)

    monkeypatch.setattr(Edit, "__hash__", counting)
    DecompositionModel(rec, TransformSpec("dwt", "db4", 4, "symmetric"), chain)
    monkeypatch.setattr(Edit, "__hash__", real)
    return calls[0]


def test_edit_hashing_grows_linearly_with_the_recipe(monkeypatch):
    small = _hashes_to_build(100, monkeypatch)
    large = _hashes_to_build(800, monkeypatch)
    # 8 x the edits: a linear cost is ~8 x the hashes; the quadratic one was ~64 x.
    assert large <= 12 * small, (small, large)


def test_the_threshold_memory_holds_one_step_per_edit():
    c = np.random.default_rng(5).standard_normal(512)
    ctx = ed.BandContext(key=1, n_samples=1024, rate=100.0,
                         positions=lambda: np.arange(512) * 2.0,
                         sigma_finest=lambda: 1.0, sigma_level=lambda: 1.0)
    chain = tuple(Edit("threshold", levels=(1,), rule="universal", scale=1 + k / 1000)
                  for k in range(300))
    memo = ed.ThresholdMemo()
    first = ed.chain_thresholds(c, chain, ctx, memo)
    assert memo.nodes == 300
    assert ed.chain_thresholds(c, chain, ctx, memo) == first and memo.nodes == 300
    # a changed last edit adds one step, not a copy of the chain
    ed.chain_thresholds(c, chain[:-1] + (Edit("threshold", levels=(1,), rule="manual",
                                               value=0.1),), ctx, memo)
    assert memo.nodes == 301
    memo.keep_only(chain)
    assert memo.nodes == 300 and ed.chain_thresholds(c, chain, ctx, memo) == first


@pytest.mark.parametrize("rule", ["bayes", "sure"])
def test_band_dependent_thresholds_along_a_long_chain_match_apply_chain(rule):
    # Reference: apply_chain, which computes every threshold from the band as it stands.
    rng = np.random.default_rng(11)
    c = rng.standard_normal(600) * np.linspace(0.2, 3.0, 600)
    ctx = ed.BandContext(key=1, n_samples=1200, rate=100.0,
                         positions=lambda: np.arange(600) * 2.0,
                         sigma_finest=lambda: 0.8, sigma_level=lambda: 0.9)
    chain = []
    for k in range(40):
        chain.append(Edit("threshold", levels=(1,), rule=rule, shape="garrote" if k % 2
                          else "soft", scale=0.2))
        if k % 7 == 3:
            chain.append(Edit("region", levels=(1,), start_s=1.0 + k / 50, stop_s=3.0,
                              gain=0.9))
        if k % 5 == 1:
            chain.append(Edit("gain", levels=(1,), gain=1.01))
    chain = tuple(chain)
    lams = ed.chain_thresholds(c, chain, ctx, ed.ThresholdMemo())
    got = ed.state_values(c, ed.chain_values(c, chain, ctx, lams))
    want = ed.state_values(c, ed.apply_chain(c, chain, ctx))
    assert np.array_equal(got, want)
