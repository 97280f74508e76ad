"""Phasing: leave an orbit and come back to the same point, ahead of (or behind) where the
craft would have been, after N revolutions of a phasing orbit.

``transfer NAME: phase ANGLE in N rev`` is two burns at one point P.  The angle is the
true anomaly of the original orbit, counted from P: the craft comes back to P at the
moment a companion that flew ANGLE ahead of it at the first burn (or behind, for a
negative angle) arrives there.  The time it gains is the companion's lead along the
original orbit, tau = t(P -> P + ANGLE) from Kepler's equation (``kepler.time_of_flight``;
for a negative angle tau = t(P -> P + 360 deg + ANGLE) - T, a loss), and the phasing
orbit's period T' follows from N T' = N T - tau.  On a circular orbit that is the
textbook rule T' = T - (ANGLE / 360 deg) T / N.

Both burns keep the direction of flight: the first sets the speed at P that gives the
period T' by vis-viva, v'^2 = mu (2 / r - 1 / a'), a' = (mu (T' / 2 pi)^2)^(1/3) (the
tangential burn is the cheapest way to a given energy), and the second, N T' later at P,
restores the original velocity exactly.  Arriving ahead takes a smaller, faster orbit
whose periapsis may dip under the surface: that is refused with the fewest revolutions
that clear it.  Along a fixed direction the periapsis rises with the speed, so the
lowest orbit allowed is the one with its periapsis on the surface, from the tangential
burn's formula v^2 = 2 mu Rb (r - Rb) / (r (r^2 cos^2 gamma - Rb^2)); its period T_min
gives N >= tau / (T - T_min).  Arriving behind takes a larger orbit, which always clears
the surface (and is always closed: T' < 2 T).

>>> import numpy as np
>>> from .solvers import Failures
>>> mu = 398600.0
>>> r = np.array([[42164.0, 0, 0]]); v = np.array([[0, np.sqrt(mu / 42164.0), 0]])
>>> fails = Failures(1)
>>> v2, period = phasing_velocity(r, v, mu, np.radians(-12.0), 3, 6378.0, fails, "shift")
>>> round(float(2 * (np.linalg.norm(v2) - np.linalg.norm(v)) * 1000), 2)   # m/s, both burns
22.53
"""

from __future__ import annotations

import numpy as np

from . import kepler
from .evaluate import Batch, BurnOutcome, Context, Row, _engine, _price, goto
from .solvers import Failures
from .state import TWO_PI, cross, elements_from_state, norm, unit
from .steps import Transfer


def phasing_velocity(r, v, mu: float, angle: float, revs: int, body_radius: float,
                     fails: Failures, what: str):
    """Velocity after the first burn at (r, v) and the phasing orbit's period (s).

    Elements that cannot be flown (an open orbit, a phasing orbit under the surface) are
    added to ``fails`` and keep their velocity.
    """
    el = elements_from_state(r, v, mu)
    fails.add(~el.closed, lambda i: (
        (f"a phasing transfer comes back to a closed orbit; this one is open (eccentricity "
         f"{el.ecc[i]:.6f})"), "capture first, then phase"))
    closed = el.closed
    period = np.where(closed, el.period, 1.0)
    ahead, _ = kepler.time_of_flight(r, v, mu, np.full(r.shape[0], np.mod(angle, TWO_PI)))
    # the time the craft gains on its orbit (``angle`` may be an array over the batch)
    lead = ahead - np.where(np.asarray(angle) < 0, period, 0.0)
    new_period = period - lead / revs
    a_new = (mu * (new_period / TWO_PI) ** 2) ** (1.0 / 3.0)
    rmag, speed = norm(r), norm(v)
    speed2 = mu * (2.0 / rmag - 1.0 / a_new)
    # the lowest phasing orbit the surface allows, along this direction of flight
    cos2 = (norm(cross(r, v)) / (rmag * speed)) ** 2
    Rb = body_radius
    with np.errstate(divide="ignore", invalid="ignore"):
        room = rmag**2 * cos2 - Rb**2
        v_min2 = 2.0 * mu * Rb * (rmag - Rb) / (rmag * np.where(room > 0, room, 1.0))
        a_min = 1.0 / (2.0 / rmag - v_min2 / mu)
        t_min = np.where((room > 0) & (a_min > 0), TWO_PI * np.sqrt(np.abs(a_min) ** 3 / mu),
                         period)
        spare = period - t_min
        need = np.where(lead > 0, np.floor(lead / np.where(spare > 0, spare, 1.0)) + 1, 1.0)
        need = np.where((lead > 0) & ~(spare > 0), np.inf, need)
        x = speed2 * rmag / mu
        rp = rmag * x * cos2 / (1.0 + np.sqrt(np.maximum(1.0 - 2.0 * x * cos2 + x * x * cos2,
                                                         0.0)))
    low = closed & (lead > 0) & (new_period < t_min)
    degs = np.broadcast_to(np.degrees(angle), period.shape)

    def under(i: int) -> tuple[str, str]:
        deg = float(degs[i])
        asked = f"`phase {deg:g} deg in {revs} rev`"
        if speed2[i] > 0:
            why = (f"its periapsis falls to {rp[i] - Rb:.3f} km altitude, under the surface "
                   f"(the body's radius is {Rb:.3f} km)")
        else:
            why = "no orbit through this point has so short a period"
        fewest = (f"the fewest revolutions that clear the surface: `phase {deg:g} deg in "
                  f"{int(need[i])} rev`" if np.isfinite(need[i]) else
                  "no number of revolutions clears the surface from this point")
        return ((f"{what}: {asked} needs a phasing orbit of period {new_period[i]:.3f} s "
                f"(the orbit's is {period[i]:.3f} s); {why}"),
                (f"{fewest}; or arrive {360 - deg:g} deg behind instead (`phase "
                f"{deg - 360:g} deg in {revs} rev`, a larger orbit)"))

    fails.add(low, under)
    good = fails.ok
    v_new = unit(v) * np.sqrt(np.maximum(speed2, 0.0))[:, None]
    v_new = np.where(good[:, None], v_new, v)
    return v_new, np.where(good, new_period, 0.0)


def phasing_rows(step: Transfer, index: int, batch: Batch, ctx: Context, fails: Failures):
    """The two burns of a phasing transfer, priced; (batch after, rows)."""
    r0, v0, coast = goto(step.place, batch.r, batch.v, ctx.mu, fails, radius=ctx.radius)
    v1, period = phasing_velocity(r0, v0, ctx.mu, step.phase, step.revs, ctx.radius, fails,
                                  step.name)
    engine, margin = _engine(step, ctx), step.margin
    rows = []
    legs = ((f"{step.name}/1", BurnOutcome(r0, v0, v1, coast, fails, step.place.label())),
            (f"{step.name}/2", BurnOutcome(r0, v1, v0, step.revs * period, fails,
                                           f"after {step.revs} rev")))
    for name, out in legs:
        new, vec, dv, dvm, prop, bt, covered = _price(batch, out, engine, margin, ctx, fails,
                                                      name)
        rows.append(Row(index, name, "burn", out.at, new, vec, dv, dvm, prop, bt, out.coast,
                        out.coast, engine, margin, v_before=out.v_before, covered=covered))
        batch = new
    return batch, rows
