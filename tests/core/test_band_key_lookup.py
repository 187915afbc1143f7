"""Band names to keys, cached for the window's redraws, against PyWavelets' frequency order."""

from __future__ import annotations

import numpy as np
import pytest
import pywt

from scalesieve.core import packets as wp
from scalesieve.core import transforms as tf


@pytest.mark.parametrize("depth", [1, 3, 6])
def test_every_full_basis_name_finds_pywt_freq_order_node(depth):
    # reference: pywt.WaveletPacket.get_level(depth, "freq") lists the nodes in
    # frequency order; band wJ.K is its K-th node
    tree = pywt.WaveletPacket(np.zeros(2 ** (depth + 3)), "db2", "symmetric", maxlevel=depth)
    nodes = tree.get_level(depth, "freq")
    spec = tf.TransformSpec("packet", "db2", depth, "symmetric")
    for k, node in enumerate(nodes):
        for _ in range(2):      # the second look-up comes from the cache
            key = tf.key_named(spec, f"w{depth}.{k}")
            assert key.path == node.path and key.position == k


def test_a_basis_given_as_a_list_is_looked_up_without_the_cache():
    # a spec holding a list cannot be hashed; the look-up still answers, and a wrong
    # name still names the bands
    spec = tf.TransformSpec("packet", "db2", 2, "symmetric", basis=["aa", "ad", "d"])
    assert tf.key_named(spec, "w1.1").path == "d"
    with pytest.raises(ValueError, match="w2.0"):
        tf.key_named(spec, "w3.0")


def test_the_keys_list_is_the_callers_own():
    # the cache keeps a tuple; each caller gets a list it may change
    first = wp.keys(wp.full_basis(2))
    first.pop()
    assert len(wp.keys(wp.full_basis(2))) == 4
    assert wp.full_basis(2) == tuple(pywt.WaveletPacket(np.zeros(16), "haar", maxlevel=2)
                                     .get_level(2, "freq")[k].path for k in range(4))
