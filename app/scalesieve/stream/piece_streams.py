"""The transform of one time piece of a recording, in every mode: what a worker runs.

A piece makes output samples ``o0 .. o1`` of the one-process clean in blocks
(``stream.pipeline``) from the samples those outputs read, and nothing else:

- the DWT in the modes that extend the signal from its edge: a stretch of the
  cascade (``dwt.stretch``);
- the DWT in ``periodic`` and ``periodization``: each level runs, as the
  one-process run does (``stream.wrap``), a local-mode step over its wrapped
  input, here only over the stretch the piece reads; where that stretch
  passes a level's end, the wrap comes from that level's head and tail,
  worked out from the recording's first and last samples (read once by each
  worker).  The inverse of ``periodization`` wraps each level's bands the same
  way, from the edited bands' edges;
- the SWT: the stretch of the model's padded circle the piece's coefficients
  read (the first piece reads the recording's end, the last one its start).

Each step computes the same sums over the same samples as the one-process
run, so the piece's samples are that run's.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pywt

from scalesieve.core import transforms as tf
from scalesieve.stream.dwt import ForwardStream, InverseStream, stretch
from scalesieve.stream.wrap import WRAP_MODES, _Known, _phase, approx_edges, read_edges


def _parts(lo: int, hi: int, m: int) -> tuple:
    """Indices lo .. hi of a wrapped sequence of m: (before 0, within, from m on)."""
    before = (lo, min(0, hi)) if lo < 0 else None
    within = (max(0, lo), min(m, hi))
    after = (max(m, lo), hi) if hi > m else None
    return before, within, after


class _Clip:
    """Hands on only indices ``lo .. hi`` of blocks that come in order from anywhere before."""

    def __init__(self, lo: int, hi: int, give: Callable):
        self.next, self.hi, self.give = lo, hi, give

    def take(self, k0: int, values: np.ndarray) -> None:
        lo, hi = max(k0, self.next), min(k0 + values.shape[0], self.hi)
        if hi > lo:
            if lo != self.next:
                raise ValueError(f"block at {lo}, expected {self.next}")
            self.give(lo, values[lo - k0:hi - k0])
            self.next = hi
            if hi == self.hi:
                self._reached()

    def _reached(self) -> None:
        """The last index handed on."""


class _Feed(_Clip):
    """Hands a stage the indices lo .. hi of its wrapped input: the wrap from ``known``,
    the rest as it comes (``take``), clipped to what the stage reads."""

    def __init__(self, known: _Known, lo: int, hi: int, give: Callable):
        self.known = known
        before, self.within, self.after = _parts(lo, hi, known.m)
        super().__init__(*self.within, give)
        if before is not None:
            give(before[0], known.take(*before))
        if self.within[1] <= self.within[0]:
            self._reached()

    def _reached(self) -> None:
        if self.after is not None:
            self.give(self.after[0], self.known.take(*self.after))
            self.after = None


class _StretchLevel:
    """Coefficients ``f .. l`` of one wrapped level, from the stretch of its input they read."""

    def __init__(self, known: _Known, w: pywt.Wavelet, N: int, f: int, l: int,
                 detail: Callable, approx: Callable | None):
        L, r = w.dec_len, _phase(known.mode, w.dec_len)
        self.off = off = (L - 2) // 2
        before, after = L - 1 - r, 2 * N - known.Np + r - 1
        M = before + known.Np + after
        t0, t1 = f + off, l + off
        v0, v1 = 2 * f, min(M, 2 * t1)         # what local coefficients t0 .. t1 read
        one = tf.TransformSpec(kind="dwt", wavelet=w.name, level=1, mode="zero")
        self.detail, self.approx = detail, approx
        self.step = ForwardStream(M, one, self._put, first=[v0, t0], last=[v1, t1])
        self.feed = _Feed(known, v0 - before, v1 - before, lambda i, v: self.step.feed(v))

    def _put(self, key, k0: int, values: np.ndarray) -> None:
        if key == "a":
            if self.approx is not None:
                self.approx(k0 - self.off, values)
        else:
            self.detail(k0 - self.off, values)

    def reads(self) -> tuple[int, int]:
        return self.feed.within


def wrap_reach(n: int, spec: tf.TransformSpec, need: dict) -> dict:
    """Coefficients ``f .. l`` of every level a wrapped forward stretch works out.

    ``need[j]``: the detail coefficients the inverse reads at level j, and
    ``need["a"]`` the approximation's; level j also makes what level j + 1
    reads of its approximation.  Returns ``{j: (f, l)}`` and ``0``: the
    samples read.
    """
    w = pywt.Wavelet(spec.wavelet)
    L, r = w.dec_len, _phase(spec.mode, w.dec_len)
    sizes = [n]
    for _ in range(spec.level):
        sizes.append(pywt.dwt_coeff_len(sizes[-1], L, spec.mode))
    out = {}
    lo, hi = need["a"]
    for j in range(spec.level, 0, -1):
        lo, hi = min(lo, need[j][0]), max(hi, need[j][1])
        out[j] = (lo, hi)
        lo, hi = max(0, 2 * lo + r + 1 - L), min(sizes[j - 1], 2 * hi + r - 1)
    out[0] = (lo, hi)
    return out


class WrapStretchForward:
    """Coefficients ``reach[j]`` of every level of ``pywt.wavedec`` in a wrapping mode.

    Fed samples ``reach[0]`` of the recording in order; ``head`` and ``tail``
    are its first and last ``wrap.edge_samples`` samples.  ``put`` as
    ``ForwardStream``'s (coefficient indices of the whole transform).
    """

    def __init__(self, n: int, spec: tf.TransformSpec, put: Callable, head: np.ndarray,
                 tail: np.ndarray, reach: dict):
        from scalesieve.stream.wrap import _edges

        w = pywt.Wavelet(spec.wavelet)
        known = _Known(np.asarray(head, dtype=np.float64), np.asarray(tail, dtype=np.float64),
                       n, spec.mode)
        plan, m = [], n
        for _ in range(spec.level):
            N = pywt.dwt_coeff_len(m, w.dec_len, spec.mode)
            plan.append((known, N))
            known, m = _edges(known, w, N), N
        nxt = None
        self.levels = []
        for j in range(spec.level, 0, -1):
            known_j, N = plan[j - 1]
            if j == spec.level:
                approx = (lambda k0, v: put("a", k0, v))
            else:
                approx = nxt.feed.take
            nxt = _StretchLevel(known_j, w, N, *reach[j],
                                detail=(lambda k0, v, j=j: put(j, k0, v)), approx=approx)
            self.levels.insert(0, nxt)
        self.samples = self.levels[0].reads()

    def feed(self, k0: int, block: np.ndarray) -> None:
        self.levels[0].feed.take(k0, block)


class _StretchUp:
    """Outputs ``u0 .. u1`` of one synthesis step of periodization, from the wrapped
    stretches of its two bands they read (as ``wrap._Up`` for the whole level)."""

    def __init__(self, w: pywt.Wavelet, a: _Known, d: _Known, u0: int, u1: int,
                 out: Callable, block: int):
        L, N = w.rec_len, a.m
        p, q = L // 4, L // 2
        self.off, self.out = 2 * p - (L // 2 - 1), out
        M = N + p + q
        one = tf.TransformSpec(kind="dwt", wavelet=w.name, level=1, mode="zero")
        v0, v1 = u0 + self.off, u1 + self.off
        k0, k1 = InverseStream(2 * M - L + 2, one, None)._needs(v0, v1)[1]
        self.inv = InverseStream(2 * M - L + 2, one, self._made, start=v0, stop=v1, block=block,
                                 band_starts=[k0, k0])
        self.reads = (max(0, k0 - p), min(N, k1 - p))
        self.feeds = {key: _Feed(kn, k0 - p, k1 - p,
                                 lambda i, v, key=key: self.inv.put(key, i + p, v))
                      for key, kn in (("a", a), (1, d))}
        self.inv.pump()

    def put(self, key, k0: int, values: np.ndarray) -> None:
        self.feeds[key].take(k0, values)
        self.inv.pump()

    def _made(self, s0: int, seg: np.ndarray) -> None:
        self.out(s0 - self.off, seg)


class WrapStretchInverse:
    """Outputs ``o0 .. o1`` of ``pywt.waverec`` in periodization, as ``wrap.WrapInverse``
    (``put``, ``pump``); ``need`` says which coefficients of each band it reads."""

    def __init__(self, n: int, spec: tf.TransformSpec, out: Callable, edges: dict,
                 o0: int, o1: int):
        from scalesieve.stream.dwt import MIN_STEP

        w = pywt.Wavelet(spec.wavelet)
        J = self.level = spec.level
        lengths = tf.band_lengths(n, spec)
        N = {j: lengths[J - j + 1] for j in range(1, J + 1)}
        knowns = approx_edges(edges, n, spec)
        self.steps: dict = {}
        self.need: dict = {}
        u0, u1, nxt = o0, o1, out
        for j in range(1, J + 1):
            block = max(MIN_STEP, tf.BLOCK >> (j + 1))        # as wrap.WrapInverse's steps
            a_j = _Known(knowns[j].head, knowns[j].tail, N[j], "periodic")
            step = _StretchUp(w, a_j, edges[j], u0, u1, nxt, block)
            self.steps[j] = step
            self.need[j] = step.reads
            u0, u1 = step.reads
            nxt = (lambda s0, v, up=step: up.put("a", s0, v))
        self.need["a"] = self.steps[J].reads

    def put(self, key, k0: int, values: np.ndarray) -> None:
        if key == "a":
            self.steps[self.level].put("a", k0, values)
        else:
            self.steps[key].put(1, k0, values)

    def pump(self) -> None:
        """Outputs are made as the bands come (``put``)."""


def _edited_edges(head, tail, n, spec, bands) -> dict:
    """The edges of every band of one channel as the recipe leaves them (periodization)."""
    from scalesieve.stream.wrap import band_edges

    out = {}
    for key, kn in band_edges(head, tail, n, spec).items():
        out[key] = _Known(bands[key].edited(kn.head, 0),
                          bands[key].edited(kn.tail, kn.m - kn.tail.shape[0]), kn.m, "periodic")
    return out


def dwt_piece(src, spec: tf.TransformSpec, plan, o0: int, o1: int, emit: Callable) -> None:
    """Cleaned samples ``o0 .. o1`` of the DWT in any mode: ``emit(k, s0, samples)``."""
    n, level = src.frames, spec.level
    wrapped = spec.mode in WRAP_MODES
    if wrapped:
        head, tail = read_edges(src, spec)
    else:
        first, last = stretch(n, spec, o0, o1)
        starts = [first[level]] + [first[level - i + 1] for i in range(1, level + 1)]
        span = (first[0], last[0])
    forwards, inverses = [], []
    for k in range(src.channels):
        bands = plan.bands[k]
        out = (lambda s0, seg, k=k: emit(k, s0, seg))
        if spec.mode == "periodization":
            inv = WrapStretchInverse(n, spec, out, _edited_edges(head[:, k], tail[:, k], n,
                                                                 spec, bands), o0, o1)
            reach = wrap_reach(n, spec, inv.need)
        elif wrapped:       # periodic: the inverse is the one of the modes that do not wrap
            needs = InverseStream(n, spec, None)._needs(o0, o1)
            reach = wrap_reach(n, spec, {key: needs[tf.band_index(key, level)]
                                         for key in ["a", *range(1, level + 1)]})
            starts = [reach[level][0]] + [reach[level - i + 1][0] for i in range(1, level + 1)]
            inv = InverseStream(n, spec, out, start=o0, stop=o1, band_starts=starts)
        else:
            inv = InverseStream(n, spec, out, start=o0, stop=o1, band_starts=starts)

        def put(key, k0, c, inv=inv, bands=bands):
            inv.put(key, k0, bands[key].edited(c, k0))
        if wrapped:
            fwd = WrapStretchForward(n, spec, put, head[:, k], tail[:, k], reach)
            span = fwd.samples
        else:
            fwd = ForwardStream(n, spec, put, first=first, last=last)
        forwards.append(fwd)
        inverses.append(inv)
    at = span[0]
    for block in src.blocks(start=span[0], stop=span[1]):
        for k in range(src.channels):
            if wrapped:
                forwards[k].feed(at, block[:, k])
            else:
                forwards[k].feed(block[:, k])
            inverses[k].pump()
        at += block.shape[0]


def swt_piece(src, spec: tf.TransformSpec, plan, o0: int, o1: int, emit: Callable) -> None:
    """Cleaned samples ``o0 .. o1`` of the SWT: the circle's stretch they read."""
    from scalesieve.stream.swt import SwtInverse, band_key, inverse_reach
    from scalesieve.stream.swt_clean import _swt_feed

    level = spec.level
    d0, d1 = inverse_reach(spec.wavelet, level)
    inverses, puts = [], []
    for k in range(src.channels):
        inv = SwtInverse(spec.wavelet, level, lambda s0, seg, k=k: emit(k, s0, seg), o0, o1)
        bands = plan.bands[k]

        def put(index, k0, r, values, inv=inv, bands=bands):
            inv.put(index, k0, bands[band_key(index, level)].edited(values, r))
        inverses.append(inv)
        puts.append(put)

    def each_block(t, block, fraction):
        for inv in inverses:
            inv.pump()
    _swt_feed(src, spec, level, o0 - d1, o1 - d0, puts, each_block)


