"""The goals a burn flown as a finite burn (``burns finite``) meets, and those it misses."""

from __future__ import annotations

import numpy as np

from ..check import Checker, Finding, rule
from ..state import cross, elements_from_state, norm

# Within these a finite burn meets a goal: the tolerances an expectation takes by default.
KM, ECC, ANGLE = 1.0, 1e-4, np.radians(0.01)


def _angle(a, b) -> float:
    return float(np.arctan2(norm(cross(a, b))[0], np.sum(a * b, axis=-1)[0]))


def misses(row, mu: float, radius: float) -> list[str]:
    """The goals of ``row``'s burn that its finite burn misses, each worded with the goal
    (as the impulsive burn reaches it) and the value the finite burn ends with."""
    spec = row.spec
    if spec is None or spec.vector is not None:
        return []
    r0, v0 = row.r_impulse[:1], row.v_impulsive[:1]
    r1, v1 = row.after.r[:1], row.after.v[:1]
    want, got = elements_from_state(r0, v0, mu), elements_from_state(r1, v1, mu)
    out = []

    def length(word, a, b, alt=True):
        a, b = float(a[0]), float(b[0])
        if not (np.isfinite(a) and np.isfinite(b) and abs(a - b) <= KM):
            shown = lambda x: ("infinity (open)" if not np.isfinite(x) else
                               f"{x - radius if alt else x:.3f} km")
            out.append(f"{word} {shown(b)} (goal {shown(a)})")

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
    if spec.ecc is not None and abs(float(want.ecc[0] - got.ecc[0])) > ECC:
        out.append(f"eccentricity {float(got.ecc[0]):.6f} (goal {float(want.ecc[0]):.6f})")
    if spec.argp is not None:
        turn = abs(float(np.mod(got.argp[0] - want.argp[0] + np.pi, 2 * np.pi) - np.pi))
        if turn > ANGLE:
            out.append(f"argument of periapsis {np.degrees(float(got.argp[0])):.4f} deg "
                       f"(goal {np.degrees(float(want.argp[0])):.4f} deg)")
    h_before = cross(r0, row.v_before[:1])
    h_want, h_got = cross(r0, v0), cross(r1, v1)
    if _angle(h_before, h_want) > 1e-9 and _angle(h_want, h_got) > ANGLE:
        out.append(f"a plane {np.degrees(_angle(h_want, h_got)):.4f} deg from the goal's "
                   f"(inclination {np.degrees(float(got.inclination[0])):.4f} deg, goal "
                   f"{np.degrees(float(want.inclination[0])):.4f} deg)")
    return out


@rule("finite-burn")
def finite_burn(c: Checker) -> list[Finding]:
    """A burn flown as a finite burn that misses one of its goals.

    With `burns finite` every burn is flown at its engine's thrust, centred on the
    impulse point, and its length is set to meet one goal exactly: the apsis it names,
    the orbital energy of the orbit its shape goals name, or the turn of its plane or
    apse line.  A burn held along the velocity (or fixed in space) has no other freedom,
    so the other goals of the burn come out near, not on, what they name: a finite
    circularisation leaves some eccentricity.  The rule reports each goal missed by more
    than an expectation's default tolerance (1 km, 0.0001 in eccentricity, 0.01 deg) as
    an error, with the value reached, so a plan never reports an orbit that misses a
    named goal as if it met it.  Split the goals: this burn the one its length meets, a
    short trim burn after it the rest.
    """
    mu, radius = c.program.body.gm, c.program.body.radius
    out = []
    for row in c.result.rows:
        if row.kind != "burn" or row.dv_impulsive is None:
            continue
        missed = misses(row, mu, radius)
        if not missed:
            continue
        out.append(Finding(
            "finite-burn", "error", (row.name,),
            f"{row.name}, flown as a finite burn ({float(row.finite_time[0]):.0f} s over "
            f"{np.degrees(float(row.finite_arc[0])):.1f} deg, {c.program.steering} steering), "
            f"meets its {row.finite_goal} but ends with " + "; ".join(missed)
            + ": a burn held at one angle meets one goal by its length; give this burn "
            f"only its {row.finite_goal} goal and a burn after it the rest (a trim), or price "
            "the plan's burns impulsive (`burns impulsive`)"))
    return out
