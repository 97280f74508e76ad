"""Manoeuvre solvers: from a burn's goals to the new velocity at the current position.

A burn is impulsive: the position stays, the velocity jumps.  The goals fix the new
velocity in two independent parts:

* the **shape** (``apoapsis to``, ``periapsis to``, ``circular``) fixes the radial and
  transverse speed.  With both apsides given the new conic is fully known and must pass
  through the current radius.  With one apsis given, the burn keeps the flight-path angle
  (a tangential burn, the cheapest way to move one apsis) and the other apsis follows.
* the **plane** (``inclination to``, ``raan to``) fixes the new orbit normal, which must
  contain the current position: the velocity turns about the radius vector.

Without a shape goal the radial and transverse speeds are kept, so a plane-only burn at
a node is the pure rotation with delta-v = 2 v sin(di / 2).

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

from .state import dot, norm, plane_normal, signed_angle, unit

RADIUS_TOL = 1e-9  # relative: a target this close to the current radius is "here"


class Failures:
    """Which batch elements can no longer be flown, and why (worded on demand).

    ``code`` sorts failures for callers that act on the kind (``check`` reports
    ``propellant`` as a finding); everything else is ``infeasible``.
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


def _fmt_km(x: float) -> str:
    return f"{x:.3f} km"


def in_plane_speeds(r, v, mu, shape: Shape, body_radius: float, failures: Failures):
    """Radial and transverse speed after the burn; kept as they are without shape goals."""
    rhat = unit(r)
    rmag = norm(r)
    vr0 = dot(v, rhat)
    vt0 = norm(np.cross(rhat, v))
    if shape.periapsis is None and shape.apoapsis is None:
        return vr0, vt0
    alt = lambda x: x - body_radius
    tol = RADIUS_TOL * rmag
    if shape.periapsis is not None and shape.apoapsis is not None:
        rp = np.asarray(shape.periapsis, dtype=float) * np.ones_like(rmag)
        ra = np.asarray(shape.apoapsis, dtype=float) * np.ones_like(rmag)
        bad = rp > ra + tol
        failures.add(bad, lambda i: (
            f"periapsis {_fmt_km(alt(rp[i]))} is above apoapsis {_fmt_km(alt(ra[i]))}",
            "swap the two targets"))
        low = rp > rmag + tol
        failures.add(low, lambda i: (
            (f"periapsis {_fmt_km(alt(rp[i]))} is above the current altitude "
            f"{_fmt_km(alt(rmag[i]))}; a burn can only put the periapsis at or below "
            "where the craft is"),
            ("coast to a point at or above the target first (e.g. `at apoapsis`), "
            "or use `transfer NAME: circular ...`")))
        high = ra < rmag - tol
        failures.add(high, lambda i: (
            (f"apoapsis {_fmt_km(alt(ra[i]))} is below the current altitude "
            f"{_fmt_km(alt(rmag[i]))}; a burn can only put the apoapsis at or above "
            "where the craft is"),
            ("coast to a point at or below the target first (e.g. `at periapsis`), "
            "or use `transfer NAME: circular ...`")))
        lo = np.minimum(rp, rmag)
        hi = np.maximum(ra, rmag)
        p = 2.0 * lo * hi / (lo + hi)
        vt = np.sqrt(mu * p) / rmag
        # vis-viva less the transverse part, factored so it is exactly 0 at an apsis
        vr2 = 2.0 * mu / rmag**2 * (rmag - lo) * (hi - rmag) / (lo + hi)
        sign = np.where(vr0 < 0, -1.0, 1.0)
        return sign * np.sqrt(np.maximum(vr2, 0.0)), vt
    # one apsis: keep the flight-path angle
    target = shape.apoapsis if shape.apoapsis is not None else shape.periapsis
    R = np.asarray(target, dtype=float) * np.ones_like(rmag)
    speed0 = np.sqrt(vr0**2 + vt0**2)
    cosg = vt0 / speed0
    sing = vr0 / speed0
    if shape.apoapsis is not None:
        wrong = R < rmag - tol
        failures.add(wrong, lambda i: (
            (f"apoapsis {_fmt_km(alt(R[i]))} is below the current altitude "
            f"{_fmt_km(alt(rmag[i]))}; a burn can only put the apoapsis at or above "
            "where the craft is"),
            "burn at a lower point (e.g. `at periapsis`), or use `periapsis to` here"))
    else:
        wrong = R > rmag + tol
        failures.add(wrong, lambda i: (
            (f"periapsis {_fmt_km(alt(R[i]))} is above the current altitude "
            f"{_fmt_km(alt(rmag[i]))}; a burn can only put the periapsis at or below "
            "where the craft is"),
            "burn at a higher point (e.g. `at apoapsis`), or use `apoapsis to` here"))
    here = np.abs(R - rmag) <= tol
    tilted = here & (np.abs(sing) > 1e-9)
    failures.add(tilted, lambda i: (
        (f"an apsis at the current radius needs horizontal flight, but the flight-path "
        f"angle here is {np.degrees(np.arcsin(sing[i])):.3f} deg"),
        "burn at an apsis, or give both `periapsis to` and `apoapsis to`"))
    reach = rmag * cosg
    cant = ~here & (shape.periapsis is not None) & (R >= reach)
    failures.add(cant, lambda i: (
        (f"periapsis {_fmt_km(alt(R[i]))} cannot be reached keeping the flight-path angle "
        f"{np.degrees(np.arcsin(sing[i])):.3f} deg; the most is "
        f"{_fmt_km(alt(reach[i]))}"),
        "give both apsides to turn the velocity, or burn at an apsis"))
    with np.errstate(divide="ignore", invalid="ignore"):
        speed2 = 2.0 * mu * R * (rmag - R) / (rmag * (rmag**2 * cosg**2 - R**2))
    speed = np.where(here, np.sqrt(mu / rmag), np.sqrt(np.where(speed2 > 0, speed2, 0.0)))
    failures.add(~np.isfinite(speed) | (speed <= 0), lambda i: (
        "the apsis target cannot be met from this point", "burn at an apsis"))
    speed = np.where(np.isfinite(speed), speed, speed0)
    return speed * np.where(here, 0.0, sing), speed * np.where(here, 1.0, cosg)


