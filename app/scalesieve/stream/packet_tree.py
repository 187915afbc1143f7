"""The wavelet packet tree of a recording handed in block by block.

Every inner node of the tree is a one-level DWT stage (``stream.dwt.ForwardStream``
with level 1) fed its parent's coefficients block by block as the parent's
stage makes them: node ``p + "a"`` is the approximation and ``p + "d"`` the
detail of ``pywt.dwt`` of node ``p``, as ``pywt.WaveletPacket`` builds them,
bit for bit.  Only each stage's filter history is kept, so the memory follows
the tree's size, not the recording's length.

``NodeComponent`` gathers the energy and peak of one node's time-domain
component from its coefficients as they come, through the node's composite
synthesis taps (``core.packets.composite``), without making the component:
the same figures ``core.packets.component_figures`` takes from the whole
array, up to round-off.

In the modes that wrap (``periodic``, ``periodization``) the stages are
wrapped one-level steps given every node's head and tail first
(``stream.packet_wrap``), and a periodization component's ends are made
exactly from them.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Callable

import numpy as np
import pywt

from scalesieve.core import packets as wp
from scalesieve.core import transforms as tf
from scalesieve.stream.dwt import STREAM_MODES, ForwardStream
from scalesieve.stream.wrap import WRAP_MODES

#: groups made first in a block whose bound is above the largest value found so far
#: (as ``core.packets._Polyphase.peak`` does on the whole array)
_FIRST = 256


#: every boundary mode: the local ones through plain stages, the wrapping ones wrapped
PACKET_MODES = frozenset(STREAM_MODES) | frozenset(WRAP_MODES)


def can_stream(spec: tf.TransformSpec) -> bool:
    return spec.kind == "packet" and spec.mode in PACKET_MODES


class PacketTree:
    """Every node the basis needs, of ``n`` samples fed in blocks.

    Parameters
    ----------
    n : int
        Samples the recording holds.
    wavelet, mode : str
        The transform's (``mode`` one of ``PACKET_MODES``).
    inner : set of str
        Node paths to split (every proper prefix of the paths wanted).
    put : callable(path, k0, values)
        Told each block of coefficients of every node (inner ones too), in order;
        ``values`` may be reused after the call.
    edges : wrap._Known, optional
        In a wrapping mode (required there): the recording's head and tail
        (``packet_wrap.root_edges``).
    """

    def __init__(self, n: int, wavelet: str, mode: str, inner, put: Callable, edges=None):
        if mode not in PACKET_MODES:
            raise ValueError(f"packets in mode {mode} cannot run block by block")
        self.put = put
        depth = max((len(p) for p in inner), default=-1) + 1
        lengths = wp.node_lengths(n, wavelet, mode, max(depth, 0))
        one = tf.TransformSpec("dwt", wavelet, 1, mode)
        self.stages = {}
        if mode in WRAP_MODES:
            from scalesieve.stream.packet_wrap import node_edges
            from scalesieve.stream.wrap import _Level

            if edges is None:
                raise ValueError(f"packets in mode {mode} need the recording's edges")
            known = node_edges(edges, wavelet, inner)
            w = pywt.Wavelet(wavelet)
            # deepest first: a stage hands its first blocks on as it is built
            for path in sorted(inner, key=len, reverse=True):
                self.stages[path] = _Level(
                    known[path], w, lengths[len(path) + 1],
                    lambda k0, c, p=path: self._deliver(p + "d", k0, c),
                    lambda k0, c, p=path: self._deliver(p + "a", k0, c))
            return
        for path in inner:
            self.stages[path] = ForwardStream(lengths[len(path)], one,
                                              lambda key, k0, c, p=path: self._child(p, key, k0, c))

    def _child(self, parent: str, key, k0: int, values: np.ndarray) -> None:
        self._deliver(parent + ("a" if key == "a" else "d"), k0, values)

    def _deliver(self, path: str, k0: int, values: np.ndarray) -> None:
        self.put(path, k0, values)
        stage = self.stages.get(path)
        if stage is not None:
            stage.feed(values)

    def feed(self, block: np.ndarray, k0: int) -> None:
        """The next samples of the recording (node ``""``)."""
        self._deliver("", k0, block)


class PacketInverse:
    """``WaveletPacket.reconstruct`` of basis nodes handed in block by block, out in blocks.

    Every inner node is a one-level inverse stage (``stream.dwt.InverseStream``
    with level 1) that makes the node, cut to its length, from its two
    children's blocks and hands its blocks to its parent's stage; the root's
    are the output, in order.  A stage at depth d makes blocks of
    ``BLOCK / 2**d`` (at least ``MIN_BLOCK``), so every depth lags the input alike.
    """

    MIN_BLOCK = 1024

    def __init__(self, n: int, wavelet: str, mode: str, basis, out: Callable, edges=None):
        if mode not in PACKET_MODES:
            raise ValueError(f"packets in mode {mode} cannot run block by block")
        from scalesieve.stream.dwt import InverseStream

        inner = inner_nodes(basis)
        depth = max(len(p) for p in basis)
        lengths = wp.node_lengths(n, wavelet, mode, depth)
        one = tf.TransformSpec("dwt", wavelet, 1, mode)
        self.out = out
        self.stages = {}
        if mode == "periodization":
            # the periodic inverse is every other mode's; periodization's wraps (packet_wrap)
            from scalesieve.stream.packet_wrap import up_edges

            if edges is None:
                raise ValueError("packets in mode periodization need the basis nodes' edges")
            known = up_edges(edges, wavelet, lengths)
            w = pywt.Wavelet(wavelet)
        for q in inner:
            block = max(self.MIN_BLOCK, tf.BLOCK >> len(q))
            made = (lambda s0, seg, q=q: self._up(q, s0, seg))
            if mode == "periodization":
                self.stages[q] = _WrapStep(w, known[q + "a"], known[q + "d"], lengths[len(q)],
                                           made, block)
            else:
                self.stages[q] = InverseStream(lengths[len(q)], one, made, block=block)
        self.order = sorted(inner, key=len, reverse=True)     # children before parents
        self.root = "" in inner

    def _up(self, path: str, k0: int, values: np.ndarray) -> None:
        if not path:
            self.out(k0, values)
            return
        self.stages[path[:-1]].put("a" if path[-1] == "a" else 1, k0, values)

    def put(self, path: str, k0: int, values: np.ndarray) -> None:
        """The next block of coefficients of basis node ``path``."""
        self._up(path, k0, values)

    def pump(self) -> None:
        """Make every block the coefficients handed in so far allow, deepest stages first."""
        for q in self.order:
            self.stages[q].pump()


class _WrapStep:
    """One periodization synthesis step (``wrap._Up``) as an ``InverseStream`` is put to."""

    def __init__(self, w, a, d, m_out: int, out: Callable, block: int):
        from scalesieve.stream.wrap import _Up

        self.up = _Up(w, a, d, m_out, out, block)

    def put(self, key, k0: int, values: np.ndarray) -> None:
        self.up.put(key, values)            # blocks come in order; _Up counts them

    def pump(self) -> None:
        """Outputs are made as the bands come (``put``)."""


class NodeComponent:
    """Energy and peak |value| of one node's time-domain component, from its coefficients.

    With the composite taps ``g`` of the node (depth J, ``P = 2**J``) cut in
    ``T`` rows of ``P``, the uncut synthesis in groups of ``P`` samples is
    ``z_q = W_q @ G`` with ``W_q`` the window of coefficients ``q - T + 1 .. q``
    (zero outside the node), and sample ``t`` of the component is
    ``z[t - s0]`` (``core.packets._Polyphase``, non-periodic modes).  Groups
    wholly inside the recording add ``W_q (G G^T) W_q^T`` to the energy (so
    only the T x T sums of ``W^T W`` are kept); the two groups at the ends are
    made and cut.  The peak makes only the groups whose bound
    ``sum |c| max |G|`` can beat the largest value found so far: exact.

    In ``periodization`` (``edges``: the node's coefficients' head and tail,
    ``packet_wrap.node_edges``) the component's first and last samples, as
    far as ``packet_wrap.reach``, are made exactly from the edges (the wrap and
    each level's cut shape them), and the groups count only the samples between.
    """

    def __init__(self, path: str, wavelet: str, mode: str, n: int, count: int, edges=None):
        g, s0 = wp.composite(path, wavelet, mode)
        P = 2 ** len(path)
        T = -(-g.shape[0] // P)
        G = np.zeros(T * P)
        G[:g.shape[0]] = g
        self.Gr = np.ascontiguousarray(G.reshape(T, P)[::-1])   # row j weighs c[q-T+1+j]
        self.M = self.Gr @ self.Gr.T
        self.gmax = np.max(np.abs(self.Gr), axis=1)
        self.P, self.T, self.s0, self.n, self.N = P, T, s0, n, count
        self.edge = 0.0
        self.top = 0.0
        self.lo_t, self.hi_t = 0, n          # the samples the groups count
        if mode == "periodization":
            self._ends(path, wavelet, edges)
        self.q_min = (self.lo_t - s0) // P
        self.q_max = (self.hi_t - s0 - 1) // P
        self.hist = np.zeros(T - 1)
        self.k = 0
        self.S = np.zeros((T, T))

    def _ends(self, path: str, wavelet: str, edges) -> None:
        """The first and last samples of a periodization component, made from the edges."""
        from scalesieve.stream.packet_wrap import component_edges, reach

        if edges is None:
            raise ValueError("a component in mode periodization needs the node's edges")
        n = self.n
        k = component_edges(edges, path, wavelet, n)
        h = min(k.head.shape[0], n)
        t = min(k.tail.shape[0], n - h)
        if n - t > h and min(h, t) < reach(wavelet, len(path)):  # pragma: no cover
            raise AssertionError("the edges read do not reach past the wrap")
        exact = np.concatenate([k.head[:h], k.tail[k.tail.shape[0] - t:]])
        self.edge = float(np.dot(exact, exact))
        self.top = float(np.max(np.abs(exact))) if exact.size else 0.0
        self.lo_t, self.hi_t = h, max(h, n - t)

    def _valid(self, q: int) -> slice:
        lo = max(0, self.lo_t - self.s0 - self.P * q)
        hi = min(self.P, self.hi_t - self.s0 - self.P * q)
        return slice(lo, max(lo, hi))

    def add(self, values: np.ndarray) -> None:
        """The node's next coefficients, in order."""
        m = values.shape[0]
        if m == 0:
            return
        T = self.T
        ext = np.concatenate([self.hist, np.asarray(values, dtype=np.float64)])
        win = np.lib.stride_tricks.sliding_window_view(ext, T)      # row i: group k + i
        k = self.k
        a, b = max(k, self.q_min), min(k + m, self.q_max + 1)
        for q in sorted({self.q_min, self.q_max}):
            if a <= q < b:
                z = (win[q - k] @ self.Gr)[self._valid(q)]
                if z.size:
                    self.edge += float(np.einsum("i,i->", z, z))
                    self.top = max(self.top, float(np.max(np.abs(z))))
        lo, hi = max(a, self.q_min + 1), min(b, self.q_max)
        if hi > lo:
            W = win[lo - k:hi - k]
            self.S += W.T @ W
            self._peak(W, np.abs(ext[lo - k:hi - k + T - 1]))
        self.hist = ext[ext.shape[0] - (T - 1):] if T > 1 else self.hist
        self.k = k + m

    def _peak(self, W: np.ndarray, mags: np.ndarray) -> None:
        # bound of row i: sum_j |W[i, j]| gmax[j], the window's magnitudes against the taps'
        bound = np.correlate(mags, self.gmax, mode="valid")
        # a margin against round-off in the bound itself
        cand = np.flatnonzero(bound > self.top * (1 - 1e-9))
        if cand.shape[0] > _FIRST:
            first = cand[np.argpartition(bound[cand], cand.shape[0] - _FIRST)[-_FIRST:]]
            self.top = max(self.top, float(np.max(np.abs(W[first] @ self.Gr))))
            bound[first] = -1.0
            cand = np.flatnonzero(bound > self.top * (1 - 1e-9))
        for i in range(0, cand.shape[0], 4096):
            z = W[cand[i:i + 4096]] @ self.Gr
            self.top = max(self.top, float(np.max(np.abs(z))))

    def finish(self) -> tuple[float, float]:
        """(energy, peak): the groups past the node's last coefficient read zeros."""
        if self.k != self.N:
            raise ValueError(f"node had {self.k} coefficients, expected {self.N}")
        if self.q_max >= self.N:
            self.add(np.zeros(self.q_max + 1 - self.N))
        energy = float(np.sum(self.M * self.S)) + self.edge
        return max(energy, 0.0), self.top


class NodeCost:
    """The sums the best-basis costs (``core.packets.cost``) are made of, gathered in blocks.

    ``shannon`` = -sum p ln p with p = c^2 / E (E the channel's sum of
    squares, known only at the end) = -(sum c^2 ln c^2 - ln E sum c^2) / E;
    ``log-energy`` = sum ln c^2 over the non-zero c.
    """

    def __init__(self):
        self.e_log_e = 0.0      # sum c^2 ln c^2 over non-zero c
        self.e = 0.0            # sum c^2
        self.log_e = 0.0        # sum ln c^2 over non-zero c

    def add(self, values: np.ndarray) -> None:
        e = np.asarray(values, dtype=np.float64) ** 2
        nz = e[e > 0]
        if nz.size:
            ln = np.log(nz)
            self.e_log_e += float(np.einsum("i,i->", nz, ln))
            self.e += float(nz.sum())
            self.log_e += float(ln.sum())

    def cost(self, kind: str, norm2: float) -> float:
        if kind == "shannon":
            if norm2 <= 0:
                return 0.0
            return -(self.e_log_e - np.log(norm2) * self.e) / norm2
        if kind == "log-energy":
            return self.log_e
        raise ValueError(f"cost {kind!r} is not one of {', '.join(wp.COSTS)}")


def inner_nodes(paths) -> set:
    return {p[:i] for p in paths for i in range(len(p))}


def all_nodes(depth: int) -> list[str]:
    """Every node path of depth 0 .. ``depth``."""
    out, level = [""], [""]
    for _ in range(depth):
        level = [p + s for p in level for s in "ad"]
        out += level
    return out


def with_basis(spec: tf.TransformSpec, paths) -> tf.TransformSpec:
    return replace(spec, basis=wp.sort_basis(paths))
