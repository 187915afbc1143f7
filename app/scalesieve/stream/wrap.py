"""The DWT in the boundary modes that wrap (``periodic``, ``periodization``), in blocks.

In these modes a level extends its input past the end with its start and
before the start with its end, and each level wraps its own input (whose
length is not half the one above in ``periodic`` mode), so the wrap of a
coarse level is no stretch of the recording.  But a level's first and last
coefficients need only the first and last samples of its input: the
recording's head and tail are read once, the head and tail of every level
worked out from them (``_edges``), and each level then runs as a plain
local-mode cascade step (``ForwardStream``, mode ``zero``) over its input
with the wrap put in front of it and after it.

Coefficient o of PyWavelets' DWT in these modes is
``sum_i h[i] * xp[(2 o + r - i) mod Np]`` with ``r = 1`` (periodic; Np = m)
or ``r = L / 2`` (periodization; xp is the input with its last sample
repeated when m is odd, Np = m + m % 2); a local-mode DWT of the stretch
``xp[r + 1 - L ..]`` gives it as its coefficient ``o + (L - 2) / 2``.
The coefficients are ``pywt.wavedec``'s: bit for bit away from each level's
ends, within round-off at them (PyWavelets sums the wrapped taps apart).

The inverse of ``periodic`` is PyWavelets' one inverse of every mode but
periodization, so ``InverseStream`` serves it unchanged; periodization's
(``WrapInverse``) wraps each level's bands the same way, its edges worked
out before the first block from the bands' edited edges (``band_edges``).
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pywt

from scalesieve.core import transforms as tf
from scalesieve.stream.dwt import MIN_STEP, ForwardStream

WRAP_MODES = ("periodic", "periodization")


def _phase(mode: str, L: int) -> int:
    return 1 if mode == "periodic" else L // 2


def edge_samples(n: int, spec: tf.TransformSpec) -> int:
    """Samples of the recording's head (and of its tail) the wrap of every level needs."""
    L = pywt.Wavelet(spec.wavelet).dec_len
    # level j's edges need 2 x level j + 1's plus a filter length: (L + 2) 2^J covers J levels
    return min(n, (L + 2) * 2 ** (spec.level + 1))


class _Known:
    """The head and tail of one level's input (length m), indexed as the wrap reads them."""

    def __init__(self, head: np.ndarray, tail: np.ndarray, m: int, mode: str):
        self.m, self.mode = m, mode
        self.Np = m + m % 2 if mode == "periodization" else m
        self.everything = head.shape[0] + tail.shape[0] >= m
        self.head, self.tail = head, tail

    def take(self, i0: int, i1: int) -> np.ndarray:
        idx = np.arange(i0, i1) % self.Np
        if self.Np != self.m:
            idx[idx == self.m] = self.m - 1          # periodization repeats an odd input's last
        h, t = self.head.shape[0], self.tail.shape[0]
        in_head = idx < h
        in_tail = ~in_head & (idx >= self.m - t)
        if not np.all(in_head | in_tail):  # pragma: no cover - edge_samples reads enough
            raise AssertionError("the wrap reads samples between the head and the tail")
        out = np.empty(idx.shape[0], dtype=np.float64)
        out[in_head] = self.head[idx[in_head]]
        out[in_tail] = self.tail[idx[in_tail] - (self.m - t)]
        return out


