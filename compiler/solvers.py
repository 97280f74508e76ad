"""Manoeuvre solvers: from a burn's goals to the new velocity at the current position.

A burn is impulsive: the position stays, the velocity jumps.  The goals fix the new
velocity in two independent parts:

* the **plane** (``inclination to``, ``raan to``) fixes the new orbit normal, which must
  contain the current position: the velocity turns about the radius vector.
* the **shape** (``apoapsis to``, ``periapsis to``, ``circular``) fixes the radial and
  transverse speed in that plane.  With both apsides given the new conic is fully known
  and must pass through the current radius.  With one apsis given the other is free, and
  the burn is the minimum-delta-v one that puts that apsis where it is asked: the nearest
  point, in the (radial, transverse) speed plane, of the curve of velocities whose conic
  has that apsis (``nearest_apsis_speeds``).  ``tangential`` keeps the flight-path angle
  instead, the classic tangential burn (the same burn at an apsis, dearer elsewhere).

Without a shape goal the radial and transverse speeds are kept, so a plane-only burn at
a node is the pure rotation with delta-v = 2 v sin(di / 2): the orbit keeps its size and
shape (the cheapest burn to the plane alone would also shrink the orbit; nobody means that).

>>> import numpy as np
>>> mu = 398600.4418
>>> r = np.array([[7000.0, 0, 0]]); v = np.array([[0, np.sqrt(mu / 7000), 0]])
>>> ok = Failures(1)
>>> v2 = new_velocity(r, v, mu, Shape(apoapsis=np.array([42164.0])), None, ok)
>>> round(float(np.linalg.norm(v2 - v) * 1000), 1)    # first burn of a Hohmann transfer
2336.8
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .state import (
    EQUATORIAL_RAD,
    TWO_PI,
    cross,
    dot,
    elements_from_state,
    frame,
    norm,
    plane_normal,
    signed_angle,
    unit,
)

RADIUS_TOL = 1e-9  # relative: a target this close to the current radius is "here"
APSIS_SPEED_TOL = 1e-9  # share of the speed: a radial speed this small is flight at an apsis


def outward(vr0, speed):
    """Which way along the radius the craft is moving, as -1.0 (inward) or 1.0.

    A radial speed within ``APSIS_SPEED_TOL`` of the speed is flight at an apsis (a point
    within the place tolerance of one, or anywhere on a circular orbit) and counts as
    outward: a burn whose new orbit has no apsis here then leaves the craft just past
    that orbit's periapsis, on its way out.  The two sides cost the same; the sign of a
    rounding error must never pick one, or the same step turns the apse line one way
    when it is priced alone and the other way in a batch.

    >>> outward(np.array([-1e-13, 1e-13, -0.5, 0.0]), np.array([7.5, 7.5, 7.5, 7.5]))
    array([ 1.,  1., -1.,  1.])
    """
    return np.where(vr0 < -APSIS_SPEED_TOL * speed, -1.0, 1.0)


class Failures:
    """Which batch elements can no longer be flown, and why (worded on demand).

    ``code`` sorts failures for callers that act on the kind; today every failure is
    geometry (``infeasible``): running out of propellant is not a failure, the chain
    prices on and marks the burns the load no longer covers.
    """

    def __init__(self, n: int):
        self.ok = np.ones(n, dtype=bool)
        self._why: list[tuple[np.ndarray, Callable[[int], tuple[str, str | None]], str]] = []

    def add(self, mask: np.ndarray, why: Callable[[int], tuple[str, str | None]],
            code: str = "infeasible") -> None:
        """Mark ``mask`` failed; ``why(i)`` gives (message, hint) for element ``i``."""
        new = np.asarray(mask, dtype=bool) & self.ok
        if new.any():
            self._why.append((new, why, code))
            self.ok &= ~new

    def merge(self, mask: np.ndarray, other: Failures) -> None:
        """Take over ``other``'s failures where ``mask``, with their reasons and codes."""
        for m, why, code in other._why:
            self.add(mask & m, why, code)

    def reason(self, i: int) -> tuple[str, str | None]:
        for mask, why, _ in self._why:
            if mask[i]:
                return why(i)
        return ("cannot be flown", None)

    def code(self, i: int) -> str | None:
        for mask, _, code in self._why:
            if mask[i]:
                return code
        return None


@dataclass(frozen=True)
class Shape:
    """Target apsis radii (km); arrays over the batch or None."""

    periapsis: np.ndarray | None = None
    apoapsis: np.ndarray | None = None
    tangential: bool = False  # one apsis: keep the flight-path angle, not the least delta-v


