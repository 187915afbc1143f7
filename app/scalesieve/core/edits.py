"""Apply a chain of edits to one band's coefficients.

Every edit is a per-coefficient gain: ``gain`` multiplies the band, ``region``
multiplies the coefficients whose time position lies in a span, and a
threshold multiplies each coefficient by 0 or 1 (hard), by
``max(0, 1 - lambda/|c|)`` (soft) or by ``max(0, 1 - lambda^2/c^2)``
(garrote).  A band's state is either a plain number (a uniform gain: the
band is ``gain * c``) or an array of edited coefficient values.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf

BandState = "float | np.ndarray"

#: rules whose threshold does not depend on the band's current values
POINTWISE_RULES = ("universal", "minimax", "manual")


@dataclass
class BandContext:
    """What a chain needs to know about the band it edits."""

    key: object                 # "a" or level number
    n_samples: int              # recording length (the n of sqrt(2 ln n))
    rate: float
    positions: Callable[[], np.ndarray]   # sample position of each coefficient
    sigma_finest: Callable[[], float]     # MAD sigma of the original d1
    sigma_level: Callable[[], float]      # MAD sigma of this band's original coefficients
    #: slice of the coefficients positioned in [lo, hi] samples, if known without
    #: ``positions`` (see transforms.coefficient_slice); the same answer, cheaper
    span: Callable[[float, float], slice] | None = None


def is_pointwise(edit) -> bool:
    return edit.op != "threshold" or edit.rule in POINTWISE_RULES


def threshold_value(edit, current: np.ndarray, ctx: BandContext) -> float:
    """The threshold lambda of a threshold edit on a band, in signal units."""
    if edit.rule == "manual":
        lam = float(edit.value)
    else:
        sigma = ctx.sigma_finest() if edit.noise == "finest" else ctx.sigma_level()
        if edit.rule == "universal":
            lam = th.universal_threshold(sigma, ctx.n_samples)
        elif edit.rule == "minimax":
            lam = sigma * th.minimax_lambda(ctx.n_samples)
        elif edit.rule == "bayes":
            lam = th.bayes_threshold(current, sigma)
        elif edit.rule == "sure":
            lam = th.sureshrink_threshold(current, sigma)
        else:  # pragma: no cover - the recipe loader refuses other rules
            raise ValueError(f"unknown threshold rule {edit.rule!r}")
    return lam * float(edit.scale)


def region_slice(edit, ctx: BandContext) -> slice:
    """Indices of the coefficients whose time position lies in the edit's span."""
    lo_s, hi_s = edit.start_s * ctx.rate, edit.stop_s * ctx.rate
    if ctx.span is not None:
        return ctx.span(lo_s, hi_s)
    pos = ctx.positions()
    lo = np.searchsorted(pos, lo_s, side="left")
    hi = np.searchsorted(pos, hi_s, side="right")
    return slice(int(lo), int(hi))


def apply_chain(c: np.ndarray, edits: Sequence, ctx: BandContext):
    """Edited state of a band after ``edits`` (in order) on original values ``c``."""
    state: float | np.ndarray = 1.0
    for e in edits:
        if e.op == "gain":
            state = state * e.gain
        elif e.op == "region":
            sl = region_slice(e, ctx)
            if sl.stop <= sl.start:
                continue
            if not isinstance(state, np.ndarray):
                state = c * state
            state[sl] *= e.gain
        elif e.op == "threshold":
            cur = c * state if not isinstance(state, np.ndarray) else state
            state = th.apply_shape(cur, threshold_value(e, cur, ctx), e.shape)
    return state


def state_values(c: np.ndarray, state) -> np.ndarray:
    """Edited coefficient values of a band as an array."""
    return state if isinstance(state, np.ndarray) else c * state


# --------------------------------------------------------------------------
# the same chains, by parts: what lets a model keep no edited copy of a band


def split_gain(edits: Sequence, ctx: BandContext) -> tuple[tuple, float]:
    """A chain as ``(shape, gain)``: the band is ``gain`` times what ``shape`` makes.

    ``gain`` is the product of the gain edits after the last threshold (gains
    and regions are both per-coefficient products, so they commute);
    ``shape`` is the chain without them, and without regions that select no
    coefficient.  ``shape == ()`` exactly when ``apply_chain`` gives a
    number, and ``gain`` is then that number, multiplied in the same order.
    """
    last = max((i for i, e in enumerate(edits) if e.op == "threshold"), default=-1)
    shape = []
    gain = 1.0
    for i, e in enumerate(edits):
        if e.op == "gain" and i > last:
            gain = gain * e.gain
        elif e.op == "region":
            sl = region_slice(e, ctx)
            if sl.stop > sl.start:
                shape.append(e)
        else:
            shape.append(e)
    return tuple(shape), gain


