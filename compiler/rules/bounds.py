"""Closed-form bounds that let a rule skip candidates before any pricing.

Each function bounds, from the stored chain alone, what a rewrite could at best save or
what it must at least cost; a rule prices a candidate only when the bound leaves room
for a saving above ``--min-saving``.  The bounds are conservative (vis-viva and the
triangle inequality, no approximation), so a pruned candidate could never have been
reported; ``tests/test_check_bounds.py`` checks each against real prices.

>>> mu, r = 398600.4418, 7000.0
>>> v = (mu / r) ** 0.5
>>> detour_lower_bound(mu, r, v, np.radians(60.0), 1.1 * r, 100 * r) < v   # can pay
True
>>> detour_lower_bound(mu, r, v, np.radians(1.0), 1.1 * r, 100 * r) > 0.04 * v
True
"""

from __future__ import annotations

import numpy as np

from ..state import cross

BI_ELLIPTIC_RATIO = 11.9387654  # final/initial radius below which bi-elliptic never pays
GRID = 400  # intervals of the apoapsis range the detour bound is taken over


def detour_lower_bound(mu: float, r: float, v: float, theta: float, ra_lo: float,
                       ra_hi: float) -> float:
    """Least delta-v (km/s) any raise-turn-lower detour from radius ``r`` and speed ``v``
    through an apoapsis in [ra_lo, ra_hi] can cost to turn the plane by ``theta`` rad and
    come back to the same orbit.

    The raise from speed v to the periapsis speed v_p of the detour costs at least
    |v_p - v|; the turn at apoapsis, where the position lies on the line of nodes and the
    velocity v_a is horizontal, at least v_a sin(theta); what the turn changes in speed
    comes back at most one for one at r (d v_r / d v_a = v_a / v_r <= 1), so the raise
    and the lowering together cost at least 2 |v_p - v| less what the turn already
    paid.  Together: max(2 |v_p - v|, |v_p - v| + v_a sin(theta)), taken as a lower bound
    over each interval of a geometric grid of apoapsis radii (v_p grows, v_a falls with
    the apoapsis), so the minimum over the range is never over-estimated.
    """
    if not ra_hi > ra_lo:
        return np.inf
    edges = np.geomspace(ra_lo, ra_hi, GRID + 1)
    vp = np.sqrt(2.0 * mu * edges / (r * (r + edges)))
    va = np.sqrt(2.0 * mu * r / (edges * (r + edges)))
    lo_vp, hi_vp = vp[:-1], vp[1:]
    gap = np.where(v < lo_vp, lo_vp - v, np.where(v > hi_vp, v - hi_vp, 0.0))
    turn = va[1:] * abs(np.sin(theta))
    return float(np.min(np.maximum(2.0 * gap, gap + turn)))


def bi_elliptic_lower_bound(mu: float, r0: float, v0: float, radius: float, theta: float,
                            via_lo: float, via_hi: float) -> float:
    """Least delta-v (km/s) any bi-elliptic transfer from radius ``r0`` and speed ``v0`` to
    the circle of ``radius`` through an apoapsis in [via_lo, via_hi] can cost, turning
    the plane by ``theta`` rad at that apoapsis.

    The first burn sets the periapsis speed of the first ellipse, vp1 (by vis-viva),
    from v0: at least |vp1 - v0|.  The last sets the circular speed from the periapsis
    speed of the second ellipse, vp2: at least vp2 - vc.  At the far apsis the velocity
    is horizontal before and after, and both planes contain the position, so the
    velocity after (va2, the apoapsis speed of the second ellipse) has a component
    va2 sin(theta) across the old plane the velocity before did not have: the middle
    burn costs at least that.  vp1 and vp2 grow and va2 falls with the apoapsis, so
    each is bounded over an interval of a geometric grid by its value at one end, and
    the minimum over the range is never over-estimated.
    """
    if not via_hi > via_lo:
        return np.inf
    edges = np.geomspace(via_lo, via_hi, GRID + 1)
    vp1 = np.sqrt(2.0 * mu * edges / (r0 * (r0 + edges)))
    vp2 = np.sqrt(2.0 * mu * edges / (radius * (radius + edges)))
    va2 = np.sqrt(2.0 * mu * radius / (edges * (radius + edges)))
    vc = np.sqrt(mu / radius)
    gap = np.where(v0 < vp1[:-1], vp1[:-1] - v0, np.where(v0 > vp1[1:], v0 - vp1[1:], 0.0))
    return float(np.min(gap + np.maximum(vp2[:-1] - vc, 0.0) + va2[1:] * abs(np.sin(theta))))


def plane_angle(r, v_before, v_after) -> float:
    """Angle (rad) between the orbit planes before and after a burn at ``r``."""
    h0, h1 = cross(r, v_before), cross(r, v_after)
    return float(np.arctan2(np.linalg.norm(cross(h0, h1)), np.dot(h0, h1)))


def slowest_speed(mu: float, r, v) -> float | None:
    """The least speed (km/s) on the orbit through (r, v), at apoapsis; None if open.

    It is also the least horizontal speed, h / r_apoapsis: a plane change anywhere on
    the orbit turns at least this much horizontal velocity.
    """
    h = float(np.linalg.norm(cross(r, v)))
    energy = 0.5 * float(np.dot(v, v)) - mu / float(np.linalg.norm(r))
    if energy >= 0:
        return None
    a = -mu / (2.0 * energy)
    e = np.sqrt(max(0.0, 1.0 - h * h / (mu * a)))
    return float(np.sqrt(mu * (1.0 - e) / (a * (1.0 + e))))