def _fmt_km(x: float) -> str:
    return f"{x:.3f} km"


def in_plane_speeds(rmag, vr0, vt0, vt_in_plane, mu, shape: Shape, body_radius: float,
                    failures: Failures):
    """Radial and transverse speed after the burn; kept as they are without shape goals.

    ``vt0`` is the current transverse speed and ``vt_in_plane`` its component along the
    new plane's transverse direction (the same without a plane change).
    """
    if shape.periapsis is None and shape.apoapsis is None:
        return vr0, vt0
    side = outward(vr0, np.hypot(vr0, vt0))
    alt = lambda x: x - body_radius
    tol = RADIUS_TOL * rmag
    if shape.periapsis is not None and shape.apoapsis is not None:
        rp = np.asarray(shape.periapsis, dtype=float) * np.ones_like(rmag)
        ra = np.asarray(shape.apoapsis, dtype=float) * np.ones_like(rmag)
        bad = rp > ra + tol
        failures.add(bad, lambda i: (
            f"periapsis {_fmt_km(alt(rp[i]))} is above apoapsis {_fmt_km(alt(ra[i]))}",
            "swap the two targets"))
        _refuse_out_of_reach(failures, rmag, rp, "periapsis", alt, transfer_hint=True)
        _refuse_out_of_reach(failures, rmag, ra, "apoapsis", alt, transfer_hint=True)
        lo = np.minimum(rp, rmag)
        hi = np.maximum(ra, rmag)
        p = 2.0 * lo * hi / (lo + hi)
        vt = np.sqrt(mu * p) / rmag
        # vis-viva less the transverse part, factored so it is exactly 0 at an apsis
        vr2 = 2.0 * mu / rmag**2 * (rmag - lo) * (hi - rmag) / (lo + hi)
        return side * np.sqrt(np.maximum(vr2, 0.0)), vt
    which = "apoapsis" if shape.apoapsis is not None else "periapsis"
    R = np.asarray(getattr(shape, which), dtype=float) * np.ones_like(rmag)
    _refuse_out_of_reach(failures, rmag, R, which, alt, transfer_hint=False)
    if shape.tangential:
        return _tangential_speeds(rmag, vr0, vt_in_plane, mu, R, which, alt, failures)
    # the curve of velocities is symmetric in the radial speed: solved on the outward
    # side (where both sides are as near, at vr0 = 0, the grid may land on either), turned
    # to the craft's
    vr, vt = nearest_apsis_speeds(rmag, np.abs(vr0), vt_in_plane, mu, R, which == "periapsis")
    return side * np.abs(vr), vt


def _refuse_out_of_reach(failures, rmag, R, which, alt, transfer_hint):
    """An apsis goal on the wrong side of the current radius cannot be met by one burn."""
    tol = RADIUS_TOL * rmag
    if which == "periapsis":
        bad, side, other = R > rmag + tol, "above", "`at apoapsis`"
    else:
        bad, side, other = R < rmag - tol, "below", "`at periapsis`"
    limit = "at or below" if which == "periapsis" else "at or above"
    hint = (f"coast to a point {'at or above' if which == 'periapsis' else 'at or below'} the "
            f"target first (e.g. {other}), or use `transfer NAME: circular ...`"
            if transfer_hint else
            f"burn at a {'higher' if which == 'periapsis' else 'lower'} point (e.g. {other}), "
            f"or use `{'apoapsis' if which == 'periapsis' else 'periapsis'} to` here")
    failures.add(bad, lambda i: (
        (f"{which} {_fmt_km(alt(R[i]))} is {side} the current altitude "
         f"{_fmt_km(alt(rmag[i]))}; a burn can only put the {which} {limit} where the "
         "craft is"), hint))


