"""The goals a burn flown as a finite burn (``burns finite``) meets, and those it misses."""

from __future__ import annotations

import numpy as np

from ..check import Checker, Finding, rule
from ..finite_price import goal_checks


def misses(row, mu: float, radius: float) -> list[str]:
    """The goals of ``row``'s burn (batch element 0) its finite burn misses, worded."""
    return [word(0) for mask, word in goal_checks(row, mu, radius) if mask[0]]


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
    out = []
    for row in c.result.rows:
        if row.kind != "burn" or row.dv_impulsive is None:
            continue
        body = c.body_at(row.step)  # a plan with legs: the body this burn flies around
        missed = misses(row, body.gm, body.radius)
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
