"""Sizing: the least load that flies a priced plan, and the most dry mass a load flies.

The evaluator gives every burn's and allowance's delta-v (with margin) and engine, and
every drop, independent of the mass (impulsive burns: the geometry does not depend on
it).  The rocket equation then runs backwards, exactly, from the end of the plan:

* at the end the usable propellant left must give the reserve with the default engine:
  m_end = (dry_end + residual) * exp(reserve / ve0);
* before a burn of delta-v dv with exhaust speed ve: m_before = m_after * exp(dv / ve);
* before a drop of mass d: m_before = m_after + d.

So the start mass is affine in the mass that rides to the end, m0 = G (dry_end + residual)
+ sum_j d_j G_j, with G the product of every burn's exp(dv/ve) and G_j the product over
the burns before drop j.  The load is m0 - dry; a residual given as a share f of the
load makes it L = (G (dry - D) + sum d_j G_j - dry) / (1 - G f).  The same line solved
for the dry mass gives the most the present load can fly.

>>> round(size_chain([(3.0, 3.0)], drops=[], dry=100.0, reserve=0.0, ve0=3.0).load, 6)
171.828183
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .evaluate import PRICED_KINDS, Result


@dataclass(frozen=True)
class Sizing:
    """The least load that flies a plan and the most dry mass its load flies."""

    load: float | None  # kg: the least load that flies the plan (None: no load can)
    dry_max: float | None  # kg: the most dry mass the present load flies (None: any)
    why: str | None = None  # why no load can fly it


def _chain(result: Result):
    """(kind, value, ve) along the plan: ('burn', dv with margin, ve) or ('drop', kg, 0)."""
    steps = result.program.steps
    out = []
    for row in result.rows:
        if row.kind in PRICED_KINDS:
            out.append(("burn", float(row.dv_margin[0]), row.engine.exhaust_speed))
        elif row.kind == "drop":
            out.append(("drop", steps[row.step].mass, 0.0))
    return out


def size_chain(burns, drops, dry: float, reserve: float, ve0: float,
               residual_kg: float = 0.0, residual_share: float = 0.0,
               load: float | None = None) -> Sizing:
    """Size a chain of ``burns`` [(dv, ve)] with ``drops`` [(position, kg)] between them
    (a drop at position k comes before burn k)."""
    seq = []
    for k, b in enumerate(burns):
        seq += [("drop", d, 0.0) for pos, d in drops if pos == k]
        seq.append(("burn", *b))
    seq += [("drop", d, 0.0) for pos, d in drops if pos >= len(burns)]
    return _size(seq, dry, reserve, ve0, residual_kg, residual_share, load)


LOG_RATIO_MAX = 700.0  # a mass ratio past e^700 is past any load (and a float's range)


def _size(seq, dry, reserve, ve0, residual_kg, residual_share, load) -> Sizing:
    # m0 = G * (dry_end + residual) + sum(d_j * G_j), walking back from the end
    log_ratio = reserve / ve0 + sum(value / ve for kind, value, ve in seq if kind == "burn")
    if log_ratio > LOG_RATIO_MAX:
        return Sizing(None, None, (f"its mass ratio is e^{log_ratio:.6g} (the sum of delta-v "
                                   "over exhaust speed, reserve included), beyond any load "
                                   "of propellant; check the engines' specific impulse"))
    G = math.exp(reserve / ve0)
    tail = 0.0  # the drops' part, already multiplied by the burns after them... backwards
    dropped = 0.0
    for kind, value, ve in reversed(seq):
        if kind == "burn":
            factor = math.exp(value / ve)
            G *= factor
            tail *= factor
        else:
            tail += value
            dropped += value
    dry_end = dry - dropped
    denominator = 1.0 - G * residual_share
    if denominator <= 0.0:
        return Sizing(None, None, (f"a residual of {residual_share * 100:g} % of the load is "
                                   f"more than the plan's mass ratio {G:.6g} allows (at most "
                                   f"{100 / G:.4g} %): every kilogram added strands more "
                                   "than it gives"))
    need = (G * (dry_end + residual_kg) + tail - dry) / denominator
    dry_max = None
    if load is not None and G > 1.0:
        residual = residual_kg + residual_share * load
        # dry + load = G (dry - D + residual) + tail  ->  dry (G - 1) = load + G (D - residual) - tail
        dry_max = (load + G * (dropped - residual) - tail) / (G - 1.0)
    return Sizing(max(need, 0.0), dry_max)


def size(result: Result) -> Sizing:
    """The sizing of a priced plan (with its margins, reserve and residual)."""
    p = result.program
    craft = p.craft
    sizing = _size(_chain(result), craft.dry, p.reserve, craft.default_engine.exhaust_speed,
                   craft.residual_kg, craft.residual_share, craft.propellant)
    if p.burns == "finite" and not craft.components:
        known = result.__dict__.get("_finite_sizing")  # `size` and its budget ask twice
        sizing = known if known is not None else _finite(result, sizing)
        result.__dict__["_finite_sizing"] = sizing
    return sizing


FINITE_ROUNDS = 8  # fixed-point rounds for a plan of finite burns (each prices the plan)


def _finite(result: Result, sizing: Sizing) -> Sizing:
    """A plan of finite burns sized at the load (and the dry mass) it is sized for.

    A finite burn's delta-v depends on the mass (a heavier craft loses more), so the
    backward pass over the delta-v priced at the plan's own load is exact only for that
    load.  Priced again at the load found, and again, the load converges (each round
    changes it by the loss's small sensitivity to the mass) to the load that flies the
    plan exactly; the most dry mass likewise.
    """
    from dataclasses import replace

    from .evaluate import run

    p, craft = result.program, result.program.craft

    def settle(start, value, at, read):
        """The fixed point x = f(x) of f (the plan priced at ``at(x)``, sized by ``read``)
        from f(start) = value, by secant steps on f(x) - x (f is nearly a constant)."""
        if value is None:  # nothing to settle (no burn: any dry mass flies the plan)
            return value
        before, was = start, value - start  # the last point and its f(x) - x
        for _ in range(FINITE_ROUNDS):
            if value is None or value <= 0:
                return value
            again = run(replace(p, craft=at(value)))
            if not again.ok:
                return value
            c = again.program.craft
            new = read(_size(_chain(again), c.dry, p.reserve,
                             c.default_engine.exhaust_speed, c.residual_kg,
                             c.residual_share, craft.propellant))
            if new is None or abs(new - value) <= 1e-9 * value + 1e-7:
                return new
            gap = new - value
            step = gap * (value - before) / (gap - was) if gap != was else gap
            before, was, value = value, gap, value - step
        return value

    load = settle(craft.propellant, sizing.load, lambda x: replace(craft, propellant=x),
                  lambda s: s.load)
    dry_max = settle(craft.dry, sizing.dry_max, lambda x: replace(craft, dry=x),
                     lambda s: s.dry_max)
    return Sizing(load, dry_max, sizing.why)