def nearest_apsis_speeds(rmag, x0, y0, mu, R, periapsis: bool, points: int = 65):
    """The least-delta-v (radial, transverse) speeds at radius ``rmag`` whose conic has an
    apsis at ``R``; (x0, y0) are the current radial speed and transverse speed in the plane.

    Every velocity at ``rmag`` whose conic has its periapsis at R < r satisfies
    vr^2 = A vt^2 - B (a hyperbola in the speed plane, vt = a cosh s, vr = b sinh s) and
    every one with its apoapsis at R > r satisfies vr^2 + A vt^2 = B (an ellipse,
    vt = a cos s, vr = b sin s), with a^2 = 2 mu R / (r (r + R)) (the speed of the
    horizontal conic between r and R) and b^2 = 2 mu |r - R| / (r R).  The burn is the
    point of that curve nearest the current speeds: a grid over s finds the basin, a
    bracketed Newton iteration on the derivative of the squared distance refines it to
    rounding.  Every point of the curve meets the goal exactly, so the result does too.
    At an apsis with no plane change the nearest point is the tangential burn.

    >>> mu = 398600.4418
    >>> r = np.array([8000.0]); vc = np.sqrt(mu / 8000.0)
    >>> vr, vt = nearest_apsis_speeds(r, np.array([0.0]), np.array([vc]), mu,
    ...                               np.array([42164.0]), False)
    >>> round(float(vt[0] - vc) * 1000, 3), float(vr[0])     # the Hohmann first burn
    (2093.265, 0.0)
    """
    rmag, x0, y0, R = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                            for a in (rmag, x0, y0, R)))
    here = np.abs(R - rmag) <= RADIUS_TOL * rmag
    safe_R = np.where(here, rmag * (1 + 1e-6 if periapsis else 1 - 1e-6), R)
    safe_R = np.where(periapsis, np.minimum(safe_R, rmag * (1 - 1e-12)),
                      np.maximum(safe_R, rmag * (1 + 1e-12)))
    a = np.sqrt(2.0 * mu * safe_R / (rmag * (rmag + safe_R)))
    b = np.sqrt(2.0 * mu * np.abs(rmag - safe_R) / (rmag * safe_R))
    if periapsis:
        d0 = np.hypot(x0, a - y0)
        span = np.arcsinh((np.hypot(x0, y0) + d0) / b) + 0.5
        lo, hi = -span, span
        trig = lambda s: (np.sinh(s), np.cosh(s), np.cosh(s), np.sinh(s))
    else:
        lo = np.full_like(rmag, -np.pi / 2)
        hi = np.full_like(rmag, np.pi / 2)
        trig = lambda s: (np.sin(s), np.cos(s), np.cos(s), -np.sin(s))

    def curve(s):
        """Radial and transverse speed along the curve, and their derivatives in s."""
        sx, sy, dsx, dsy = trig(s)
        ka, kb = (a, b) if s.ndim == 1 else (a[:, None], b[:, None])
        return kb * sx, ka * sy, kb * dsx, ka * dsy

    grid = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, points)[None, :]
    gx, gy, _, _ = curve(grid)
    k = np.argmin((gx - x0[:, None]) ** 2 + (gy - y0[:, None]) ** 2, axis=1)
    rows = np.arange(rmag.shape[0])
    step = (hi - lo) / (points - 1)
    s = grid[rows, k]
    left, right = np.maximum(s - step, lo), np.minimum(s + step, hi)
    for _ in range(60):
        x, y, dx, dy = curve(s)
        ddx, ddy = (x, y) if periapsis else (-x, -y)  # second derivatives of the curve
        g = (x - x0) * dx + (y - y0) * dy  # half the derivative of the squared distance
        h = dx**2 + dy**2 + (x - x0) * ddx + (y - y0) * ddy
        left = np.where(g < 0, s, left)
        right = np.where(g > 0, s, right)
        newton = s - g / np.where(h > 0, h, 1.0)
        inside = (h > 0) & (newton > left) & (newton < right)
        s_new = np.where(inside, newton, 0.5 * (left + right))
        done = np.abs(s_new - s) <= 1e-15 * np.maximum(1.0, np.abs(s))
        s = s_new
        if done.all():
            break
    vr, vt, _, _ = curve(s)
    # an apsis here: horizontal flight, at least (periapsis) or at most (apoapsis) the
    # circular speed; the nearest such point keeps the transverse speed where it can
    vc = np.sqrt(mu / rmag)
    vt_here = np.maximum(y0, vc) if periapsis else np.clip(y0, 1e-12 * vc, vc)
    return np.where(here, 0.0, vr), np.where(here, vt_here, vt)


