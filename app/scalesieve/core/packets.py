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

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pywt

COSTS = ("shannon", "log-energy")
BASES = ("full", "best")
#: default depth of a packet tree (64 bands): the depth the kurtosis table defaults to too
DEFAULT_DEPTH = 6
#: from this many samples the two halves of the tree are worked in two threads
THREADS_FROM = 1 << 20


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


@lru_cache(maxsize=32)
def full_basis(depth: int) -> tuple[str, ...]:
    # cached: the window asks for a basis's keys for every band header it redraws
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
    basis = tuple(basis)
    return list(_keys(basis))


@lru_cache(maxsize=64)
def _keys(basis: tuple[str, ...]) -> tuple[PacketKey, ...]:
    return tuple(PacketKey(p, i) for i, p in enumerate(basis))


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
    x = np.asarray(x)
    if x.shape[0] >= THREADS_FROM and "" in inner:
        # the two halves of the tree in two threads (PyWavelets' C code runs without the GIL)
        from concurrent.futures import ThreadPoolExecutor

        a, d = pywt.dwt(x, w, mode)
        with ThreadPoolExecutor(max_workers=2) as pool:
            parts = list(pool.map(lambda item: _walk([item], w, mode, wanted, inner),
                                  [("a", a), ("d", d)]))
        del a, d
        for part in parts:
            out.update(part)
        return [out[p] for p in basis]
    out = _walk([("", x)], w, mode, wanted, inner)
    return [out[p] for p in basis]


def _walk(stack, w, mode: str, wanted: set, inner: set) -> dict:
    """The basis nodes under the nodes on ``stack``, depth first."""
    out = {}
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
    return out


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


# --------------------------------------------------------------------------
# figures of a node's time-domain component without making it whole


def composite(path: str, wavelet: str, mode: str) -> tuple[np.ndarray, int]:
    """Taps ``g`` and offset ``s0`` of a node's synthesis up to the signal.

    Coefficient ``i`` of node ``path`` (depth J) adds ``values[i] * g[l]`` to
    sample ``2**J * i + s0 + l`` (for ``periodization`` modulo the signal's
    length): the single-level steps of :func:`local_synthesis` composed, no
    cut in between (the cuts of ``idwt`` only drop what later levels never
    read, so they do not change the kept samples).
    """
    w = pywt.Wavelet(wavelet)
    L = w.rec_len
    off = L // 2 - 1 if mode == "periodization" else L - 2
    g = np.ones(1)
    s0 = 0
    for j in range(len(path), 0, -1):
        g = pywt.upcoef(path[j - 1], g, w, level=1, take=0)
        s0 = 2 * s0 - off
    return g, s0


#: groups of 2**J output samples synthesised at a time when a node's samples are needed
_GROUPS = 4096


