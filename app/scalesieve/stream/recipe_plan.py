"""The recipe band by band for a clean in blocks: chains, contexts, the passes thresholds need."""

from __future__ import annotations

import numpy as np

from scalesieve.core import edits as ed
from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.stream import statistics as st

#: the key of the level-1 detail of a packet tree (node "d") among the medians
FINEST = "finest"


class _Band:
    """One band's chain of edits, its context and its thresholds as they become known."""

    def __init__(self, chain: tuple, ctx: ed.BandContext):
        self.chain, self.ctx = chain, ctx
        self.thr = [i for i, e in enumerate(chain) if e.op == "threshold"]
        self.lams: list = [None] * len(self.thr)
        self.gather = None          # (t, SquareSum | BandValues) until threshold t is known
        self.gathering = False      # the gatherer is being filled in this pass

    def known(self) -> int:
        """Thresholds known, in chain order."""
        t = 0
        while t < len(self.lams) and self.lams[t] is not None:
            t += 1
        return t

    def edited(self, c: np.ndarray, k0: int) -> np.ndarray:
        if not self.chain:
            return c
        return ed.state_values(c, ed.chain_values(c, self.chain, self.ctx, self.lams, k0))

    def before(self, t: int, c: np.ndarray, k0: int) -> np.ndarray:
        """The band as threshold t of the chain finds it (earlier edits applied)."""
        i = self.thr[t]
        return ed.state_values(c, ed.chain_values(c, self.chain[:i], self.ctx, self.lams[:t], k0))


_chains = ed.chains_for  # the name stream.pipeline has re-exported


class _Plan:
    """Every channel's bands, the medians the noise needs, the passes that find them."""

    def __init__(self, edits, channels: int, spec: tf.TransformSpec, n: int, rate: float):
        self.spec, self.n = spec, n
        self.passes_before = 0             # passes made before the plan's (a basis chosen)
        self.edits = tuple(edits)
        self.lengths = tf.band_lengths(n, spec)
        self.medians: dict = {}            # (channel, key) -> MedianOfMagnitudes
        # where noise: finest is measured: level 1 (DWT, SWT); packets: the level-1
        # detail, node "d", whether or not it is a band of the basis (as the model does)
        self.finest = FINEST if spec.kind == "packet" else 1
        self.bands: list[dict] = []
        for k in range(channels):
            bands = {}
            for key, chain in _chains(edits, k, spec).items():
                bands[key] = _Band(chain, self._ctx(k, key, rate))
                for i in bands[key].thr:
                    e = chain[i]
                    if e.rule != "manual":
                        self.medians.setdefault((k, self.finest if e.noise == "finest" else key),
                                                st.MedianOfMagnitudes())
            self.bands.append(bands)

    def _ctx(self, k: int, key, rate: float) -> ed.BandContext:
        count = self.lengths[tf.band_index(key, self.spec.level)]
        spec = self.spec

        def sigma(which):
            m = self.medians.get((k, which))
            if m is None or m.value is None:
                raise LookupError("noise not yet known")
            return m.sigma()

        def positions():
            raise AssertionError("positions are found by span in blocks")

        # noise: finest carries level 1's sigma by the transform's white-noise gain
        gain = th.white_noise_gain(spec.kind, key, spec.level)
        return ed.BandContext(key=key, n_samples=self.n, rate=rate, positions=positions,
                              sigma_finest=lambda: sigma(self.finest) * gain,
                              sigma_level=lambda: sigma(key),
                              span=lambda lo, hi: tf.coefficient_slice(key, spec, count, lo, hi))

    def resolve(self) -> bool:
        """Work out every threshold whose inputs are known; True when all are."""
        done = True
        for bands in self.bands:
            for band in bands.values():
                for t in range(band.known(), len(band.lams)):
                    e = band.chain[band.thr[t]]
                    try:
                        if ed.is_pointwise(e):
                            band.lams[t] = ed.threshold_value(e, np.zeros(0), band.ctx)
                        elif band.gather is not None and band.gather[0] == t:
                            sigma = (band.ctx.sigma_finest() if e.noise == "finest"
                                     else band.ctx.sigma_level())
                            g = band.gather[1]
                            lam = (g.bayes_threshold(sigma) if e.rule == "bayes"
                                   else g.sure_threshold(sigma))
                            band.lams[t] = lam * float(e.scale)
                            band.gather = None
                        else:
                            break
                    except LookupError:
                        break
                done = done and band.known() == len(band.lams)
        return done

    def next_pass(self) -> int:
        """Set up what the next pass gathers; returns the deepest level it needs (0: none)."""
        depth = 0
        for (k, key), m in self.medians.items():
            if m.stage != "done":
                depth = max(depth, self._depth(key))
        for bands in self.bands:
            for key, band in bands.items():
                t = band.known()
                if t < len(band.lams) and band.gather is None \
                        and not ed.is_pointwise(band.chain[band.thr[t]]):
                    e = band.chain[band.thr[t]]
                    band.gather = (t, st.SquareSum() if e.rule == "bayes" else st.BandValues())
                    band.gathering = True
                if band.gathering:
                    depth = max(depth, self._depth(key))
        return depth

    def _depth(self, key) -> int:
        """How deep a pass must go to see band ``key`` (a packet band: its node's depth)."""
        if key == "a":
            return self.spec.level
        # a best basis may be the recording itself (w0.0, depth 0): a pass always runs
        # the tree one level deep, which hands the root on too (0 would mean no pass)
        return 1 if key == FINEST else max(1, int(key))

    def gatherer(self, k: int):
        """``put(key, k0, values)`` of a first pass, for channel k."""
        meds = {key: m for (kk, key), m in self.medians.items()
                if kk == k and m.stage != "done"}
        bands = self.bands[k]

        def put(key, k0, c):
            m = meds.get(key)
            if m is not None:
                m.add(c)
            band = bands.get(key)
            if band is not None and band.gathering:
                t, g = band.gather
                g.add(band.before(t, c, k0))
        return put

    def end_pass(self) -> None:
        for m in self.medians.values():
            if m.stage != "done":
                m.end_pass()
        for bands in self.bands:
            for band in bands.values():
                band.gathering = False