def _tangential_speeds(rmag, vr0, vt0, mu, R, which, alt, failures):
    """One apsis moved keeping the flight-path angle (the ``tangential`` option)."""
    tol = RADIUS_TOL * rmag
    speed0 = np.sqrt(vr0**2 + vt0**2)
    cosg = vt0 / np.where(speed0 > 0, speed0, 1.0)
    sing = vr0 / np.where(speed0 > 0, speed0, 1.0)
    here = np.abs(R - rmag) <= tol
    tilted = here & (np.abs(sing) > 1e-9)
    failures.add(tilted, lambda i: (
        (f"an apsis at the current radius needs horizontal flight, but the flight-path "
         f"angle here is {np.degrees(np.arcsin(sing[i])):.3f} deg"),
        "burn at an apsis, or leave out `tangential` to let the burn turn the velocity"))
    reach = rmag * cosg
    cant = ~here & (which == "periapsis") & (R >= reach)
    failures.add(cant, lambda i: (
        (f"periapsis {_fmt_km(alt(R[i]))} cannot be reached keeping the flight-path angle "
         f"{np.degrees(np.arcsin(sing[i])):.3f} deg; the most is {_fmt_km(alt(reach[i]))}"),
        "leave out `tangential` to let the burn turn the velocity, or burn at an apsis"))
    with np.errstate(divide="ignore", invalid="ignore"):
        speed2 = 2.0 * mu * R * (rmag - R) / (rmag * (rmag**2 * cosg**2 - R**2))
    speed = np.where(here, np.sqrt(mu / rmag), np.sqrt(np.where(speed2 > 0, speed2, 0.0)))
    failures.add(~np.isfinite(speed) | (speed <= 0), lambda i: (
        "the apsis target cannot be met from this point", "burn at an apsis"))
    speed = np.where(np.isfinite(speed), speed, speed0)
    return speed * np.where(here, 0.0, sing), speed * np.where(here, 1.0, cosg)


PLANE_TOL = 1e-7  # rad: how far off a named plane the position may be (6e-6 deg), times
                  # sin(i) for a plane near the equator, where the node is sensitive


def target_plane(r, v, inclination, raan):
    """The plane normal a burn's plane goals name, where the goals fix one plane.

    ``inclination`` and ``raan`` together name one plane; ``raan`` alone names the plane
    with that node and today's inclination (a pure node change).  ``inclination`` alone
    names a family of planes (any node), so there is no single target: None.
    """
    if raan is None:
        return None
    n = r.shape[0]
    if inclination is None:
        inclination = elements_from_state(r, v, 1.0).inclination
    return plane_normal(inclination * np.ones(n), raan * np.ones(n))


def crossings(r, v, target):
    """Sweep angles (rad, in the direction of motion) from the position to the two points
    where the current plane meets the plane with normal ``target``, nearer first.

    Where the planes coincide every point is a crossing: both angles are zero.
    """
    h0 = unit(cross(r, v))
    line = cross(h0, target)
    same = norm(line) < 1e-12
    line = unit(np.where(same[:, None], r, line))
    a1 = signed_angle(r, line, h0)
    a2 = np.mod(a1 + np.pi, TWO_PI)
    first, second = np.minimum(a1, a2), np.maximum(a1, a2)
    return np.where(same, 0.0, first), np.where(same, 0.0, second)


