"""From a recipe to what must be computed: pure functions of chains (no arrays).

A band's *chain* is the tuple of edits that apply to it, in recipe order.
When the chains change, each changed band gets a plan: nothing to do, a gain
change (a multiple of a cached time component), a window of coefficients
(local synthesis), or a whole band.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from scalesieve.core import edits as ed
from scalesieve.core import transforms as tf


@dataclass
class Plan:
    """How one band gets from its old chain to its new one."""

    kind: str                        # "none", "gain", "window", "band"
    key: object
    old: tuple
    new: tuple
    shape: tuple = ()                # "gain": the chain part the gain multiplies
    factor: float = 0.0              # "gain": new gain - old gain
    window: tuple[int, int] = (0, 0)  # "window": coefficient indices k0, k1


chains_for = ed.chains_for  # every band's chain of edits (core.edits)


def syntheses(plans: list[Plan], kind: str) -> int:
    """How many of these plans synthesise a whole band (gain changes not counted)."""
    local = kind in tf.LOCAL_KINDS     # the SWT has no local synthesis
    return sum(p.kind == "band" or (p.kind == "window" and not local) for p in plans)


def plans_for(changed: list, plan: Callable[[object, tuple], Plan], kind: str) -> list | None:
    """Plans for the changed ``(key, chain)`` bands, or None as soon as two need a synthesis.

    Two syntheses or more cost more than one inverse transform of everything.
    Gain changes are counted after, by the components they would share.
    """
    plans: list[Plan] = []
    for key, chain in changed:
        plans.append(plan(key, chain))
        if syntheses(plans[-1:], kind) and syntheses(plans, kind) >= 2:
            return None
    return plans


def gain_groups(plans: list[Plan]) -> dict:
    """Gain plans that move by the same factor share one component."""
    by_factor: dict = {}
    for p in plans:
        if p.kind == "gain":
            by_factor.setdefault(p.factor, []).append((p.key, p.shape))
    return {tuple(sorted(m, key=lambda ks: str(ks[0]))): f for f, m in by_factor.items()}


def plan_band(key, old: tuple, chain: tuple, ctx: ed.BandContext,
              lams: Callable[[tuple], tuple]) -> Plan:
    """Cheapest way from a band's chain ``old`` to ``chain`` (nothing is computed yet).

    ``lams(chain)`` gives the thresholds a chain uses on the band.
    """
    shape_old, gain_old = ed.split_gain(old, ctx)
    shape_new, gain_new = ed.split_gain(chain, ctx)
    if shape_old == shape_new:
        if gain_new == gain_old:
            return Plan("none", key, old, chain)
        return Plan("gain", key, old, chain, shape=shape_new, factor=gain_new - gain_old)
    window = changed_window(old, chain, ctx, lams)
    if window is not None:
        kind = "window" if window[1] > window[0] else "none"
        return Plan(kind, key, old, chain, window=window)
    return Plan("band", key, old, chain)


def changed_window(old_chain: tuple, chain: tuple, ctx: ed.BandContext,
                   lams: Callable[[tuple], tuple]):
    """Coefficient window when the chains differ by one region edit and nothing else.

    Outside the region both chains give the same values when their
    thresholds are the same numbers (always so for universal, minimax
    and manual ones; BayesShrink and SURE after the region see it).
    """
    p = 0
    while p < min(len(old_chain), len(chain)) and old_chain[p] == chain[p]:
        p += 1
    s = 0
    while (s < min(len(old_chain), len(chain)) - p
           and old_chain[len(old_chain) - 1 - s] == chain[len(chain) - 1 - s]):
        s += 1
    mid_old = old_chain[p:len(old_chain) - s]
    mid_new = chain[p:len(chain) - s]
    if len(mid_old) > 1 or len(mid_new) > 1 or not (mid_old or mid_new):
        return None
    if any(e.op != "region" for e in mid_old + mid_new):
        return None
    if lams(old_chain) != lams(chain):
        return None
    sls = [sl for sl in (ed.region_slice(e, ctx) for e in mid_old + mid_new)
           if sl.stop > sl.start]
    if not sls:
        return 0, 0
    return min(sl.start for sl in sls), max(sl.stop for sl in sls)
