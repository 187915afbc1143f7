"""Wavelet packets in the boundary modes that wrap (``periodic``, ``periodization``), in blocks.

Each inner node of the tree is one level of the DWT of its parent, so the
wrap of the DWT in blocks (``stream.wrap``) serves every node: the
recording's head and tail are read once, the head and tail of every node's
coefficients worked out from them top down (``node_edges``), and each inner
node runs as a one-level wrapped stage (``wrap._Level``) fed its parent's
blocks.  The inverse of ``periodic`` is PyWavelets' inverse of every mode
but periodization, so its inverse tree needs no wrap; periodization's is a
tree of wrapped synthesis steps (``wrap._Up``), each given the head and tail
of its two children as they will be handed in: edited for a basis node, and
worked out bottom up (``up_edges``) for an inner one.

A node's time-domain component in periodization wraps round the recording's
ends, and where a level's length is odd each level wraps on its own length,
so it is no single circular filter; but away from the recording's ends
(further than ``reach``) it is the plain composite synthesis of the node's
coefficients.  ``component_edges`` makes its head and tail exactly, from the
node's edges up its path, and ``packet_tree.NodeComponent`` sums the rest
through the composite taps.
"""

from __future__ import annotations

import numpy as np
import pywt

from scalesieve.core import packets as wp
from scalesieve.stream.wrap import WRAP_MODES, _edges, _Known, _up_edges


def edge_samples(n: int, wavelet: str, depth: int) -> int:
    """Samples of the recording's head (and tail) a packet tree to ``depth`` reads first.

    Twice what the DWT's wrap needs (``wrap.edge_samples``): enough too for
    every node's component to be made exactly as far as ``reach`` from each end.
    """
    L = pywt.Wavelet(wavelet).dec_len
    return min(n, (2 * L + 4) * 2 ** (depth + 1))


def reach(wavelet: str, depth: int) -> int:
    """Samples from each end beyond which a periodization component is its composite synthesis.

    The deepest level's wrap and cut touch about L / 2 + 1 of its outputs;
    each synthesis step above doubles that and adds L / 2, so fewer than
    (L + 2) 2^depth samples at the top.
    """
    L = pywt.Wavelet(wavelet).rec_len
    return (L + 2) * 2 ** depth


def read_packet_edges(src, wavelet: str, depth: int) -> tuple[np.ndarray, np.ndarray]:
    """The recording's head and tail, ``(frames, channels)`` each, read once per tree."""
    n = src.frames
    r = edge_samples(n, wavelet, depth)
    r = n if 2 * r >= n else r
    key = ("packet", wavelet, depth, r)
    if getattr(src, "edges_key", None) != key:
        head = np.concatenate(list(src.blocks(stop=r)) or [np.empty((0, src.channels))])
        tail = head if 2 * r >= n else np.concatenate(list(src.blocks(start=n - r)))
        src.edges, src.edges_key = (head, tail), key
    return src.edges


def root_edges(src, spec, k: int) -> _Known | None:
    """The head and tail of channel ``k`` as the tree's wrap reads them (None: no wrap)."""
    if spec.mode not in WRAP_MODES:
        return None
    head, tail = read_packet_edges(src, spec.wavelet, spec.level)
    return _Known(np.asarray(head[:, k], dtype=np.float64),
                  np.asarray(tail[:, k], dtype=np.float64), src.frames, spec.mode)


def node_edges(root: _Known, wavelet: str, paths) -> dict:
    """The head and tail of the coefficients of every node in ``paths`` and their ancestors."""
    w = pywt.Wavelet(wavelet)
    mode = root.mode
    need = {p[:i] for p in paths for i in range(len(p) + 1)}
    out = {"": root}
    for path in sorted(need, key=len):
        if not path:
            continue
        parent = out[path[:-1]]
        N = pywt.dwt_coeff_len(parent.m, w.dec_len, mode)
        k = _edges(parent, w, N, detail=path[-1] == "d")
        out[path] = _Known(k.head, k.tail, N, mode)      # a node wraps in the tree's mode
    return out


def as_bands(known: _Known) -> _Known:
    """A node's edges as a synthesis step reads its coefficients (circular on their count)."""
    return _Known(known.head, known.tail, known.m, "periodic")


def up_edges(basis_edges: dict, wavelet: str, lengths: list) -> dict:
    """The edges of every node the inverse tree makes, from the basis nodes' (edited) edges.

    ``basis_edges`` maps each basis path to its ``as_bands`` edges; ``lengths``
    are the node lengths by depth.  Returns every node's edges, deepest first filled.
    """
    w = pywt.Wavelet(wavelet)
    out = dict(basis_edges)
    inner = sorted({p[:i] for p in basis_edges for i in range(len(p))}, key=len, reverse=True)
    for q in inner:
        out[q] = _up_edges(out[q + "a"], out[q + "d"], w, lengths[len(q)])
    return out


def component_edges(known: _Known, path: str, wavelet: str, n: int) -> _Known:
    """Head and tail of a node's periodization component (every other node zero), exact."""
    w = pywt.Wavelet(wavelet)
    lengths = wp.node_lengths(n, wavelet, "periodization", len(path))
    k = as_bands(known)
    for j in range(len(path), 0, -1):
        zero = _Known(np.zeros_like(k.head), np.zeros_like(k.tail), k.m, "periodic")
        a, d = (k, zero) if path[j - 1] == "a" else (zero, k)
        k = _up_edges(a, d, w, lengths[j - 1])
    return k
