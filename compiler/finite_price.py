"""Pricing a burn as a finite burn (``burns finite``): the evaluator's side of
compiler/finite.py.

The impulsive burn is solved first (where, which way, how far); ``price_finite`` then
flies it as a finite burn of the engine's thrust centred on the impulse point, and prices
the propellant of the delta-v the engine really gives.  The chain goes on from the end of
the thrust arc, half the burn after the impulse point's time.
"""

from __future__ import annotations

import numpy as np

from . import finite
from .solvers import Failures
from .state import norm
from .steps import Burn, EngineSpec

# What a burn's length is set to meet, by its goals (the rest are checked on the end
# orbit by the `finite-burn` rule): the named apsis, the energy of the orbit its shape
# goals name, the turn of its plane or of its apse line; components spend their delta-v.
GOAL_WORDS = {"apoapsis": "apoapsis", "periapsis": "periapsis", "energy": "energy",
              "ecc": "eccentricity",
              "turn": "plane", "apse": "apse line", None: "delta-v"}


def governing(step: Burn) -> str | None:
    """The scalar the length of ``step``'s finite burn meets (``finite.governing_value``)."""
    if step.vector is not None:
        return None
    if step.one_apsis or (step.apsis_here and not step.circular):
        return "apoapsis" if step.apoapsis is not None else "periapsis"
    shape = step.circular or step.periapsis is not None or step.apoapsis is not None \
        or step.energy is not None
    if step.ecc is not None and not shape and step.argp is None:
        return "ecc"
    if shape or step.ecc is not None:
        return "energy"
    if step.argp is not None:
        return "apse"
    if step.changes_plane:
        return "turn"
    return None


def price_finite(batch, out, engine: EngineSpec, margin: float, ctx, fails: Failures,
                 name: str, step: Burn):
    """The parts of ``evaluate._price`` for ``step`` flown as a finite burn, and the row's
    finite fields."""
    from .evaluate import Batch, _check_surface, _propellant  # no cycle at import time

    kind = governing(step)
    fb = finite.fly(out.r, out.v_before, out.v_after, batch.mass, engine.thrust,
                    engine.exhaust_speed, ctx.mu, ctx.steering, kind)
    dv_imp = norm(out.v_after - out.v_before)
    goal = GOAL_WORDS[kind]
    fails.add(fb.too_long & fails.ok, lambda i: (
        (f"flown as a finite burn of {engine.thrust:g} N ({ctx.steering} steering) it "
         f"cannot reach its {goal} within {finite.MAX_ARC_DEG:.0f} deg of thrust arc "
         f"({fb.length[i]:.0f} s): a low-thrust spiral, which a burn held at one angle "
         "does not price, or a goal out of a finite burn's reach (an apsis at the impulse "
         "point's own radius, a circle made there)"),
        "price this plan's burns impulsive (`burns impulsive`), split the burn into "
        "burns of a fraction of a revolution each, or aim an apsis a little short of "
        "this point's altitude and trim after it"))
    fails.add(~fb.ok & ~fb.too_long & fails.ok, lambda i: (
        (f"flown as a finite burn of {engine.thrust:g} N ({ctx.steering} steering) it "
         f"cannot reach its {goal} at any length, up to burning the craft's whole mass of "
         f"{batch.mass[i]:.3f} kg: a finite burn spreads over an arc, and an apsis at the "
         "impulse point's own radius (a circle made there) is out of its reach"),
        "aim the apsis a little short of this point's altitude and trim after it, or price "
        "this plan's burns impulsive (`burns impulsive`)"))
    ok = fails.ok
    dv = np.where(ok, fb.dv, dv_imp)
    dvm = dv * (1.0 + margin)
    need, covered, burn_time = _propellant(batch, dvm, engine)
    along, normal, radial = finite.vnb(out.r, out.v_before)
    dv_inertial = out.v_after - out.v_before
    scale = np.where(dv_imp > 0, dv / np.where(dv_imp > 0, dv_imp, 1.0), 0.0)
    vec = np.stack([np.einsum("ij,ij->i", dv_inertial, ax) for ax in (along, normal, radial)],
                   axis=-1) * scale[:, None]
    r_end = np.where(ok[:, None], fb.r_end, out.r)
    v_end = np.where(ok[:, None], fb.v_end, out.v_before)
    _check_surface(r_end, v_end, ctx, fails, name)
    length = np.where(ok, fb.length, 0.0)
    new = Batch(r=r_end, v=v_end, mass=batch.mass - need, propellant=batch.propellant - need,
                t=batch.t + out.coast + 0.5 * length, dv=batch.dv + dv,
                dv_margin=batch.dv_margin + dvm, expect_ok=batch.expect_ok)
    extra = dict(dv_impulsive=dv_imp, finite_time=length,
                 finite_arc=np.where(ok, fb.arc, 0.0), v_impulsive=out.v_after, r_impulse=out.r,
                 finite_goal=goal, spec=step)
    return new, vec, dv, dvm, need, burn_time, covered, extra