def packet_reach(n: int, spec: tf.TransformSpec, basis, o0: int, o1: int) -> tuple:
    """``(outputs, makes, reads, lengths)`` of a packet tree's stretch for outputs ``o0 .. o1``.

    ``outputs[p]``: what the inverse tree makes (inner nodes) or reads (basis
    nodes) of node p, top-down; ``makes[q]``: the children's coefficients inner
    node q's forward stage works out (all the basis and the stages below need),
    ``reads[q]``: the stretch of node q that takes (as ``dwt.stretch`` for one level).
    """
    from scalesieve.core import packets as wp
    from scalesieve.stream.packet_tree import inner_nodes

    inner = inner_nodes(basis)
    lengths = wp.node_lengths(n, spec.wavelet, spec.mode, max(len(p) for p in basis))
    one = tf.TransformSpec("dwt", spec.wavelet, 1, spec.mode)
    L = pywt.Wavelet(spec.wavelet).dec_len
    outputs = {"": (o0, o1)}
    for q in sorted(inner, key=len):                      # parents first
        k = InverseStream(lengths[len(q)], one, None)._needs(*outputs[q])[1]
        outputs[q + "a"] = outputs[q + "d"] = k
    wanted = {p: outputs[p] for p in basis}
    makes, reads = {}, {}
    for q in sorted(inner, key=len, reverse=True):        # children first
        k0 = min(wanted[q + "a"][0], wanted[q + "d"][0])
        k1 = max(wanted[q + "a"][1], wanted[q + "d"][1])
        m, N = lengths[len(q)], lengths[len(q) + 1]
        lo = max(0, 2 * k0 - L + 2)
        hi = m if k1 >= N else min(m, 2 * k1)
        makes[q], reads[q] = (k0, k1), (lo - lo % 2, hi)
        wanted[q] = reads[q]
    return outputs, makes, reads, lengths


