"""Every packet node's raw moment sums, the tree walked in time pieces by several threads.

The signal is cut at a few seams (multiples of 2^J samples) into pieces, a
few per thread.  Each piece walks the packet tree to depth J over its own stretch
of every node, with the margin its deeper nodes' filters need, and keeps only
coefficients that are PyWavelets' own: output i of ``pywt.dwt`` of a stretch
starting at an even index s is output i + s/2 of the whole once its L taps lie
inside the stretch (at the signal's ends the stretch ends there too, so the
boundary outputs are the whole's).  A node's index range is shared out among
the pieces (each *owns* a part); the raw sums of each block of
``MOMENT_BLOCK`` coefficients are taken by the piece that owns all of it, the
few blocks across a seam from a copy of their parts, and all are added in
block order: the same numbers, bit for bit, as ``impulsive_bands._raw_sums``
of the whole node, whatever the number of pieces.  The periodic modes (whose
edges read the far end) and odd filter lengths use one piece.
"""

from __future__ import annotations

import numpy as np
import pywt

#: samples per block of the moment sums (cache-sized); the grid starts at each segment
MOMENT_BLOCK = 1 << 15


def block_sums(b: np.ndarray, buf: np.ndarray) -> tuple[float, float, float, float]:
    """(sum b, sum b^2, sum b^3, sum b^4) of one block (``buf`` is written over)."""
    sq = np.multiply(b, b, out=buf[:b.shape[0]])
    return (float(b.sum()), float(sq.sum()), float(np.einsum("i,i->", sq, b)),
            float(np.einsum("i,i->", sq, sq)))


def add_blocks(values) -> np.ndarray:
    """[s1, s2, s3, s4] of blocks' ``block_sums``, added in the order given."""
    s1 = s2 = s3 = s4 = 0.0
    for v1, v2, v3, v4 in values:
        s1 += v1
        s2 += v2
        s3 += v3
        s4 += v4
    return np.array([s1, s2, s3, s4])


def blocks(start: int, stop: int) -> list[tuple[int, int]]:
    """The blocks of a segment: ``MOMENT_BLOCK`` long from ``start``, the last shorter."""
    return [(i, min(i + MOMENT_BLOCK, stop)) for i in range(start, stop, MOMENT_BLOCK)]


def splittable(wavelet: pywt.Wavelet, mode: str) -> bool:
    """Whether a stretch's interior outputs are the whole's (not the periodic modes, even L)."""
    return mode not in ("periodic", "periodization") and wavelet.dec_len % 2 == 0


class Plan:
    """Which stretch of every depth each piece computes, and which part it owns.

    ``lengths[j]``: the node length at depth j (``lengths[0]`` the signal's);
    ``owned[j][p]`` and ``need[j][p]``: half-open index ranges of piece p at
    depth j (``need[0][p]`` the samples it reads).  The pieces are cut at
    ``cuts`` (sample indices, multiples of 2^depth) when given, else at about
    ``n / pieces`` apart.
    """

    def __init__(self, n: int, wavelet: pywt.Wavelet, mode: str, depth: int, pieces: int,
                 cuts: list[int] | None = None):
        L = wavelet.dec_len
        self.lengths = [n]
        for _ in range(depth):
            self.lengths.append(pywt.dwt_coeff_len(self.lengths[-1], L, mode))
        if cuts is None:
            cuts = sorted({(p * n // pieces) >> depth << depth for p in range(1, pieces)} - {0})
        elif any(c <= 0 or c >= n or c % (1 << depth) for c in cuts) or cuts != sorted(set(cuts)):
            raise ValueError("cuts must be ascending multiples of 2^depth inside the signal")
        seams = [0] + cuts
        self.pieces = len(seams)
        self.owned = [None]
        for j in range(1, depth + 1):
            ends = [s >> j for s in seams[1:]] + [self.lengths[j]]
            self.owned.append([(seams[p] >> j, ends[p]) for p in range(self.pieces)])
        self.need = [None] * (depth + 1)
        self.need[depth] = list(self.owned[depth])
        for j in range(depth - 1, -1, -1):
            row = []
            for p in range(self.pieces):
                a, b = self.need[j + 1][p]
                lo, hi = max(0, 2 * a - (L - 2)), min(self.lengths[j], 2 * b)
                if j >= 1:
                    lo, hi = min(lo, self.owned[j][p][0]), max(hi, self.owned[j][p][1])
                row.append((lo, hi))
            self.need[j] = row


def advance(plan: Plan, piece: int, j: int, parents: dict, wavelet, mode: str,
            segments: list[tuple[int, int]], buf: np.ndarray) -> dict:
    """One piece's stretch of the depth-j children of ``parents`` (path -> stretch).

    Returns path -> (stretch, {block: block_sums}) for the blocks of ``segments``
    this piece owns whole (keys ``(segment, start)``).
    """
    start = plan.need[j - 1][piece][0]
    c0, c1 = plan.need[j][piece]
    lo, hi = plan.owned[j][piece]
    off = c0 - start // 2
    mine = [(s, (a, b)) for s, seg in enumerate(segments) for a, b in blocks(*seg)
            if lo <= a and b <= hi]
    out = {}
    for path, data in parents.items():
        a, d = pywt.dwt(data, wavelet, mode)
        for letter, coeffs in (("a", a), ("d", d)):
            child = coeffs[off:off + (c1 - c0)]
            sums = {(s, ba): block_sums(child[ba - c0:bb - c0], buf) for s, (ba, bb) in mine}
            out[path + letter] = (child, sums)
    return out


def owned_parts(plan: Plan, j: int, stretches: list[np.ndarray], a: int, b: int) -> list:
    """Views of the pieces' stretches that make up indices a .. b of a depth-j node."""
    parts = []
    for p, arr in enumerate(stretches):
        lo, hi = plan.owned[j][p]
        lo, hi = max(lo, a), min(hi, b)
        if lo < hi:
            c0 = plan.need[j][p][0]
            parts.append(arr[lo - c0:hi - c0])
    return parts


def join(parts: list[np.ndarray]) -> np.ndarray:
    return parts[0] if len(parts) == 1 else np.concatenate(parts)


def segment_sums(plan: Plan, j: int, segment: tuple[int, int], s: int,
                 stretches: list[np.ndarray], sums: list[dict], buf: np.ndarray) -> np.ndarray:
    """The raw sums of one segment of a depth-j node, block by block in order."""
    values = []
    for a, b in blocks(*segment):
        for piece_sums in sums:
            v = piece_sums.get((s, a))
            if v is not None:
                values.append(v)
                break
        else:       # across a seam: its parts put together
            values.append(block_sums(join(owned_parts(plan, j, stretches, a, b)), buf))
    return add_blocks(values)
