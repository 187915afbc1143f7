"""Band envelopes made in the background, so a long recording shows at once.

The Bands pane draws each band's time component from its block envelope
(min/max per block of samples).  Making the envelopes of a 100-million-sample
recording means synthesising every band (seconds each), so the window does
not wait for them: it shows the Scale map and the Reconstruction pane first
and a thread sends each band's envelope as it is made.

The thread reads only the coefficient arrays, which the model never writes
(an edit changes gains, not coefficients; a new transform makes new arrays),
and uses pure transform functions, so it can run while the window edits the
model in the GUI thread.  It synthesises a band block by block (the local
synthesis of the coefficients reaching each block of samples, for the DWT and
wavelet packets alike): the memory
it needs follows the block, not the recording, and it can stop between blocks.
"""

from __future__ import annotations

import threading
from typing import Callable

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.views.decimate import BlockEnvelope
from scalesieve.views.thread_priority import lower_this_thread

#: the key of a job that makes a channel's band table instead of an envelope
FIGURES = "figures"
#: samples synthesised at a time (a multiple of every envelope block size)
CHUNK = 1 << 18


class Stopped(Exception):
    """The envelopes are no longer wanted."""


def coefficient_list(model, channel: int) -> list[np.ndarray]:
    """The model's coefficient arrays of one channel, in PyWavelets order."""
    level = model.level
    coeffs: list = [None] * len(model.band_keys)
    for key in model.band_keys:
        coeffs[tf.band_index(key, level)] = model.coefficients(channel, key)
    return coeffs


def unit_envelope(coeffs: list[np.ndarray], key, spec: tf.TransformSpec, n: int, block: int,
                  check: Callable[[], None] = lambda: None) -> BlockEnvelope:
    """Block envelope of one band's unit-gain time component.

    The same numbers as ``BlockEnvelope.of(tf.band_component(coeffs, key, spec, n), block)``
    up to round-off (local synthesis adds the same products in another order); a
    packet node's window is carried up its own path (``packets.local_synthesis``),
    so no full-length array is made.
    ``check()`` is called between chunks and may raise to stop.
    """
    level = spec.level
    c = coeffs[tf.band_index(key, level)]
    if spec.kind not in tf.LOCAL_KINDS or spec.mode == "periodization":
        # No local synthesis for the SWT; periodization wraps at the ends.
        check()
        return BlockEnvelope.of(tf.band_component(coeffs, key, spec, n), block)
    lengths = [a.shape[0] for a in coeffs]
    j = level if key == "a" else int(key)        # a packet node: its depth
    step = 2 ** j
    reach = tf.filter_length(spec.wavelet) * step

    def fetch(a: int, b: int) -> np.ndarray:
        check()
        # Coefficient k reaches samples within about (L - 1) * 2**j of 2**j * k
        # (the same window the model's band_component_span reads).
        k0 = max(0, (a - reach) // step - 1)
        k1 = min(c.shape[0], -(-(b + reach) // step) + 1)
        out = np.zeros(b - a)
        if k1 <= k0:
            return out
        s, seg = tf.local_synthesis(c[k0:k1], k0, key, lengths, spec, n)
        lo, hi = max(s, a), min(s + seg.shape[0], b)
        if hi > lo:
            out[lo - a:hi - a] = seg[lo - s:hi - s]
        return out

    return BlockEnvelope.of_source(fetch, n, block, chunk=max(block, CHUNK // block * block))


class EnvelopeThread(threading.Thread):
    """Makes the envelopes of the bands still missing, finest band first.

    Parameters
    ----------
    jobs : list of (channel, key, coeffs, spec, n, block), or (channel, FIGURES, fn)
        the last kind delivers ``fn()`` (the model's band table, made once for
        every thread that asks)
    deliver : callable(channel, key, envelope)
        Called from this thread for each envelope made (a queued Qt signal
        carries it to the GUI thread).
    done : callable(problem)
        Called from this thread at the end: ``problem`` is None, or one line
        when making an envelope failed (the bands left show as not drawn).
    """

    def __init__(self, jobs: list, deliver: Callable, done: Callable[[str | None], None]):
        super().__init__(name="scalesieve-band-envelopes", daemon=True)
        self._jobs = jobs
        self._deliver = deliver
        self._done = done
        self._halt = threading.Event()

    def stop(self) -> None:
        self._halt.set()

    @property
    def stopped(self) -> bool:
        return self._halt.is_set()

    def _check(self) -> None:
        if self._halt.is_set():
            raise Stopped()

    def run(self) -> None:
        lower_this_thread()
        problem = None
        try:
            for job in self._jobs:
                self._check()
                if job[1] == FIGURES:
                    rows = job[2]()
                    self._check()
                    self._deliver(job[0], FIGURES, rows)
                    continue
                channel, key, coeffs, spec, n, block = job
                env = unit_envelope(coeffs, key, spec, n, block, self._check)
                self._check()
                self._deliver(channel, key, env)
        except Stopped:
            pass
        except MemoryError:
            problem = "not enough memory to draw every band of this recording"
        except Exception as exc:  # a bug: the window goes on without the rest of the bands
            problem = f"drawing the bands failed: {type(exc).__name__}: {exc}"
        finally:
            self._jobs = []
            self._done(problem)
