"""A packet band's envelope is made from its node's coefficients a chunk at a time,
checked against PyWavelets' own reconstruction of that node alone."""

import numpy as np
import pytest
import pywt

from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.views.band_envelopes import unit_envelope


def _node_alone(x, path, wavelet, mode):
    # reference: pywt.WaveletPacket with every node but one empty, reconstructed
    full = pywt.WaveletPacket(x, wavelet, mode, maxlevel=len(path))
    alone = pywt.WaveletPacket(None, wavelet, mode, maxlevel=len(path))
    alone[path] = full[path].data
    return alone.reconstruct(update=False)[:x.shape[0]]


@pytest.mark.parametrize("mode", ["symmetric", "zero", "smooth", "periodic", "periodization"])
@pytest.mark.parametrize("wavelet", ["db4", "sym8"])
def test_packet_envelope_is_the_envelope_of_the_node_alone(wavelet, mode):
    # several chunks of samples and a short last block; periodization (whole components)
    # on a length that halves at every level, as PyWavelets' packets then agree at the end
    n, block, depth = (600_000 if mode == "periodization" else 600_001), 64, 4
    x = np.random.default_rng(5).standard_normal(n)
    x[n // 3] += 30.0                          # an impulse: its peak must reach the envelope
    spec = TransformSpec("packet", wavelet, depth, mode).resolved(n)
    coeffs = tf.forward(x, spec)
    starts = np.arange(0, n, block)
    for key in tf.table_keys(spec)[::5]:
        env = unit_envelope(coeffs, key, spec, n, block)
        y = _node_alone(x, key.path, wavelet, mode)
        top = float(np.max(np.abs(y)))
        # local synthesis adds the same products in another order: round-off only
        np.testing.assert_allclose(env.lo, np.minimum.reduceat(y, starts), rtol=0,
                                   atol=1e-12 * top)
        np.testing.assert_allclose(env.hi, np.maximum.reduceat(y, starts), rtol=0,
                                   atol=1e-12 * top)


def test_a_packet_envelope_stops_between_chunks():
    class Stop(Exception):
        pass

    calls = []

    def check():
        calls.append(1)
        if len(calls) > 2:
            raise Stop()

    n = 2_000_000
    x = np.random.default_rng(2).standard_normal(n)
    spec = TransformSpec("packet", "db4", 3, "symmetric").resolved(n)
    coeffs = tf.forward(x, spec)
    with pytest.raises(Stop):
        unit_envelope(coeffs, tf.table_keys(spec)[2], spec, n, 64, check)
