"""The scan for unusable samples against its definition, written with NumPy directly.

``first_unusable`` skips a block whose least and greatest values are in range;
the reference is the plain reading of its contract: the first (row, column),
in row-major order, where ``not |x| <= 1e100`` (NaN, ±inf, or too large).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fuzz_budget import examples
from scalesieve.io.input_check import MAX_ABS_SAMPLE, first_unusable


def reference(values: np.ndarray):
    limit = min(MAX_ABS_SAMPLE, float(np.finfo(values.dtype).max))
    bad = np.argwhere(~(np.abs(values) <= limit))
    return None if bad.size == 0 else (int(bad[0][0]), int(bad[0][1]))


BAD = [np.nan, np.inf, -np.inf, 2e100, -2e100, 1e300]


@pytest.mark.filterwarnings("ignore:overflow encountered in cast")   # 2e100 in float32: inf
@settings(max_examples=examples(200), deadline=None)
@given(n=st.integers(1, 3000), channels=st.integers(1, 3), block=st.sampled_from([7, 64, 1 << 16]),
       dtype=st.sampled_from([np.float64, np.float32]),
       spots=st.lists(st.tuples(st.floats(0, 1, exclude_max=True), st.integers(0, 2),
                                st.sampled_from(BAD)), max_size=3))
def test_the_first_unusable_sample_is_the_one_the_definition_names(n, channels, block, dtype,
                                                                    spots):
    x = np.random.default_rng(n).standard_normal((n, channels)).astype(dtype)
    for where, c, v in spots:
        x[int(where * n), c % channels] = v
    assert first_unusable(x, block) == reference(x)


@pytest.mark.parametrize("value", [1e100, -1e100, 0.0, -0.0])
def test_values_at_the_limit_are_usable(value):
    x = np.zeros((10, 2))
    x[3, 1] = value
    assert first_unusable(x) is None and reference(x) is None
