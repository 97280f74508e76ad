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
from .state import cross, dot, elements_from_state, local_frame, norm
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
        ("price this plan's burns impulsive (`burns impulsive`), split the burn into "
        "burns of a fraction of a revolution each, or aim an apsis a little short of "
        "this point's altitude and trim after it")))
    fails.add(~fb.ok & ~fb.too_long & fails.ok, lambda i: (
        (f"flown as a finite burn of {engine.thrust:g} N ({ctx.steering} steering) it "
         f"cannot reach its {goal} at any length, up to burning the craft's whole mass of "
         f"{batch.mass[i]:.3f} kg: a finite burn spreads over an arc, and an apsis at the "
         "impulse point's own radius (a circle made there) is out of its reach"),
        ("aim the apsis a little short of this point's altitude and trim after it, or price "
        "this plan's burns impulsive (`burns impulsive`)")))
    ok = fails.ok
    dv = np.where(ok, fb.dv, dv_imp)
    dvm = dv * (1.0 + margin)
    need, covered, burn_time = _propellant(batch, dvm, engine)
    along, normal, radial = local_frame(out.r, out.v_before)  # as an impulsive burn's
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
    extra = {"dv_impulsive": dv_imp, "finite_time": length,
                 "finite_arc": np.where(ok, fb.arc, 0.0), "v_impulsive": out.v_after, "r_impulse": out.r,
                 "finite_goal": goal, "spec": step}
    return new, vec, dv, dvm, need, burn_time, covered, extra


# Within these a finite burn meets a goal: the tolerances an expectation takes by default.
KM, ECC, ANGLE = 1.0, 1e-4, np.radians(0.01)


def _angle(a, b):
    return np.arctan2(norm(cross(a, b)), dot(a, b))


def goal_checks(row, mu: float, radius: float) -> list:
    """The goals of a finite burn's ``row`` checked on the orbit at the end of its arc
    against the orbit the impulsive burn reaches: [(missed, word)], ``missed`` over the
    batch and ``word(i)`` the goal, its value and the value reached for element i."""
    spec = row.spec
    if spec is None or spec.vector is not None or row.dv_impulsive is None:
        return []
    r0, v0, r1, v1 = row.r_impulse, row.v_impulsive, row.after.r, row.after.v
    want, got = elements_from_state(r0, v0, mu), elements_from_state(r1, v1, mu)
    out = []

    def length(word, a, b, alt=True):
        shown = lambda x: ("infinity (open)" if not np.isfinite(x) else
                           f"{x - radius if alt else x:.3f} km")
        with np.errstate(invalid="ignore"):
            miss = ~(np.isfinite(a) & np.isfinite(b) & (np.abs(a - b) <= KM))
        out.append((miss, lambda i: f"{word} {shown(b[i])} (goal {shown(a[i])})"))

    # a plane change or an apse-line turn alone keeps the size and shape (both apsides)
    keeps = not (spec.circular or spec.periapsis is not None or spec.apoapsis is not None
                 or spec.energy is not None or spec.ecc is not None)
    apsides = ["periapsis", "apoapsis"] if spec.circular or keeps else [] \
        if spec.apsis_here else \
        [w for w in ("periapsis", "apoapsis") if getattr(spec, w) is not None]
    for word in apsides:
        length(word, getattr(want, word), getattr(got, word))
    if spec.energy is not None:
        length("sma", want.sma, got.sma, alt=False)
    if spec.ecc is not None:
        out.append((np.abs(want.ecc - got.ecc) > ECC, lambda i: (
            f"eccentricity {got.ecc[i]:.6f} (goal {want.ecc[i]:.6f})")))
    if spec.argp is not None:
        turn = np.abs(np.mod(got.argp - want.argp + np.pi, 2 * np.pi) - np.pi)
        out.append((turn > ANGLE, lambda i: (
            f"argument of periapsis {np.degrees(got.argp[i]):.4f} deg (goal "
            f"{np.degrees(want.argp[i]):.4f} deg)")))
    h_want, h_got = cross(r0, v0), cross(r1, v1)
    off = _angle(h_want, h_got)
    turned = _angle(cross(r0, row.v_before), h_want) > 1e-9
    out.append((turned & (off > ANGLE), lambda i: (
        f"a plane {np.degrees(off[i]):.4f} deg from the goal's (inclination "
        f"{np.degrees(got.inclination[i]):.4f} deg, goal "
        f"{np.degrees(want.inclination[i]):.4f} deg)")))
    return out


def goals_met(row, mu: float, radius: float) -> np.ndarray | None:
    """Where a finite burn's ``row`` meets every goal (None for a burn not priced
    finite): what a batch caller (``sweep``) counts a variant by."""
    if row.dv_impulsive is None:
        return None
    met = np.ones(row.after.r.shape[0], dtype=bool)
    for missed, _ in goal_checks(row, mu, radius):
        met &= ~missed
    return met