class PacketStretch:
    """Outputs ``o0 .. o1`` of the packet tree's clean, from the stretch of samples they read.

    Every inner node is a one-level forward stage over the stretch of the node
    its children's coefficients read, and a one-level inverse stage making the
    stretch of the node its parent reads (as ``stream.packet_tree``'s stages for
    the whole recording); ``edit(path, k0, values)`` edits a basis node's blocks.
    """

    MIN_BLOCK = 1024          # as packet_tree.PacketInverse's stages

    def __init__(self, n: int, spec: tf.TransformSpec, basis, o0: int, o1: int,
                 edit: Callable, out: Callable):
        from scalesieve.stream.packet_tree import inner_nodes

        outputs, makes, reads, lengths = packet_reach(n, spec, basis, o0, o1)
        one = tf.TransformSpec("dwt", spec.wavelet, 1, spec.mode)
        inner = inner_nodes(basis)
        self.inverse = {}
        for q in inner:
            r0, r1 = outputs[q + "a"]
            block = max(self.MIN_BLOCK, tf.BLOCK >> len(q))
            self.inverse[q] = InverseStream(lengths[len(q)], one,
                                            lambda s0, seg, q=q: self._up(q, s0, seg),
                                            start=outputs[q][0], stop=outputs[q][1],
                                            block=block, band_starts=[r0, r0])
        self.order = sorted(inner, key=len, reverse=True)    # children before parents
        self.out, self.edit = out, edit
        # a basis node's edited blocks go to its parent's inverse stage, clipped to what it reads
        self.to_inverse = {p: _Clip(*outputs[p], lambda k0, v, p=p: self._up(p, k0, v))
                           for p in basis}
        self.forward = {q: ForwardStream(lengths[len(q)], one,
                                         lambda key, k0, c, q=q: self._made(q, key, k0, c),
                                         first=[reads[q][0], makes[q][0]],
                                         last=[reads[q][1], makes[q][1]])
                        for q in inner}
        self.feeds = {q: _Clip(*reads[q], lambda k0, v, q=q: self.forward[q].feed(v))
                      for q in inner}
        # a best basis may be the recording itself (node "", edited as it comes)
        self.samples = reads.get("", outputs[""])

    def _made(self, parent: str, key, k0: int, values: np.ndarray) -> None:
        path = parent + ("a" if key == "a" else "d")
        if path in self.to_inverse:
            self.to_inverse[path].take(k0, self.edit(path, k0, values))
        feed = self.feeds.get(path)
        if feed is not None:
            feed.take(k0, values)

    def _up(self, path: str, k0: int, values: np.ndarray) -> None:
        if not path:
            self.out(k0, values)
            return
        self.inverse[path[:-1]].put("a" if path[-1] == "a" else 1, k0, values)

    def feed(self, k0: int, block: np.ndarray) -> None:
        """The recording's next samples (from ``samples[0]`` on)."""
        if "" in self.to_inverse:
            self.to_inverse[""].take(k0, self.edit("", k0, block))
        else:
            self.feeds[""].take(k0, block)
        for q in self.order:
            self.inverse[q].pump()