def normal_for(r, v, inclination, raan, failures: Failures, descending=False):
    """The orbit normal after a plane goal, containing the current position.

    ``inclination`` and/or ``raan`` are arrays (rad) or None.  With inclination alone the
    rotation about the radius vector is the smaller of the two that reach it.  Where the
    two are the same size (to ``EQUATORIAL_RAD``) the craft is put heading north in the
    new plane, or south where ``descending`` (a bool or one per element: the burn was
    placed `at descending node`).  That happens from an equatorial orbit, where every
    point is a node (north: the ascending node of the new plane), and at the highest or
    lowest latitude of an inclined orbit.  The sign of a rounding error must never pick
    the plane: the same step would reach another plane when priced in another batch.
    With
    ``raan`` (alone or with an inclination) the plane is fixed and must pass through the
    position; the error names the two places where it does.
    """
    rhat = unit(r)
    h0 = unit(cross(r, v))
    n = rhat.shape[0]
    if raan is not None:
        if inclination is None:
            inc0 = elements_from_state(r, v, 1.0).inclination
            flat = (inc0 < EQUATORIAL_RAD) | (inc0 > np.pi - EQUATORIAL_RAD)
            failures.add(flat, lambda i: (
                ("an equatorial orbit has no node line to move: `raan to` alone keeps the "
                 f"inclination ({np.degrees(inc0[i]):.4f} deg here)"),
                "give the new plane in full: `inclination to I, raan to X`"))
        target = target_plane(r, v, inclination, raan)
        inc = np.arccos(np.clip(target[:, 2], -1.0, 1.0))
        off = dot(target, rhat)
        # an error d in the normal moves the node by d / sin(i): near the equator the
        # position must be closer to the plane for the node to be met as well; never
        # closer than 1e-10 rad (0.7 mm at the Earth's radius), far above the rounding of a
        # state coasted to a node, or an equatorial plane is met or missed by rounding
        tol = np.maximum(PLANE_TOL * np.minimum(1.0, np.sin(inc)), 1e-10)
        miss = np.abs(off) > tol
        what = "" if inclination is not None else " (the inclination kept)"
        failures.add(miss, lambda i: (
            (f"the plane with inclination {np.degrees(inc[i]):.4f} deg and raan "
             f"{np.degrees(raan * np.ones(n))[i]:.4f} deg{what} does not contain the craft's "
             f"position (it is {np.degrees(np.arcsin(np.clip(off[i], -1, 1))):.6f} deg off "
             "it)"),
            _crossing_hint(r[i:i + 1], v[i:i + 1], target[i:i + 1])))
        # keep the position exactly in the plane (it is off by at most PLANE_TOL)
        return unit(target - off[:, None] * rhat)
    # The new normal lies in the plane perpendicular to r: h' = a u + b w with u the
    # unit projection of z on that plane and w = r x u (horizontal).  Its z part is
    # a |z_perp| = cos i, so a = cos i / |z_perp| and b^2 = (sin^2 i - r_z^2) / |z_perp|^2,
    # exactly zero at the edge of what is reachable; b's sign picks the smaller turn.
    ci = np.cos(inclination) * np.ones(n)
    si2 = np.sin(inclination) ** 2 * np.ones(n)
    rz = rhat[:, 2]
    zp = np.broadcast_to(np.array([0.0, 0.0, 1.0]), rhat.shape) - rz[:, None] * rhat
    zlen = norm(zp)
    lat = np.degrees(np.arcsin(np.clip(rz, -1.0, 1.0)))
    slack = si2 - rz**2
    bad = slack < -1e-12  # (rounding at the vertex, where the goal is the latitude itself)
    failures.add(bad, lambda i: (
        (f"inclination {np.degrees(np.arccos(ci[i])):.4f} deg cannot be reached at "
         f"latitude {lat[i]:.4f} deg: a plane through this point has an inclination "
         f"between {abs(lat[i]):.4f} and {180 - abs(lat[i]):.4f} deg"),
        "burn at a node (`at node`, `at ascending node`, `at descending node`)"))
    pole = zlen < 1e-12  # over a pole only polar planes pass; keep the current one
    safe = np.where(pole, 1.0, zlen)
    u = zp / safe[:, None]
    w = cross(rhat, u)
    a = ci / safe
    b = np.sqrt(np.maximum(slack, 0.0)) / safe
    # b > 0 heads north (the new velocity, along h' x r, has z part b |z_perp|)
    side = dot(h0, w)
    tie = np.abs(side) <= np.sin(EQUATORIAL_RAD)  # equatorial, or at a vertex
    south = np.broadcast_to(np.asarray(descending, dtype=bool), tie.shape)
    b = np.where(np.where(tie, south, side < 0), -b, b)
    target = a[:, None] * u + b[:, None] * w
    return np.where(pole[:, None], h0, unit(target))


def _crossing_hint(r, v, target) -> str:
    """Where the burn could stand: `at crossing`, and the two true anomalies."""
    first, second = crossings(r, v, target)
    f = frame(r, v, 1.0)
    now = signed_angle(f.periapsis, r, f.h)[0]
    spots = sorted(np.degrees(np.mod(now + d, TWO_PI)) % 360.0 for d in (first[0], second[0]))
    where = " or ".join(f"`at anomaly {x:.6f} deg`" for x in spots)
    return (f"burn `at crossing` (where the two planes meet), or there by hand: {where}")


def new_velocity(r, v, mu, shape: Shape, normal, failures: Failures, body_radius=0.0):
    """The velocity just after a burn with ``shape`` and plane ``normal`` (or None)."""
    rhat = unit(r)
    h = unit(cross(r, v)) if normal is None else normal
    that = cross(h, rhat)
    vr0 = dot(v, rhat)
    vt0 = norm(v - vr0[:, None] * rhat)
    vr, vt = in_plane_speeds(norm(r), vr0, vt0, dot(v, that), mu, shape, body_radius, failures)
    return vr[:, None] * rhat + vt[:, None] * that


def rotate_about(vec: np.ndarray, axis: np.ndarray, angle: np.ndarray) -> np.ndarray:
    """Rodrigues rotation of ``vec`` about unit ``axis`` by ``angle`` (batched)."""
    c = np.cos(angle)[:, None]
    s = np.sin(angle)[:, None]
    return vec * c + cross(axis, vec) * s + axis * dot(axis, vec)[:, None] * (1 - c)