def _edges(known: _Known, w: pywt.Wavelet, N: int, detail: bool = False) -> _Known:
    """The head and tail of the level's approximation (or detail; N coefficients)."""
    L, r = w.dec_len, _phase(known.mode, w.dec_len)
    off = (L - 2) // 2

    def coeffs(o0: int, o1: int) -> np.ndarray:
        if o1 <= o0:
            return np.empty(0)
        y = known.take(2 * o0 + r + 1 - L, 2 * (o1 - 1) + r + 1)
        a, d = pywt.dwt(y, w, "zero")
        return (d if detail else a)[off:off + o1 - o0]

    if known.everything:
        hc = tc = N
    else:
        hc = min(N, max(0, (known.head.shape[0] - r - 1) // 2 + 1))
        lowest = known.m - known.tail.shape[0]
        tc = min(N, max(0, (2 * N + r + 1 - L - lowest) // 2))
    return _Known(coeffs(0, hc), coeffs(N - tc, N), N, known.mode if not detail else "periodic")


class _Level:
    """One level: its input, wrapped, through one local-mode step; its output handed on."""

    def __init__(self, known: _Known, w: pywt.Wavelet, N: int, detail: Callable,
                 approx: Callable | None):
        L, r = w.dec_len, _phase(known.mode, w.dec_len)
        self.known, self.m, self.N = known, known.m, N
        self.off = (L - 2) // 2
        before, self.after = L - 1 - r, 2 * N - known.Np + r - 1
        spec = tf.TransformSpec(kind="dwt", wavelet=w.name, level=1, mode="zero")
        self.detail, self.approx = detail, approx
        self.step = ForwardStream(before + known.Np + self.after, spec, self._put)
        self.taken = 0
        self.step.feed(known.take(-before, 0))

    def _put(self, key, k0: int, values: np.ndarray) -> None:
        lo, hi = max(k0, self.off), min(k0 + values.shape[0], self.off + self.N)
        if hi <= lo:
            return
        part = values[lo - k0:hi - k0]
        if key == "a":
            if self.approx is not None:
                self.approx(lo - self.off, part)
        else:
            self.detail(lo - self.off, part)

    def take(self, block: np.ndarray) -> None:
        self.step.feed(block)
        self.taken += block.shape[0]
        if self.taken == self.m:
            self.step.feed(self.known.take(self.m, self.known.Np + self.after))

    feed = take          # as ForwardStream, so a packet tree feeds either alike


class WrapForward:
    """``pywt.wavedec`` in a wrapping mode of ``n`` samples given in blocks.

    As ``ForwardStream`` (same ``put``, ``depth``, ``feed`` and ``fed``), given
    besides the recording's first and last ``edge_samples(n, spec)`` samples.
    """

    def __init__(self, n: int, spec: tf.TransformSpec, put: Callable, head: np.ndarray,
                 tail: np.ndarray, depth: int | None = None):
        if spec.kind != "dwt" or spec.mode not in WRAP_MODES:
            raise ValueError(f"the {spec.kind} in mode {spec.mode} does not wrap")
        w = pywt.Wavelet(spec.wavelet)
        depth = spec.level if depth is None else depth
        self.n = n
        known = _Known(np.asarray(head, dtype=np.float64), np.asarray(tail, dtype=np.float64),
                       n, spec.mode)
        self.levels: list[_Level] = []
        m = n
        plan = []
        for _ in range(depth):
            N = pywt.dwt_coeff_len(m, w.dec_len, spec.mode)
            plan.append((known, N))
            known = _edges(known, w, N)
            m = N
        # built coarse to fine, so each level's approximation has its next level to go to
        nxt = None
        for j in range(depth, 0, -1):
            known_j, N = plan[j - 1]
            if j == depth:
                approx = (lambda k0, v: put("a", k0, v)) if depth == spec.level else None
            else:
                approx = (lambda k0, v, lv=nxt: lv.take(v))
            detail = (lambda k0, v, j=j: put(j, k0, v))
            nxt = _Level(known_j, w, N, detail, approx)
            self.levels.insert(0, nxt)
        self.fed = 0

    def feed(self, block: np.ndarray) -> None:
        """Push the next samples; the last block completes every level."""
        if self.fed + block.shape[0] > self.n:
            raise ValueError(f"fed more than the {self.n} samples announced")
        self.fed += block.shape[0]
        self.levels[0].take(block)


def read_edges(src, spec: tf.TransformSpec) -> tuple[np.ndarray, np.ndarray]:
    """The recording's head and tail, ``(frames, channels)`` each, read once per spec."""
    key = (spec.wavelet, spec.level)
    if getattr(src, "edges_key", None) != key:
        n = src.frames
        r = edge_samples(n, spec)
        r = n if 2 * r >= n else r
        head = np.concatenate(list(src.blocks(stop=r)) or [np.empty((0, src.channels))])
        tail = head if 2 * r >= n else np.concatenate(list(src.blocks(start=n - r)))
        src.edges, src.edges_key = (head, tail), key
    return src.edges


def forward_stream(src, spec: tf.TransformSpec, put: Callable, k: int,
                   depth: int | None = None):
    """The forward DWT in blocks of channel ``k`` of ``src``, in any mode."""
    if spec.mode in WRAP_MODES:
        head, tail = read_edges(src, spec)
        return WrapForward(src.frames, spec, put, head[:, k], tail[:, k], depth)
    return ForwardStream(src.frames, spec, put, depth=depth)


# --------------------------------------------------------------------------
# the inverse of periodization: each level's bands wrapped, through a valid
# (mode-free) synthesis step; a wrap of p = L // 4 coefficients in front makes
# output ``off = 2 p - (L / 2 - 1)`` of that step periodization's output 0


def band_edges(head: np.ndarray, tail: np.ndarray, n: int, spec: tf.TransformSpec) -> dict:
    """The head and tail of every band (``"a"``, 1 .. J) the recording's edges give."""
    w = pywt.Wavelet(spec.wavelet)
    known, m, out = _Known(np.asarray(head, float), np.asarray(tail, float), n, spec.mode), n, {}
    for j in range(1, spec.level + 1):
        N = pywt.dwt_coeff_len(m, w.dec_len, spec.mode)
        out[j] = _edges(known, w, N, detail=True)
        known, m = _edges(known, w, N), N
    out["a"] = known
    return out


def _up_edges(a: _Known, d: _Known, w: pywt.Wavelet, m_out: int) -> _Known:
    """The head and tail of one synthesis step's first ``m_out`` outputs."""
    L, N = w.rec_len, a.m
    p = L // 4
    off = 2 * p - (L // 2 - 1)

    def part(lo, hi):
        if hi <= lo:
            return np.empty(0)
        e0, e1 = lo + off, hi + off
        k0, k1 = e0 // 2, -(-(e1 + L - 2) // 2)
        seg = pywt.idwt(a.take(k0 - p, k1 - p), d.take(k0 - p, k1 - p), w, "zero")
        return seg[e0 - 2 * k0:e1 - 2 * k0]

    if a.everything and d.everything:
        hh = tt = m_out
    else:
        hk = min(a.head.shape[0], d.head.shape[0])
        tk = min(a.tail.shape[0], d.tail.shape[0])
        hh = min(m_out, max(0, 2 * (hk + p) - off - L + 2))
        tt = min(m_out, max(0, m_out + off - 2 * (N - tk + p)))
    return _Known(part(0, hh), part(m_out - tt, m_out), m_out, "periodic")


def approx_edges(edges: dict, n: int, spec: tf.TransformSpec) -> dict:
    """``{j: head and tail of the approximation synthesis step j starts from}``, from the
    edges of the bands as they are handed in (``band_edges``, edited)."""
    w = pywt.Wavelet(spec.wavelet)
    lengths = tf.band_lengths(n, spec)                   # a_J, d_J .. d_1
    J = spec.level
    a, knowns = edges["a"], {}
    for j in range(J, 0, -1):
        knowns[j] = a
        m_out = n if j == 1 else lengths[J - j + 2]
        a = _up_edges(_Known(a.head, a.tail, lengths[J - j + 1], "periodic"), edges[j], w, m_out)
    return knowns


class _Up:
    """One synthesis step of periodization, its bands handed in as they come."""

    def __init__(self, w: pywt.Wavelet, a: _Known, d: _Known, m_out: int, out: Callable,
                 block: int = tf.BLOCK):
        from scalesieve.stream.dwt import InverseStream

        L, self.N = w.rec_len, a.m
        self.p, self.q = L // 4, L // 2
        self.off, self.m_out, self.out = 2 * self.p - (L // 2 - 1), m_out, out
        M = self.N + self.p + self.q
        spec = tf.TransformSpec(kind="dwt", wavelet=w.name, level=1, mode="zero")
        self.inv = InverseStream(2 * M - L + 2, spec, self._made, stop=self.off + m_out,
                                 block=block)
        self.known = {"a": a, 1: d}
        self.had = {"a": 0, 1: 0}
        for key, k in self.known.items():
            self.inv.put(key, 0, k.take(-self.p, 0))

    def put(self, key, values: np.ndarray) -> None:
        self.inv.put(key, self.p + self.had[key], values)
        self.had[key] += values.shape[0]
        if self.had[key] == self.N:
            self.inv.put(key, self.p + self.N, self.known[key].take(self.N, self.N + self.q))
        self.inv.pump()

    def _made(self, s0: int, seg: np.ndarray) -> None:
        lo = max(s0, self.off)
        if s0 + seg.shape[0] > lo:
            self.out(lo - self.off, seg[lo - s0:])


class WrapInverse:
    """``pywt.waverec`` in periodization mode, as ``InverseStream`` (``put``, ``pump``).

    ``edges`` are ``band_edges`` of the bands as they will be handed in (edited).
    """

    def __init__(self, n: int, spec: tf.TransformSpec, out: Callable, edges: dict):
        w = pywt.Wavelet(spec.wavelet)
        J = spec.level
        lengths = tf.band_lengths(n, spec)               # a_J, d_J .. d_1
        N = {j: lengths[J - j + 1] for j in range(1, J + 1)}
        self.steps: dict = {}
        knowns = approx_edges(edges, n, spec)
        nxt = out
        for j in range(1, J + 1):
            m_out = n if j == 1 else N[j - 1]
            a_j = knowns[j]
            # step j makes level j - 1's approximation: B outputs read B / 2 of its
            # coefficients, B 2^(j - 1) samples of input, so its blocks shrink with j
            # (one of tf.BLOCK at a coarse level would wait for most of the recording);
            # each step lags by its block, so the output lags by about J tf.BLOCK / 4
            block = max(MIN_STEP, tf.BLOCK >> (j + 1))
            step = _Up(w, _Known(a_j.head, a_j.tail, N[j], "periodic"), edges[j], m_out,
                       nxt if j == 1 else (lambda s0, v, up=self.steps[j - 1]: up.put("a", v)),
                       block)
            self.steps[j] = step
            nxt = None
        self.level = J

    def put(self, key, k0: int, values: np.ndarray) -> None:
        if key == "a":
            self.steps[self.level].put("a", values)
        else:
            self.steps[key].put(1, values)

    def pump(self) -> None:
        """Outputs are made as the bands come (``put``)."""


def inverse_stream(src, spec: tf.TransformSpec, out: Callable, k: int, bands: dict):
    """The inverse DWT in blocks of channel ``k``, in any mode; ``bands`` edit what comes."""
    from scalesieve.stream.dwt import InverseStream

    if spec.mode != "periodization":
        return InverseStream(src.frames, spec, out)
    head, tail = read_edges(src, spec)
    edges = {}
    for key, kn in band_edges(head[:, k], tail[:, k], src.frames, spec).items():
        edges[key] = _Known(bands[key].edited(kn.head, 0),
                            bands[key].edited(kn.tail, kn.m - kn.tail.shape[0]), kn.m, "periodic")
    return WrapInverse(src.frames, spec, out, edges)


class WrapComponent:
    """One band's time-domain component in periodization, as ``InverseStream(only=key)``.

    The other bands are zeros: they are handed to a ``WrapInverse`` (whose
    edges are zero for them) as the band itself comes, in proportion to how
    far it has got, so every synthesis step keeps going and holds little.
    """

    def __init__(self, n: int, spec: tf.TransformSpec, out: Callable, edges: dict, key):
        self.key, self.level = key, spec.level
        zeroed = {b: kn if b == key else
                  _Known(np.zeros_like(kn.head), np.zeros_like(kn.tail), kn.m, "periodic")
                  for b, kn in edges.items()}
        self.inv = WrapInverse(n, spec, out, zeroed)
        lengths = tf.band_lengths(n, spec)              # a_J, d_J .. d_1
        self.length = {b: lengths[tf.band_index(b, spec.level)] for b in edges}
        self.had = dict.fromkeys(edges, 0)
        self.slack = 2 * pywt.Wavelet(spec.wavelet).rec_len

    def put(self, key, k0: int, values: np.ndarray) -> None:
        if key != self.key:
            return
        self.inv.put(key, k0, values)
        self.had[key] = k0 + values.shape[0]
        f = self.had[key] / self.length[key]
        for b, m in self.length.items():
            if b == key:
                continue
            want = m if f >= 1.0 else min(m, int(np.ceil(f * m)) + self.slack)
            if want > self.had[b]:
                self.inv.put(b, self.had[b], np.zeros(want - self.had[b]))
                self.had[b] = want

    def pump(self) -> None:
        """Outputs are made as the bands come (``put``)."""


def component_stream(src, spec: tf.TransformSpec, out: Callable, k: int, key):
    """Band ``key``'s component of channel ``k`` in blocks, in any mode of the DWT."""
    from scalesieve.stream.dwt import InverseStream

    if spec.mode != "periodization":
        return InverseStream(src.frames, spec, out, only=key)
    head, tail = read_edges(src, spec)
    return WrapComponent(src.frames, spec, out,
                         band_edges(head[:, k], tail[:, k], src.frames, spec), key)