def packet_piece(src, spec: tf.TransformSpec, plan, o0: int, o1: int, emit: Callable) -> None:
    """Cleaned samples ``o0 .. o1`` of wavelet packets in a mode that extends the signal
    from its edge (``stream.packet_tree``'s modes)."""
    keys = {key.path: key for key in tf.spec_keys(spec)}
    trees = []
    for k in range(src.channels):
        bands = plan.bands[k]
        trees.append(PacketStretch(src.frames, spec, tuple(keys), o0, o1,
                                   lambda path, k0, c, bands=bands: bands[keys[path]].edited(c, k0),
                                   lambda s0, seg, k=k: emit(k, s0, seg)))
    at, stop = trees[0].samples
    for block in src.blocks(start=at, stop=stop):
        for k, t in enumerate(trees):
            t.feed(at, block[:, k])
        at += block.shape[0]


def piece(src, spec: tf.TransformSpec, plan, o0: int, o1: int, emit: Callable) -> None:
    """Cleaned samples ``o0 .. o1`` of channel k, handed to ``emit(k, s0, samples)``."""
    if spec.kind == "swt":
        swt_piece(src, spec, plan, o0, o1, emit)
    elif spec.kind == "packet":
        packet_piece(src, spec, plan, o0, o1, emit)
    else:
        dwt_piece(src, spec, plan, o0, o1, emit)

