"""A clean of wavelet packet bands in blocks: the first passes and the cleaning pass.

The packet tree runs block by block (``stream.packet_tree.PacketTree``); each
basis node's blocks of coefficients go through the band's chain of edits
(``recipe_plan._Band.edited``) and on into the inverse tree
(``PacketInverse``), whose root hands out the cleaned samples in order.  The
first passes a threshold needs (the medians of the noise, a band's sums or
values) run the tree only as deep as the bands they look at; ``noise:
finest`` is measured on the level-1 detail, node ``d``, as the model does.
"""

from __future__ import annotations

from scalesieve.core import transforms as tf
from scalesieve.stream.packet_tree import PacketInverse, PacketTree, inner_nodes
from scalesieve.stream.packet_wrap import as_bands, node_edges, root_edges
from scalesieve.stream.wrap import _Known
from scalesieve.stream.recipe_plan import FINEST


def packet_pass(src, spec: tf.TransformSpec, depth: int, puts, report, passes: int) -> None:
    """One first pass: every node to ``depth`` handed to ``puts[k](key, k0, values)``."""
    keys = {key.path: key for key in tf.spec_keys(spec)}
    inner = {p for p in inner_nodes(keys) if len(p) < depth}
    if depth >= 1:
        inner.add("")                    # node "d", where noise: finest is measured

    def tree_put(k, path, k0, c):
        if path == "d":
            puts[k](FINEST, k0, c)
        key = keys.get(path)
        if key is not None:
            puts[k](key, k0, c)
    trees = [PacketTree(src.frames, spec.wavelet, spec.mode, inner,
                        lambda path, k0, c, k=k: tree_put(k, path, k0, c),
                        root_edges(src, spec, k))
             for k in range(src.channels)]
    done = 0
    for block in src.blocks():
        for k, t in enumerate(trees):
            t.feed(block[:, k], done)
        done += block.shape[0]
        report(passes, done, "gathering the noise and band figures")


def clean_packet(src, spec: tf.TransformSpec, plan, join, report, passes: int) -> None:
    """The cleaning pass: tree -> each basis band's edits -> inverse tree -> join."""
    n = src.frames
    keys = {key.path: key for key in tf.spec_keys(spec)}
    basis = tuple(keys)
    trees, inverses = [], []
    for k in range(src.channels):
        bands = plan.bands[k]
        root = root_edges(src, spec, k)
        inv = PacketInverse(n, spec.wavelet, spec.mode, basis,
                            lambda s0, seg, k=k: join.put(k, s0, seg),
                            _edited_edges(root, spec, keys, bands)
                            if spec.mode == "periodization" else None)

        def put(path, k0, c, inv=inv, bands=bands):
            key = keys.get(path)
            if key is not None:
                inv.put(path, k0, bands[key].edited(c, k0))
        inverses.append(inv)
        trees.append(PacketTree(n, spec.wavelet, spec.mode, inner_nodes(basis), put, root))
    done = 0
    for block in src.blocks():
        join.add_input(block)
        for k in range(src.channels):
            trees[k].feed(block[:, k], done)
            inverses[k].pump()
        join.flush()
        done += block.shape[0]
        report(passes, done, "cleaning")


def _edited_edges(root, spec: tf.TransformSpec, keys: dict, bands: dict) -> dict:
    """Each basis node's head and tail as its edits leave them: the inverse's wrap."""
    out = {}
    for path, kn in node_edges(root, spec.wavelet, keys).items():
        if path in keys:
            band = bands[keys[path]]
            kn = as_bands(kn)
            out[path] = _Known(band.edited(kn.head, 0),
                               band.edited(kn.tail, kn.m - kn.tail.shape[0]), kn.m, "periodic")
    return out