def normal_for(r, v, inclination, raan, failures: Failures):
    """The orbit normal after a plane goal, containing the current position.

    ``inclination`` and/or ``raan`` are arrays (rad) or None.  With inclination alone the
    rotation about the radius vector is the smaller of the two that reach it.
    """
    rhat = unit(r)
    h0 = unit(np.cross(r, v))
    n = rhat.shape[0]
    if inclination is not None and raan is not None:
        target = plane_normal(inclination * np.ones(n), raan * np.ones(n))
        off = dot(target, rhat)
        miss = np.abs(off) > 1e-9
        failures.add(miss, lambda i: (
            (f"the plane with inclination {np.degrees(inclination * np.ones(n))[i]:.4f} deg "
            f"and raan {np.degrees(raan * np.ones(n))[i]:.4f} deg does not contain the "
            f"craft's position (it is {np.degrees(np.arcsin(np.clip(off[i], -1, 1))):.4f} "
            "deg off it)"),
            _crossing_hint(h0[i], target[i], r[i], v[i])))
        # keep the position exactly in the plane
        fixed = unit(target - off[:, None] * rhat)
        return fixed
    if inclination is not None:
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
        bad = slack < -1e-15
        failures.add(bad, lambda i: (
            (f"inclination {np.degrees(np.arccos(ci[i])):.4f} deg cannot be reached at "
             f"latitude {lat[i]:.4f} deg: a plane through this point has an inclination "
             f"between {abs(lat[i]):.4f} and {180 - abs(lat[i]):.4f} deg"),
            "burn at a node (`at node`, `at ascending node`, `at descending node`)"))
        pole = zlen < 1e-12  # over a pole only polar planes pass; keep the current one
        safe = np.where(pole, 1.0, zlen)
        u = zp / safe[:, None]
        w = np.cross(rhat, u)
        a = ci / safe
        b = np.sqrt(np.maximum(slack, 0.0)) / safe
        b = np.where(dot(h0, w) < 0, -b, b)
        target = a[:, None] * u + b[:, None] * w
        return np.where(pole[:, None], h0, unit(target))
    # raan alone: the plane with that node line through the current position
    Om = raan * np.ones(n)
    P = rhat[:, 0] * np.sin(Om) - rhat[:, 1] * np.cos(Om)
    z = rhat[:, 2]
    mag = np.hypot(P, z)
    free = mag < 1e-12  # on that node line, in the equator: keep the inclination
    si = np.where(free, 0.0, z / np.where(free, 1.0, mag))
    co = np.where(free, 1.0, -P / np.where(free, 1.0, mag))
    flip = si < 0
    si = np.where(flip, -si, si)
    co = np.where(flip, -co, co)
    inc = np.arctan2(si, co)
    # when si == 0 both the equatorial plane and its retrograde twin work: pick the closer
    inc = np.where((si == 0) & (h0[:, 2] < 0), np.pi, np.where(si == 0, 0.0, inc))
    inc = np.where(free, np.arccos(np.clip(h0[:, 2], -1, 1)), inc)
    return plane_normal(inc, Om)


def _crossing_hint(h0, target, r, v) -> str:
    line = np.cross(h0, target)
    if np.linalg.norm(line) < 1e-12:
        return "the planes coincide"
    line = line / np.linalg.norm(line)
    # measure both crossings from the current position, in the direction of motion
    a1 = np.degrees(signed_angle(r[None], line[None], h0[None])[0])
    a2 = (a1 + 180.0) % 360.0
    first, second = sorted((a1, a2))
    return (f"burn where the two planes cross: {first:.2f} deg or {second:.2f} deg ahead of "
            "the current position")


def new_velocity(r, v, mu, shape: Shape, normal, failures: Failures, body_radius=0.0):
    """The velocity just after a burn with ``shape`` and plane ``normal`` (or None)."""
    rhat = unit(r)
    vr, vt = in_plane_speeds(r, v, mu, shape, body_radius, failures)
    h = unit(np.cross(r, v)) if normal is None else normal
    that = np.cross(h, rhat)
    return vr[:, None] * rhat + vt[:, None] * that


def rotate_about(vec: np.ndarray, axis: np.ndarray, angle: np.ndarray) -> np.ndarray:
    """Rodrigues rotation of ``vec`` about unit ``axis`` by ``angle`` (batched)."""
    c = np.cos(angle)[:, None]
    s = np.sin(angle)[:, None]
    return vec * c + np.cross(axis, vec) * s + axis * dot(axis, vec)[:, None] * (1 - c)