class ThresholdMemo(dict):
    """Thresholds found along chains, keyed by the chain up to each edit.

    A prefix tree: each edit of a chain is a step from the node of the edits
    before it (``memo[edit] -> [threshold or None, {next edit: node}]``), so
    looking up a whole chain hashes each edit once, and chains that share a
    beginning share its nodes.  ``nodes`` counts the steps stored, for the
    owner to bound (:meth:`keep_only`).
    """

    nodes = 0

    def keep_only(self, edits: Sequence) -> None:
        """Forget every chain but ``edits`` (their thresholds found so far are kept)."""
        path = []
        children = self
        for e in edits:
            node = children.get(e)
            if node is None:
                break
            path.append((e, node[0]))
            children = node[1]
        self.clear()
        children = self
        for e, lam in path:
            node = [lam, {}]
            children[e] = node
            children = node[1]
        self.nodes = len(path)


def _step(c: np.ndarray, state, e, ctx: BandContext, lam: float | None):
    """``state`` after one more edit: the operations of ``apply_chain``, in its order."""
    if e.op == "gain":
        return state * e.gain
    if e.op == "region":
        sl = region_slice(e, ctx)
        if sl.stop <= sl.start:
            return state
        if not isinstance(state, np.ndarray):
            state = c * state
        state[sl] *= e.gain
        return state
    if e.op == "threshold":
        cur = c * state if not isinstance(state, np.ndarray) else state
        return th.apply_shape(cur, lam, e.shape)
    return state


def chain_thresholds(c: np.ndarray, edits: Sequence, ctx: BandContext,
                     cache: dict | None = None) -> tuple[float, ...]:
    """The threshold of each threshold edit of a chain, as ``apply_chain`` finds it.

    Universal, minimax and manual thresholds do not look at the band;
    BayesShrink and SURE look at its values as they stand when the edit
    applies.  Those values are carried along the chain as it is walked (one
    pass over the band per edit before the last such threshold, never the
    chain again from its start), so the cost grows linearly with the chain.
    ``cache`` (a :class:`ThresholdMemo`, or a plain dict), keyed by the chain
    up to each edit, saves the work next time.
    """
    lams: list[float] = []
    children = cache
    counted = isinstance(cache, ThresholdMemo)
    state: float | np.ndarray = 1.0
    done = 0                      # edits[:done] are applied in ``state``
    t_done = 0                    # ... holding this many thresholds
    for i, e in enumerate(edits):
        node = None
        if children is not None:
            node = children.get(e)
            if node is None:
                node = [None, {}]
                children[e] = node
                if counted:
                    cache.nodes += 1
            children = node[1]
        if e.op != "threshold":
            continue
        if node is not None and node[0] is not None:
            lams.append(node[0])
            continue
        if is_pointwise(e):
            lam = threshold_value(e, c, ctx)
        else:
            while done < i:
                d = edits[done]
                state = _step(c, state, d, ctx, lams[t_done] if d.op == "threshold" else None)
                t_done += d.op == "threshold"
                done += 1
            lam = threshold_value(e, state_values(c, state), ctx)
        if node is not None:
            node[0] = lam
        lams.append(lam)
    return tuple(lams)


def chain_values(c: np.ndarray, edits: Sequence, ctx: BandContext, lams: Sequence[float],
                 k0: int = 0):
    """``apply_chain`` on coefficients ``k0 .. k0+len(c)`` of a band, thresholds given.

    ``lams`` are the chain's thresholds (``chain_thresholds``).  Element for
    element the same numbers as ``apply_chain(band, edits, ctx)[k0:...]``
    (the same operations in the same order), and a number when that is a
    number, so a long band can be edited block by block.
    """
    state: float | np.ndarray = 1.0
    k1 = k0 + c.shape[0]
    t = 0
    for e in edits:
        if e.op == "gain":
            state = state * e.gain
        elif e.op == "region":
            sl = region_slice(e, ctx)
            if sl.stop <= sl.start:
                continue
            if not isinstance(state, np.ndarray):
                state = c * state
            a, b = max(sl.start, k0), min(sl.stop, k1)
            if b > a:
                state[a - k0:b - k0] *= e.gain
        elif e.op == "threshold":
            cur = c * state if not isinstance(state, np.ndarray) else state
            state = th.apply_shape(cur, lams[t], e.shape)
            t += 1
    return state


def chains_for(edits: Sequence, channel: int, spec: tf.TransformSpec) -> dict:
    """Every band's chain: the edits that apply to it, in recipe order."""
    chains: dict = {key: [] for key in tf.spec_keys(spec)}
    for e in edits:
        if e.applies_to(channel):
            for key in dict.fromkeys(e.band_keys(spec)):
                if key in chains:
                    chains[key].append(e)
    return {key: tuple(v) for key, v in chains.items()}
