"""The figures of ``bands --transform packet`` for a recording longer than memory.

The packet tree runs block by block (``stream.packet_tree``): each basis node
gathers the moments of its coefficients and the energy and peak of its
time-domain component as its coefficients come, so nothing is held at full
length.  A best basis is chosen first, from a pass that gathers every node's
cost sums (the costs are sums over coefficients; the channels' costs add, as
the model adds them), then a second pass gathers the chosen nodes' figures.
The rows follow the whole-array table's order and rules (``core.band_figures``).
"""

from __future__ import annotations

import numpy as np

from scalesieve.core import band_figures as bf
from scalesieve.core import packets as wp
from scalesieve.core import transforms as tf
from scalesieve.stream import statistics as st
from scalesieve.stream.packet_tree import (NodeComponent, NodeCost, PacketTree, all_nodes,
                                           inner_nodes, with_basis)
from scalesieve.stream.packet_wrap import node_edges, root_edges
from scalesieve.stream.statistics import plain_dot


def _pass(src, spec, inner, put, progress, share: tuple[float, float], text: str) -> list:
    """One pass over the recording through a tree per channel; the channels' sums of squares."""
    n = src.frames
    energy = [0.0] * src.channels
    trees = [PacketTree(n, spec.wavelet, spec.mode, inner,
                        lambda path, k0, c, k=k: put(k, path, k0, c), root_edges(src, spec, k))
             for k in range(src.channels)]
    done = 0
    for block in src.blocks():
        for k in range(src.channels):
            col = block[:, k]
            energy[k] += float(plain_dot(col, col))
            trees[k].feed(col, done)
        done += block.shape[0]
        if progress:
            progress(share[0] + (share[1] - share[0]) * done / max(n, 1), text)
    return energy


def choose_basis(src, spec: tf.TransformSpec, progress=None,
                 share=(0.0, 1.0)) -> tf.TransformSpec:
    """``spec`` with its best basis chosen from one pass (``core.packets.best_basis``'s rule)."""
    nodes = all_nodes(spec.level)
    costs = [{p: NodeCost() for p in nodes} for _ in range(src.channels)]
    energy = _pass(src, spec, inner_nodes(nodes), lambda k, p, k0, c: costs[k][p].add(c),
                   progress, share, "choosing the best basis")
    total = {p: sum(costs[k][p].cost(spec.cost, energy[k]) for k in range(src.channels))
             for p in nodes}
    return with_basis(spec, wp.choose(total, spec.level))


def packet_figures_stream(src, spec: tf.TransformSpec, progress=None) -> tuple[dict, list]:
    """``stream.bands.band_figures_stream``'s answer for a packet spec (resolved, local mode)."""
    n = src.frames
    first = (0.0, 0.0)
    if spec.basis == "best":
        spec = choose_basis(src, spec, progress, (0.0, 0.5))
        first = (0.5, 0.5)
    basis = tf.basis_paths(spec)
    lengths = wp.node_lengths(n, spec.wavelet, spec.mode, spec.level)
    moments = [{p: st.Moments() for p in basis} for _ in range(src.channels)]
    comps = []
    for k in range(src.channels):
        # periodization: each component's ends made from its node's edges (packet_wrap)
        root = root_edges(src, spec, k) if spec.mode == "periodization" else None
        edges = node_edges(root, spec.wavelet, basis) if root is not None else {}
        comps.append({p: NodeComponent(p, spec.wavelet, spec.mode, n, lengths[len(p)],
                                       edges.get(p)) for p in basis})
    wanted = set(basis)

    def put(k, path, k0, c):
        if path in wanted:
            moments[k][path].add(c)
            comps[k][path].add(c)
    energy = _pass(src, spec, inner_nodes(basis), put, progress, (first[1], 1.0),
                   "band figures")
    channels = []
    for k in range(src.channels):
        floor = bf.roundoff_floor(energy[k], np.float64)   # blocks are read as float64
        rows = []
        for key in tf.table_keys(spec):                     # frequency order
            p = key.path
            e, pk = comps[k][p].finish()
            m = moments[k][p]
            lo, hi = tf.band_range_hz(key, spec.level, src.rate)
            rows.append({
                "name": key.name, "kind": "packet", "level": key.depth, "index": key.index,
                "path": p, "low_hz": lo, "high_hz": hi,
                "count": int(lengths[len(p)]),
                "energy": e,
                "energy_fraction": e / energy[k] if energy[k] > 0 else 0.0,
                "coef_energy": m.square_sum,
                "rms": float(np.sqrt(e / n)) if n else 0.0, "peak": pk,
                # the whole-array rule (core.band_figures): None where only round-off
                "kurtosis": m.pearson_kurtosis() if m.square_sum > floor else None,
            })
        channels.append(rows)
    return {"rate": src.rate, "samples": n, "spec": spec, "names": list(src.names),
            "pick": src.pick, "start_time": src.start_time, "warnings": src.warnings()}, channels
