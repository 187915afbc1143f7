"""Wavelet packet transform: a basis of packet nodes, bands in frequency order.

The tree is PyWavelets' ``WaveletPacket``: node ``p + "a"`` is the
approximation and ``p + "d"`` the detail of ``pywt.dwt`` of node ``p``, the
root is the signal.  A *basis* is a set of node paths whose frequency
intervals tile 0 .. fs/2 (every root-to-leaf path meets exactly one); the
coefficient list of a decomposition holds the basis nodes in frequency order
(lowest first), which is the order band keys are numbered in.

Band ``wJ.K`` is the node at depth J that is K-th in frequency order
(``WaveletPacket.get_level(J, order="freq")``); it spans K fs/2^(J+1) ..
(K+1) fs/2^(J+1).

References
----------
R. R. Coifman and M. V. Wickerhauser, "Entropy-based algorithms for best
basis selection", IEEE Trans. Inf. Theory 38(2):713-718, 1992 (additive
costs, bottom-up best-basis search).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pywt

COSTS = ("shannon", "log-energy")
BASES = ("full", "best")
#: default depth of a packet tree (64 bands): the depth the kurtosis table defaults to too
DEFAULT_DEPTH = 6


@dataclass(frozen=True)
class PacketKey:
    """One packet band: its node path and its place in the basis.

    ``index`` is K of ``wJ.K`` (frequency order within depth J);
    ``position`` is the band's place in the coefficient list.
    """

    path: str
    position: int

    @property
    def depth(self) -> int:
        return len(self.path)

    @property
    def index(self) -> int:
        return freq_index(self.path)

    @property
    def name(self) -> str:
        return f"w{self.depth}.{self.index}"

    def __str__(self) -> str:
        return self.name

    def __lt__(self, other) -> bool:
        # frequency order within one basis (views sort band keys)
        return self.position < other.position if isinstance(other, PacketKey) else NotImplemented

    def __int__(self) -> int:
        # the depth plays the part a DWT level plays for time steps: 2**depth samples
        return self.depth


def freq_index(path: str) -> int:
    """Frequency-order index of a node: the Gray-code decoding of its path bits.

    A detail step mirrors the spectrum of its parent (the highpass band is
    folded down by decimation), so the natural bits (a = 0, d = 1) are a Gray
    code of the frequency index.
    """
    k = 0
    bit = 0
    for ch in path:
        bit ^= 1 if ch == "d" else 0
        k = 2 * k + bit
    return k


def path_of(depth: int, index: int) -> str:
    """Node path of band ``w{depth}.{index}`` (inverse of :func:`freq_index`)."""
    if not 0 <= index < 2 ** depth:
        raise ValueError(f"band w{depth}.{index} does not exist (K is 0 to {2 ** depth - 1})")
    bits = [(index >> (depth - 1 - i)) & 1 for i in range(depth)]
    prev = 0
    out = []
    for b in bits:
        out.append("d" if b ^ prev else "a")
        prev = b
    return "".join(out)


def parse_name(name: str) -> tuple[int, int] | None:
    """(J, K) of a band name ``wJ.K``, or None when it is not one."""
    if not (isinstance(name, str) and name.startswith("w") and "." in name):
        return None
    j, _, k = name[1:].partition(".")
    if not (j.isdigit() and k.isdigit()):
        return None
    return int(j), int(k)


def range_hz(path: str, rate: float) -> tuple[float, float]:
    j, k = len(path), freq_index(path)
    width = rate / 2 ** (j + 1)
    return k * width, (k + 1) * width


def full_basis(depth: int) -> tuple[str, ...]:
    return tuple(path_of(depth, k) for k in range(2 ** depth))


def sort_basis(paths) -> tuple[str, ...]:
    """Paths in frequency order (by the low edge of their band)."""
    return tuple(sorted(paths, key=lambda p: freq_index(p) / 2 ** len(p)))


def check_basis(paths, depth: int) -> tuple[str, ...]:
    """A list of node paths that tiles the spectrum, in frequency order; ValueError if not."""
    out = []
    for p in paths:
        if not isinstance(p, str) or not p or set(p) - {"a", "d"}:
            raise ValueError(f"basis path {p!r} is not a node path of letters a and d")
        if len(p) > depth:
            raise ValueError(f"basis path {p!r} is deeper than level {depth}")
        out.append(p)
    if len(set(out)) != len(out):
        raise ValueError("basis lists a node path twice")
    # A tiling: the intervals [low, high) of the nodes cover 0..1 without overlap.
    spans = sorted((freq_index(p) / 2 ** len(p), (freq_index(p) + 1) / 2 ** len(p), p)
                   for p in out)
    edge = 0.0
    for lo, hi, p in spans:
        if lo != edge:
            raise ValueError(f"basis paths do not tile the spectrum (a gap or overlap at {p!r})")
        edge = hi
    if edge != 1.0:
        raise ValueError("basis paths do not cover the whole spectrum")
    return tuple(p for _, _, p in spans)


def keys(basis) -> list[PacketKey]:
    return [PacketKey(p, i) for i, p in enumerate(basis)]


# --------------------------------------------------------------------------
# forward, inverse


def node_lengths(n: int, wavelet: str, mode: str, depth: int) -> list[int]:
    """Coefficient count of a node at each depth 0 .. depth (depth 0: the signal)."""
    L = pywt.Wavelet(wavelet).dec_len
    out = [int(n)]
    for _ in range(depth):
        out.append(int(pywt.dwt_coeff_len(out[-1], L, mode)))
    return out


def forward(x: np.ndarray, wavelet: str, mode: str, basis) -> list[np.ndarray]:
    """Coefficients of every basis node, in the order of ``basis``.

    The numbers are ``pywt.WaveletPacket(x, wavelet, mode)[path].data``: each
    node is ``pywt.dwt`` of its parent, and a parent is let go as soon as both
    its children are made.
    """
    w = pywt.Wavelet(wavelet)
    wanted = set(basis)
    inner = {p[:i] for p in basis for i in range(len(p))}
    out: dict[str, np.ndarray] = {}
    stack = [("", np.asarray(x))]
    while stack:
        path, data = stack.pop()
        if path in wanted:
            out[path] = data
            continue
        if path not in inner:
            continue
        a, d = pywt.dwt(data, w, mode)
        del data
        stack.append((path + "d", d))
        stack.append((path + "a", a))
    return [out[p] for p in basis]


def inverse(bands, basis, wavelet: str, mode: str, n: int, dtype=np.float64) -> np.ndarray:
    """Signal from basis nodes (``bands[i]`` for ``basis[i]``; None = zeros).

    As ``WaveletPacket.reconstruct`` does it: each parent is ``pywt.idwt``
    of its two children, cut to the parent's length.
    """
    w = pywt.Wavelet(wavelet)
    depth = max(len(p) for p in basis)
    lengths = node_lengths(n, wavelet, mode, depth)
    nodes = {p: b for p, b in zip(basis, bands)}
    for j in range(depth, 0, -1):
        parents = sorted({p[:-1] for p in nodes if len(p) == j})
        for q in parents:
            a = nodes.pop(q + "a", None)
            d = nodes.pop(q + "d", None)
            if a is None and d is None:
                nodes[q] = None
                continue
            r = pywt.idwt(a, d, w, mode)
            nodes[q] = r[:lengths[j - 1]]
    r = nodes.get("")
    if r is None:
        return np.zeros(n, dtype=dtype)
    return np.ascontiguousarray(r[:n])


def component(values: np.ndarray, path: str, wavelet: str, mode: str, n: int) -> np.ndarray:
    """Time-domain component of one node (every other node zero)."""
    w = pywt.Wavelet(wavelet)
    lengths = node_lengths(n, wavelet, mode, len(path))
    r = values
    for j in range(len(path), 0, -1):
        r = pywt.idwt(r, None, w, mode) if path[j - 1] == "a" else pywt.idwt(None, r, w, mode)
        r = r[:lengths[j - 1]]
    return np.ascontiguousarray(r[:n])


def local_synthesis(windows: dict, wavelet: str, mode: str, n: int) -> tuple[int, np.ndarray]:
    """Time-domain effect of coefficient windows of basis nodes: ``(start, segment)``.

    ``windows`` maps a node path to ``(values, k0)``.  Each window is carried
    up its own path one level at a time, as ``transforms.local_synthesis_bands``
    carries a DWT window (upsample and filter with the node's own filter,
    keep what falls inside the parent); the windows' effects are added.
    Its cost follows the windows, not the recording.
    """
    w = pywt.Wavelet(wavelet)
    L = w.rec_len
    periodic = mode == "periodization"
    off = L // 2 - 1 if periodic else L - 2
    depth = max(len(p) for p in windows)
    lengths = node_lengths(n, wavelet, mode, depth)
    pieces = []
    for path, (values, k0) in windows.items():
        seg, start = np.asarray(values, dtype=np.float64), int(k0)
        for j in range(len(path), 0, -1):
            part = path[j - 1]
            band_len = lengths[j]
            out_len = lengths[j - 1]
            conv = pywt.upcoef(part, seg, w, level=1, take=0)
            m0 = 2 * start - off
            if periodic:
                full_len = 2 * band_len
                if m0 >= 0 and m0 + conv.shape[0] <= full_len:
                    seg, start = conv, m0
                else:
                    idx = (np.arange(conv.shape[0]) + m0) % full_len
                    acc = np.zeros(full_len)
                    np.add.at(acc, idx, conv)
                    lo, hi = int(idx.min()), int(idx.max()) + 1
                    seg, start = acc[lo:hi], lo
            else:
                seg, start = conv, m0
            a, b = max(start, 0), min(start + seg.shape[0], out_len)
            if b <= a:
                seg = None
                break
            seg, start = seg[a - start:b - start], a
        if seg is not None:
            pieces.append((start, seg))
    if not pieces:
        return 0, np.zeros(0)
    lo = min(s for s, _ in pieces)
    hi = min(n, max(s + g.shape[0] for s, g in pieces))
    out = np.zeros(hi - lo)
    for s, g in pieces:
        e = min(s + g.shape[0], hi)
        out[s - lo:e - lo] += g[:e - s]
    return lo, out


# --------------------------------------------------------------------------
# best basis (Coifman & Wickerhauser 1992)


def cost(c: np.ndarray, kind: str, norm2: float) -> float:
    """Additive cost of one node's coefficients.

    ``shannon``: -sum p ln p with p = c^2 / ||x||^2 (0 ln 0 = 0);
    ``log-energy``: sum ln c^2 over the non-zero c.
    """
    c = np.asarray(c, dtype=np.float64)
    e = c * c
    nz = e[e > 0]
    if kind == "shannon":
        if norm2 <= 0:
            return 0.0
        p = nz / norm2
        return float(-np.sum(p * np.log(p)))
    if kind == "log-energy":
        return float(np.sum(np.log(nz)))
    raise ValueError(f"cost {kind!r} is not one of {', '.join(COSTS)}")


def best_basis(channels, wavelet: str, mode: str, depth: int,
               kind: str = "shannon") -> tuple[str, ...]:
    """Best basis to ``depth`` for one or more channels (costs add over channels).

    Bottom-up: a node keeps its own cost unless its two children's best
    costs sum to less, in which case it is split.
    """
    if kind not in COSTS:
        raise ValueError(f"cost {kind!r} is not one of {', '.join(COSTS)}")
    w = pywt.Wavelet(wavelet)
    costs: dict[str, float] = {}
    for x in channels:
        x = np.asarray(x, dtype=np.float64)
        norm2 = float(np.dot(x, x))
        level = [("", x)]
        for j in range(depth + 1):
            nxt = []
            for path, data in level:
                costs[path] = costs.get(path, 0.0) + cost(data, kind, norm2)
                if j < depth:
                    a, d = pywt.dwt(data, w, mode)
                    nxt.append((path + "a", a))
                    nxt.append((path + "d", d))
            level = nxt
    return sort_basis(choose(costs, depth))


def choose(costs: dict, depth: int) -> list[str]:
    """The paths of the least-cost basis, given every node's cost to ``depth``."""
    best: dict[str, tuple[float, list[str]]] = {}
    for j in range(depth, -1, -1):
        for path in [p for p in costs if len(p) == j]:
            own = costs[path]
            if j == depth:
                best[path] = (own, [path])
                continue
            ca, cd = best[path + "a"], best[path + "d"]
            if ca[0] + cd[0] < own:
                best[path] = (ca[0] + cd[0], ca[1] + cd[1])
            else:
                best[path] = (own, [path])
    return best[""][1]


def default_depth(n: int, wavelet: str) -> int:
    """``DEFAULT_DEPTH``, or less when the data allow less (PyWavelets' rule)."""
    top = pywt.dwt_max_level(n, pywt.Wavelet(wavelet).dec_len)
    return int(max(1, min(DEFAULT_DEPTH, top)))


def finest_detail(x: np.ndarray, wavelet: str, mode: str) -> np.ndarray:
    """Level-1 detail (node ``d``): where ``noise: finest`` takes sigma from."""
    return pywt.dwt(np.asarray(x), wavelet, mode)[1]




def band_signal(x: np.ndarray, path: str, wavelet: str, mode: str) -> np.ndarray:
    """Time-domain component of one packet node of ``x`` (only its branch is computed)."""
    x = np.asarray(x, dtype=np.float64)
    c = forward(x, wavelet, mode, [path])[0]
    return component(c, path, wavelet, mode, x.shape[0])