class _Polyphase:
    """A node's component ``y`` as groups of ``P = 2**J`` samples.

    With the composite taps cut into ``T`` rows of ``P`` (``G[k, r] =
    g[P k + r]``), the samples ``u = P q + r`` of the uncut synthesis are
    ``z[u] = sum_k c[q - k] G[k, r]``: one small matrix product per group of
    groups.  ``y[t] = z[t - s0]`` for t in 0 .. n-1 (``c`` zero outside its
    ends, or circular for ``periodization``).
    """

    def __init__(self, values: np.ndarray, path: str, wavelet: str, mode: str, n: int):
        self.c = np.ascontiguousarray(values, dtype=np.float64)
        self.N = self.c.shape[0]
        self.P = 2 ** len(path)
        self.n = n
        self.periodic = mode == "periodization"
        g, self.s0 = composite(path, wavelet, mode)
        self.T = -(-g.shape[0] // self.P)
        G = np.zeros(self.T * self.P)
        G[:g.shape[0]] = g
        self.G = G.reshape(self.T, self.P)
        # the groups holding samples of y, first and last possibly in part
        self.q_min = (-self.s0) // self.P
        self.q_max = (n - self.s0 - 1) // self.P

    def coefficients(self, lo: int, hi: int) -> np.ndarray:
        """c[i] for i in lo .. hi-1, zero (or circular) beyond its ends."""
        if self.periodic:
            return self.c[np.arange(lo, hi) % self.N]
        out = np.zeros(hi - lo)
        a, b = max(lo, 0), min(hi, self.N)
        if b > a:
            out[a - lo:b - lo] = self.c[a:b]
        return out

    def groups(self, qs: np.ndarray) -> np.ndarray:
        """z of groups ``qs`` (any integers), shape (len(qs), P)."""
        idx = qs[:, None] - np.arange(self.T)[None, :]
        if self.periodic:
            rows = self.c[idx % self.N]
        elif qs.shape[0] and qs.min() >= self.T - 1 and qs.max() < self.N:
            rows = self.c[idx]                # every coefficient inside: no mask needed
        else:
            inside = (idx >= 0) & (idx < self.N)
            rows = np.where(inside, self.c[np.clip(idx, 0, self.N - 1)], 0.0)
        return rows @ self.G

    def valid(self, q: int) -> slice:
        """The r of group q that are samples of y."""
        lo = max(0, -self.s0 - self.P * q)
        hi = min(self.P, self.n - self.s0 - self.P * q)
        return slice(lo, max(lo, hi))

    def run(self, lo: int, hi: int):
        """(first group, z of groups lo .. hi-1) in blocks, from a sliding window."""
        T = self.T
        for a in range(lo, hi, _GROUPS):
            b = min(hi, a + _GROUPS)
            ext = self.coefficients(a - T + 1, b)
            win = np.lib.stride_tricks.sliding_window_view(ext, T)
            yield a, win @ self.G[::-1]

    def exact(self) -> tuple[float, float]:
        """(energy, peak |y|) from every sample of y, block by block."""
        e = 0.0
        top = 0.0
        for a, z in self.run(self.q_min, self.q_max + 1):
            if a == self.q_min or a + z.shape[0] > self.q_max:
                z = z.copy()
                for q in (self.q_min, self.q_max):
                    if a <= q < a + z.shape[0]:
                        keep = np.zeros(self.P, dtype=bool)
                        keep[self.valid(q)] = True
                        z[q - a, ~keep] = 0.0
            flat = z.reshape(-1)
            e += float(np.einsum("i,i->", flat, flat))
            top = max(top, float(np.max(np.abs(flat))) if flat.size else 0.0)
        return e, top

    def lag_sums(self) -> np.ndarray:
        """R[d] = sum_i c[i] c[i + d], d = 0 .. T-1 (circular for periodization)."""
        c = self.c
        out = np.empty(self.T)
        for d in range(self.T):
            if self.periodic:
                other = np.concatenate([c[d:], c[:d]]) if d else c
                out[d] = float(np.einsum("i,i->", c, other))
            else:
                out[d] = float(np.einsum("i,i->", c[:self.N - d], c[d:])) if d < self.N else 0.0
        return out

    def energy(self) -> float | None:
        """Sum of y^2 from the lag sums of c and the taps' Gram matrix (None: cancellation).

        sum_u z[u]^2 = sum_{k,k'} (G G^T)[k, k'] R[|k - k'|]; without
        ``periodization`` the samples of z cut off before 0 and after n-1 are
        made exactly and taken away.
        """
        M = self.G @ self.G.T
        R = self.lag_sums()
        total = R[0] * float(np.trace(M))
        for d in range(1, self.T):
            total += 2.0 * R[d] * float(np.trace(M, offset=d))
        if self.periodic:
            return max(total, 0.0)
        cut = 0.0
        heads = np.arange(0, self.q_min + 1)
        tails = np.arange(self.q_max, self.N + self.T - 1)
        for qs in (heads, tails):
            if qs.size == 0:
                continue
            z = self.groups(qs)
            for row, q in zip(z, qs):
                keep = np.ones(self.P, dtype=bool)
                keep[self.valid(int(q))] = False
                cut += float(np.sum(row[keep] ** 2))
        left = total - cut
        if not left > 1e-6 * total:
            return None                       # the cut holds nearly all: sum directly
        return left

    def peak(self) -> float:
        """max |y|: groups whose bound cannot beat the largest found are skipped.

        The bound of group q is ``sum_k |c[q - k]| max_r |G[k, r]|``; the
        groups of largest bound are made first, then every group whose bound
        exceeds the largest |y| found so far.  Exact: only groups that
        cannot hold a larger sample are left out.
        """
        lo, hi = self.q_min, self.q_max
        T = self.T
        ext = np.abs(self.coefficients(lo - T + 1, hi + 1))
        bound = np.correlate(ext, np.max(np.abs(self.G[::-1]), axis=1), mode="valid")
        top = 0.0
        for q in {lo, hi}:                    # the edge groups, in part outside y
            z = self.groups(np.array([q]))[0][self.valid(q)]
            if z.size:
                top = max(top, float(np.max(np.abs(z))))
        inner = bound[1:-1]                   # groups q = lo+1 .. hi-1, wholly inside y
        first = min(inner.shape[0], 256)
        if first:
            order = np.argpartition(inner, inner.shape[0] - first)[inner.shape[0] - first:]
            z = self.groups(order + lo + 1)
            top = max(top, float(np.max(np.abs(z))))
            inner[order] = -1.0
        # a margin against round-off in the bound itself
        rest = np.flatnonzero(inner > top * (1 - 1e-9)) + lo + 1
        for a in range(0, rest.shape[0], _GROUPS):
            z = self.groups(rest[a:a + _GROUPS])
            top = max(top, float(np.max(np.abs(z))))
        return top


def component_figures(values: np.ndarray, path: str, wavelet: str, mode: str,
                      n: int) -> tuple[float, float] | None:
    """(energy, peak |value|) of a node's time-domain component, never made whole.

    The same numbers as ``component(...)`` summed and searched, up to
    round-off; None where this way does not apply (``periodization`` on a
    length that does not halve at every level): then make the component.
    """
    P = 2 ** len(path)
    values = np.asarray(values)
    if mode == "periodization" and (n % P or values.shape[0] != n // P):
        return None
    if values.shape[0] == 0 or n == 0:
        return 0.0, 0.0
    poly = _Polyphase(values, path, wavelet, mode, n)
    e = poly.energy() if poly.N > 4 * poly.T else None
    if e is None:
        return poly.exact()
    return e, poly.peak()
