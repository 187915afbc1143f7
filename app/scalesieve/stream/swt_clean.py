"""The SWT's passes in blocks over the model's padded recording read as a circle (stream.swt)."""

from __future__ import annotations

from scalesieve.core import transforms as tf
from scalesieve.stream.recipe_plan import _Plan
from scalesieve.stream.sources import READ_FRAMES, _Source

def _circle(src: _Source, spec: tf.TransformSpec):
    """The model's padded recording as a circle, its padding read once (stream.swt)."""
    from scalesieve.stream.swt import Circle

    key = (spec.level, spec.mode)
    if getattr(src, "circle_key", None) != key:
        src.circle, src.circle_key = Circle(src, spec.level, spec.mode), key
    return src.circle


def _swt_feed(src: _Source, spec: tf.TransformSpec, depth: int, lo: int, hi: int,
              puts: list, each_block=None) -> None:
    """Coefficients ``lo .. hi`` (unwrapped) of the SWT to ``depth`` of every channel.

    ``puts[k](index, k0, r, values)`` gets them in blocks cut where the circle
    closes (``k0`` unwrapped, ``r`` its place on the circle);
    ``each_block(t, samples, fraction)`` sees each block of the circle fed.
    """
    from scalesieve.stream.swt import SwtForward

    circle = _circle(src, spec)
    N = circle.N

    def cut(put):
        def split(index, k0, values):
            a = 0
            while a < values.shape[0]:
                r = (k0 + a) % N
                b = min(values.shape[0], a + N - r)
                put(index, k0 + a, r, values[a:b])
                a = b
        return split

    streams = [SwtForward(spec.wavelet, depth, lo, hi, cut(puts[k]))
               for k in range(src.channels)]
    t0, t1 = streams[0].samples
    t = t0
    for block in circle.blocks(t0, t1, READ_FRAMES):
        for k, f in enumerate(streams):
            f.feed(block[:, k])
        if each_block is not None:
            each_block(t, block, (t + block.shape[0] - t0) / max(1, t1 - t0))
        t += block.shape[0]


def _swt_pass(src, spec, depth, gatherers, report, passes) -> None:
    """A first pass of the SWT: every coefficient of the circle once, to the gatherers."""
    def put_key(g):
        def put(index, k0, r, values):
            if index == 0 and depth != spec.level:
                return                       # the approximation at ``depth``: not a band
            g("a" if index == 0 else depth - index + 1, r, values)
        return put

    N = tf.swt_padded_length(src.frames, spec.level)
    _swt_feed(src, spec, depth, 0, N, [put_key(g) for g in gatherers],
              lambda t, b, f: report(passes, f * src.frames,
                                     "gathering the noise and band figures"))


def _clean_swt(src: _Source, spec: tf.TransformSpec, plan: _Plan, join, report,
               passes: int) -> None:
    """The cleaning pass of the SWT: circle -> coefficients -> recipe -> iswt -> join."""
    from scalesieve.stream.swt import SwtInverse, band_key, inverse_reach

    n, level = src.frames, spec.level
    d0, d1 = inverse_reach(spec.wavelet, level)
    inverses, puts = [], []
    for k in range(src.channels):
        inv = SwtInverse(spec.wavelet, level, lambda s0, seg, k=k: join.put(k, s0, seg), 0, n)
        bands = plan.bands[k]

        def put(index, k0, r, values, inv=inv, bands=bands):
            inv.put(index, k0, bands[band_key(index, level)].edited(values, r))
        inverses.append(inv)
        puts.append(put)

    def each_block(t, block, fraction):
        a, b = max(t, 0), min(t + block.shape[0], n)
        if b > a:                            # the recording itself, once, in order
            join.add_input(block[a - t:b - t])
        for inv in inverses:
            inv.pump()
        join.flush()
        report(passes, fraction * n, "cleaning")
    # the first outputs read the circle's last coefficients, the last ones its first
    _swt_feed(src, spec, level, -d1, n - d0, puts, each_block)
