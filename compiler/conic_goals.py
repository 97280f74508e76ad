"""Burn goals on the conic itself: its energy, its eccentricity and its line of apsides.

``solvers.py`` turns apsis and plane goals into the new velocity; this module does the
goals that name the conic by its other elements (docs/physics.md, "Burns").  At the
current radius r, with the circular speed v_c = sqrt(mu / r):

* an **energy** goal (`sma to`, `period to`, `vinf to`, `c3 to`) fixes the speed by
  vis-viva, v^2 = 2 (eps + mu / r).  Alone, the least burn keeps the direction of the
  velocity and changes its length; with a plane goal it goes to the nearest velocity of
  that speed in the new plane.
* an **eccentricity** goal alone: in units of v_c (X = v_r / v_c, Y = v_t / v_c) the
  eccentricity vector in the position's own frame is (Y^2 - 1, X Y), so every velocity
  at r with eccentricity E lies on the curve (Y^2 - 1)^2 + X^2 Y^2 = E^2, parameterised
  by the new true anomaly nu of the position: Y = sqrt(1 + E cos nu), X = E sin nu / Y.
  The burn goes to its nearest point (``nearest_on_curve``).  Every E can be reached
  anywhere (nu = 0 makes this point the periapsis), so nothing is refused but a conic
  that then dives under the surface.
* **two** of periapsis, apoapsis, energy and eccentricity fix the conic, (p, e)
  (``conic_of``); the craft must lie between its apsides and the radial speed keeps
  its sign.
* an **apse-line** goal (`argp to`) keeps the size and shape (or takes them from two
  shape goals) and turns the conic in its plane.  The burn stands where the old and the
  new orbit cross (``apse_crossings``); there the new conic's true anomaly, and so its
  radial speed, is fixed.

Every solver returns (v_r, v_t) in the plane of the burn and adds what it cannot meet
to ``failures``; an element that failed keeps finite numbers, never NaN.

>>> mu = 398600.4418
>>> r = np.array([[6678.0, 0, 0]]); v = np.array([[0, np.sqrt(mu / 6678.0), 0]])
>>> ok = Failures(1)
>>> v2 = new_velocity(r, v, mu, ConicGoals(energy=2.943**2 / 2, energy_goal="vinf"), None,
...                   ok, 6378.0)
>>> round(float(np.linalg.norm(v2 - v)), 3)     # escape to a hyperbolic excess of 2.943 km/s
3.59
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from .solvers import RADIUS_TOL, Failures, outward
from .state import CIRCULAR_ECC, TWO_PI, cross, dot, frame, norm, signed_angle, unit

ARGP_TOL = 1e-7  # rad: how far from its goal the apse line may turn out where the burn stands
ENERGY_GOALS = ("sma", "period", "vinf", "c3")


@dataclass(frozen=True)
class ConicGoals:
    """A burn's goals on the conic (internal units, radii for the apsides)."""

    periapsis: float | None = None
    apoapsis: float | None = None
    energy: float | None = None  # specific orbital energy, km2/s2
    energy_goal: str | None = None  # sma | period | vinf | c3: how the plan named it
    ecc: float | None = None
    argp: float | None = None  # rad

    @classmethod
    def of(cls, step) -> ConicGoals | None:
        """The goals of a burn step, or None when it has none of this module's kinds."""
        if step.energy is None and step.ecc is None and step.argp is None:
            return None
        return cls(step.periapsis, step.apoapsis, step.energy, step.energy_goal, step.ecc,
                   step.argp)

    @property
    def named(self) -> tuple[str, ...]:
        """The goals among periapsis, apoapsis, energy and eccentricity, in that order."""
        return tuple(k for k, x in (("periapsis", self.periapsis), ("apoapsis", self.apoapsis),
                                    ("energy", self.energy), ("ecc", self.ecc))
                     if x is not None)


class Unreachable(Exception):
    """Goals that name no conic at all; ``args`` are (message, hint)."""


# --- the conic two goals name ----------------------------------------------------------


def energy_text(kind: str, eps: float, mu: float) -> str:
    """An energy as the plan named it: ``sma 9000 km``, ``vinf 3.5 km/s``, ...

    >>> energy_text("vinf", 2.0, 398600.4418), energy_text("c3", -10.0, 398600.4418)
    ('vinf 2 km/s', 'c3 -20 km2/s2')
    """
    if kind == "vinf":
        return f"vinf {np.sqrt(max(2.0 * eps, 0.0)):.6g} km/s"
    if kind == "c3":
        return f"c3 {2.0 * eps:.6g} km2/s2"
    a = -mu / (2.0 * eps)
    if kind == "period":
        return f"period {TWO_PI * np.sqrt(a**3 / mu):.6g} s"
    return f"sma {a:.6g} km"


def conic_of(goals: ConicGoals, mu: float, radius: float) -> tuple[float, float]:
    """(p, e) of the conic two shape goals name; ``Unreachable`` when they name none.

    >>> conic_of(ConicGoals(periapsis=7000.0, ecc=0.5), 398600.4418, 6378.0)
    (10500.0, 0.5)
    """
    alt = lambda x: f"{x - radius:.3f} km"
    rp, ra, eps, e = goals.periapsis, goals.apoapsis, goals.energy, goals.ecc
    what = energy_text(goals.energy_goal or "c3", eps, mu) if eps is not None else ""
    if rp is not None and ra is not None:
        if rp > ra:
            raise Unreachable(f"periapsis {alt(rp)} is above apoapsis {alt(ra)}",
                              "swap the two targets")
        return 2.0 * rp * ra / (rp + ra), (ra - rp) / (ra + rp)
    if eps is not None and e is not None:
        if e == 1.0 and eps == 0.0:
            raise Unreachable("ecc 1 and an energy of zero both say parabola, which leaves "
                              "its size free", "give the periapsis instead of the energy")
        kind = lambda closed, open_: ("a closed" if closed else "an open" if open_ else
                                      "a parabolic")
        if e == 1.0 or eps == 0.0 or (e < 1.0) != (eps < 0.0):
            raise Unreachable(f"ecc {e:g} names {kind(e < 1.0, e > 1.0)} orbit but {what} "
                              f"names {kind(eps < 0.0, eps > 0.0)} one",
                              "an orbit with ecc below 1 has a negative energy (a positive "
                              "sma), an open one a positive energy (a vinf)")
        a = -mu / (2.0 * eps)
        return a * (1.0 - e) * (1.0 + e), e
    if eps is not None:
        if rp is not None:
            e = 1.0 + 2.0 * eps * rp / mu
            if e < 0.0:
                a = -mu / (2.0 * eps)
                raise Unreachable(f"{what} cannot have its periapsis at {alt(rp)} altitude: "
                                  f"an orbit of that energy has its periapsis at most at "
                                  f"{alt(a)} (its sma, on a circle)",
                                  "lower the periapsis goal or raise the energy")
            return rp * (1.0 + e), e
        if eps >= 0.0:
            raise Unreachable(f"{what} names an open orbit, which has no apoapsis",
                              "give the periapsis instead, or a negative energy")
        a = -mu / (2.0 * eps)
        e = ra / a - 1.0
        if e < 0.0:
            raise Unreachable(f"{what} cannot have its apoapsis at {alt(ra)} altitude: an "
                              f"orbit of that energy has its apoapsis at least at {alt(a)} "
                              "(its sma, on a circle)", "raise the apoapsis goal")
        if e >= 1.0:
            raise Unreachable(f"{what} cannot have its apoapsis at {alt(ra)} altitude: its "
                              f"periapsis would be at or below the centre (the apoapsis can "
                              f"be at most {alt(2.0 * a)}, twice the sma)",
                              "lower the apoapsis goal")
        return ra * (1.0 - e), e
    if rp is not None:
        return rp * (1.0 + e), e
    if e >= 1.0:
        raise Unreachable(f"ecc {e:g} names an open orbit, which has no apoapsis",
                          "give the periapsis instead, or an ecc below 1")
    return ra * (1.0 - e), e


def conic_speeds(rmag, vr0, mu, p, e, failures: Failures, radius: float, side=None):
    """Radial and transverse speed at radius ``rmag`` on the conic (p, e); the radial
    speed keeps the sign of ``vr0`` (or goes the way ``side`` says, ``solvers.outward``).
    The craft must be between the apsides."""
    p = p * np.ones_like(rmag)
    e = e * np.ones_like(rmag)
    rp = p / (1.0 + e)
    closed = e < 1.0
    ra = np.where(closed, p / np.where(closed, 1.0 - e, 1.0), np.inf)
    tol = RADIUS_TOL * rmag
    off = (rmag < rp - tol) | (rmag > ra + tol)
    alt = lambda x: "open" if not np.isfinite(x) else f"{x - radius:.3f} km"
    failures.add(off, lambda i: (
        (f"the orbit these goals name (periapsis {alt(rp[i])}, apoapsis {alt(ra[i])}) does "
         f"not pass through the craft's altitude {alt(rmag[i])}: a burn keeps the position, "
         "so the new orbit must pass through it"),
        ("burn where the craft is between those altitudes (at an apsis, say), or give one "
         "shape goal and let the burn choose the rest")))
    # v_r^2 = (mu / p) ((1 + e) - p/r) (p/r - (1 - e)), each factor written to be exactly
    # zero at its apsis
    f1 = (1.0 + e) * np.maximum(rmag - rp, 0.0) / rmag
    f2 = np.where(closed, (1.0 - e) * np.maximum(np.where(closed, ra, rmag) - rmag, 0.0) / rmag,
                  p / rmag + e - 1.0)
    vr = np.sqrt(mu / p * f1 * np.maximum(f2, 0.0))
    side = np.where(vr0 < 0, -1.0, 1.0) if side is None else side
    return side * vr, np.sqrt(mu * p) / rmag


# --- one goal: the nearest point of a curve of velocities ------------------------------


def nearest_on_curve(curve: Callable, lo, hi, x0, y0, points: int = 257,
                     periodic: bool = False, keep: int = 3):
    """The point of a curve nearest (x0, y0), per element: returns (s, x, y).

    ``curve(s)`` gives x, y and their derivatives in s for parameters of shape (B, K);
    s runs over [lo, hi] (a whole turn when ``periodic``).  A grid finds the local
    minima of the squared distance; the ``keep`` lowest are each refined by bisection
    on the sign of the derivative inside the bracket of their grid neighbours, and the
    nearest result wins (the grid point itself if nothing refined beats it).
    """
    t = (np.arange(points) / points if periodic else np.linspace(0.0, 1.0, points))
    grid = lo[:, None] + (hi - lo)[:, None] * t[None, :]
    gx, gy, _, _ = curve(grid)
    d = (gx - x0[:, None]) ** 2 + (gy - y0[:, None]) ** 2
    if periodic:
        left, right = np.roll(d, 1, axis=1), np.roll(d, -1, axis=1)
    else:
        pad = np.full((d.shape[0], 1), np.inf)
        left = np.concatenate([pad, d[:, :-1]], axis=1)
        right = np.concatenate([d[:, 1:], pad], axis=1)
    score = np.where((d <= left) & (d <= right), d, np.inf)
    keep = min(keep, points)
    idx = np.argsort(score, axis=1)[:, :keep]
    valid = np.isfinite(np.take_along_axis(score, idx, axis=1))
    s = np.take_along_axis(grid, idx, axis=1)
    step = ((hi - lo) / (points if periodic else points - 1))[:, None]
    a, b = s - step, s + step
    if not periodic:
        a, b = np.maximum(a, lo[:, None]), np.minimum(b, hi[:, None])
    X0, Y0 = x0[:, None], y0[:, None]
    for _ in range(64):
        m = 0.5 * (a + b)
        x, y, dx, dy = curve(m)
        falling = (x - X0) * dx + (y - Y0) * dy < 0  # half the derivative of the distance
        a, b = np.where(falling, m, a), np.where(falling, b, m)
    s_ref = 0.5 * (a + b)
    x, y, _, _ = curve(s_ref)
    dist = np.where(valid, (x - X0) ** 2 + (y - Y0) ** 2, np.inf)
    grid_best = np.take_along_axis(d, idx, axis=1)
    better = dist <= np.where(valid, grid_best, np.inf)
    s_all = np.where(better, s_ref, s)
    dist = np.where(better, dist, np.where(valid, grid_best, np.inf))
    pick = np.argmin(dist, axis=1)
    rows = np.arange(x0.shape[0])
    s_best = s_all[rows, pick]
    bx, by, _, _ = curve(s_best[:, None])
    return s_best, bx[:, 0], by[:, 0]


def ecc_speeds(rmag, x0, y0, mu, E):
    """The least-delta-v (radial, transverse) speeds at ``rmag`` whose conic has
    eccentricity ``E``; (x0, y0) are the current radial speed and the transverse speed
    along the plane of the burn.

    >>> mu = 398600.4418; r = np.array([7000.0]); vc = np.sqrt(mu / 7000.0)
    >>> vr, vt = ecc_speeds(r, np.array([0.0]), np.array([vc]), mu, np.array([0.2]))
    >>> round(float(vt[0] / vc) ** 2, 12), abs(float(vr[0])) < 1e-15   # tangential: 1 + E
    (1.2, True)
    """
    rmag, x0, y0, E = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                            for a in (rmag, x0, y0, E)))
    vc = np.sqrt(mu / rmag)
    X0, Y0 = x0 / vc, y0 / vc
    Ek = E[:, None]
    out_x, out_y = np.zeros_like(rmag), np.ones_like(rmag)
    closed = E < 1.0
    for mask, periodic in ((closed, True), (~closed, False)):
        if not mask.any():
            continue
        Em = Ek[mask]
        if periodic:
            nu_of = lambda s: (s, np.ones_like(s))
            lo, hi = np.full(mask.sum(), -np.pi), np.full(mask.sum(), np.pi)
        else:  # nu = nu_inf tanh(w): the far branches, where Y -> 0, get their share of points
            limit = np.arccos(-1.0 / Em)

            def nu_of(w, limit=limit):
                th = np.tanh(w)
                return limit * th, limit * (1.0 - th * th)
            lo, hi = np.full(mask.sum(), -12.0), np.full(mask.sum(), 12.0)

        def curve(s, Em=Em, nu_of=nu_of):
            nu, dnu = nu_of(s)
            c, sn = np.cos(nu), np.sin(nu)
            Y = np.sqrt(np.maximum(1.0 + Em * c, 1e-30))  # > 0 inside the asymptotes
            dY = -Em * sn / (2.0 * Y)
            X = Em * sn / Y
            dX = Em * c / Y + Em**2 * sn**2 / (2.0 * Y**3)
            return X, Y, dX * dnu, dY * dnu

        _, bx, by = nearest_on_curve(curve, lo, hi, X0[mask], Y0[mask], periodic=periodic)
        out_x[mask], out_y[mask] = bx, by
    return out_x * vc, out_y * vc


def energy_speeds(rmag, x0, y0, mu, eps, goals: ConicGoals, failures: Failures,
                  radius: float):
    """The least-delta-v speeds at ``rmag`` with specific energy ``eps``: the nearest
    point of the half circle v_r^2 + v_t^2 = 2 (eps + mu / r), v_t > 0, to (x0, y0)."""
    eps = eps * np.ones_like(rmag)
    s2 = 2.0 * (eps + mu / rmag)
    low = s2 <= 0.0
    kind = goals.energy_goal or "c3"
    what = energy_text(kind, float(eps[0]), mu)
    least = {"sma": lambda i: ((f"an orbit through this point has an sma of at least "
                                f"{rmag[i] / 2:.3f} km (half its radius) or a negative one "
                                "(open)"), "give a larger sma, or burn nearer the body"),
             "period": lambda i: ((f"a closed orbit through this point has a period of at "
                                   f"least {TWO_PI * np.sqrt((rmag[i] / 2) ** 3 / mu):.3f} s"),
                                  "give a longer period, or burn nearer the body"),
             "c3": lambda i: ((f"c3 here is at least -2 mu / r = {-2 * mu / rmag[i]:.6g} "
                               "km2/s2 (the craft at rest)"),
                              "give a larger c3, or burn nearer the body")}
    failures.add(low, lambda i: (
        (f"{what} cannot be reached at {rmag[i] - radius:.3f} km altitude: "
         f"{least.get(kind, least['c3'])(i)[0]}"), least.get(kind, least["c3"])(i)[1]))
    speed = np.sqrt(np.maximum(s2, 0.0))
    now = np.hypot(x0, y0)
    turned = ~low & (y0 <= 1e-12 * np.maximum(now, 1e-300))
    failures.add(turned, lambda i: (
        (f"{what} with a plane turned by 90 deg or more from the velocity has no least "
         "burn (the nearest velocity of that speed in the new plane would fly straight out "
         "along the radius)"),
        ("turn the plane in a burn of its own (a plane goal alone keeps the speeds), then "
         "set the energy")))
    scale = speed / np.where(now > 0, now, 1.0)
    ok = ~(low | turned)
    return np.where(ok, x0 * scale, x0), np.where(ok, y0 * scale, y0)


# --- the line of apsides ----------------------------------------------------------------


def _in_plane(r, v, mu):
    """Argument of the position from the node (the x axis if equatorial) about h, and the
    current (p, e, argp)."""
    f = frame(r, v, mu)
    h = norm(cross(r, v))
    e = norm(f.e_vec)
    return f, signed_angle(f.node, r, f.h), h * h / mu, e, signed_angle(f.node, f.periapsis, f.h)


def apse_target(r, v, mu, goals: ConicGoals, radius: float, failures: Failures):
    """(p, e) of the orbit an `argp to` goal turns to: the one two shape goals name, or
    today's size and shape (refused on a circular orbit, which has no apse line)."""
    _, _, p1, e1, _ = _in_plane(r, v, mu)
    if len(goals.named) == 2:
        p2, e2 = conic_of(goals, mu, radius)  # lowering has refused what names no conic
        return p2 * np.ones_like(p1), e2 * np.ones_like(e1)
    round_ = e1 < CIRCULAR_ECC
    failures.add(round_, lambda i: (
        f"the orbit is circular (eccentricity {e1[i]:.3g}): it has no apse line to turn",
        ("give the new shape as well: `argp to W` with both apsides, or with `ecc to` and "
         "an apsis")))
    return p1, e1


def apse_crossings(r, v, mu, p2, e2, argp2, failures: Failures, radius: float):
    """Sweep angles (rad, ahead) to the two points where the current orbit meets the conic
    (p2, e2) with argument of periapsis ``argp2`` in the same plane, nearer first.

    With u the angle from the node, p2 (1 + e1 cos(u - w1)) = p1 (1 + e2 cos(u - w2)), so
    A cos u + B sin u = C with A = p2 e1 cos w1 - p1 e2 cos w2, B = p2 e1 sin w1 -
    p1 e2 sin w2 and C = p1 - p2 (the crossing of two coplanar conics with a common
    focus).  Orbits that do not meet are refused; identical ones cross everywhere (both
    angles are zero).
    """
    _, u, p1, e1, w1 = _in_plane(r, v, mu)
    A = p2 * e1 * np.cos(w1) - p1 * e2 * np.cos(argp2)
    B = p2 * e1 * np.sin(w1) - p1 * e2 * np.sin(argp2)
    C = p1 - p2
    R = np.hypot(A, B)
    scale = np.maximum(p1, p2)
    same = (R <= 1e-12 * scale) & (np.abs(C) <= 1e-12 * scale)
    apart = ~same & (np.abs(C) > R * (1.0 + 1e-12))
    rp2 = p2 / (1.0 + e2)
    ra2 = np.where(e2 < 1.0, p2 / np.where(e2 < 1.0, 1.0 - e2, 1.0), np.inf)
    alt = lambda x: "open" if not np.isfinite(x) else f"{x - radius:.3f} km"
    failures.add(apart, lambda i: (
        (f"the orbit with argp {np.degrees(argp2 * np.ones_like(u))[i]:.4f} deg, periapsis "
         f"{alt(rp2[i])} and apoapsis {alt(ra2[i])} does not meet the current orbit: no "
         "single burn reaches it"),
        "change the size or shape first (a burn at an apsis), then turn the apse line"))
    phi = np.arctan2(B, A)
    half = np.arccos(np.clip(C / np.where(R > 0, R, 1.0), -1.0, 1.0))
    d1 = np.mod(phi + half - u, TWO_PI)
    d2 = np.mod(phi - half - u, TWO_PI)
    first, second = np.minimum(d1, d2), np.maximum(d1, d2)
    zero = same | apart
    return np.where(zero, 0.0, first), np.where(zero, 0.0, second)


def apse_speeds(r, v, mu, p2, e2, argp2, failures: Failures, radius: float):
    """Radial and transverse speed at the position on the conic (p2, e2, argp2).

    The position fixes the new true anomaly, nu = u - argp2 (u from the node), and so the
    sign of the radial speed; its size and the transverse speed come from (p2, e2) at
    this radius, so the size and shape are met exactly.  The apse line that results is
    checked against the goal: off by more than ``ARGP_TOL`` the craft is not where the
    two orbits cross, and the error names where they do.
    """
    rmag = norm(r)
    _, u, _, _, _ = _in_plane(r, v, mu)
    vr, vt = conic_speeds(rmag, np.sin(u - argp2), mu, p2, e2, failures, radius)
    got = u - np.arctan2(vr * np.sqrt(p2 / mu), p2 / rmag - 1.0)
    miss = np.abs(np.mod(got - argp2 + np.pi, TWO_PI) - np.pi)
    bad = miss > ARGP_TOL
    failures.add(bad, lambda i: (
        (f"the orbit with argp {np.degrees(argp2 * np.ones_like(u))[i]:.4f} deg does not pass "
         f"through the craft's position (a burn here would put the apse line "
         f"{np.degrees(miss[i]):.6f} deg off)"),
        _crossing_hint(r[i:i + 1], v[i:i + 1], mu, p2[i:i + 1], e2[i:i + 1],
                       (argp2 * np.ones_like(u))[i:i + 1], radius)))
    return vr, vt


def _crossing_hint(r, v, mu, p2, e2, argp2, radius) -> str:
    tmp = Failures(1)
    first, second = apse_crossings(r, v, mu, p2, e2, argp2, tmp, radius)
    if not tmp.ok[0]:
        return tmp.reason(0)[1] or ""
    f = frame(r, v, mu)
    now = signed_angle(f.periapsis, r, f.h)[0]
    spots = sorted(np.degrees(np.mod(now + d, TWO_PI)) % 360.0 for d in (first[0], second[0]))
    where = " or ".join(f"`at anomaly {x:.6f} deg`" for x in spots)
    return f"burn `at crossing` (where the two orbits meet), or there by hand: {where}"


# --- the new velocity ------------------------------------------------------------------


def new_velocity(r, v, mu, goals: ConicGoals, normal, failures: Failures, radius: float):
    """The velocity just after a burn with these goals, in the plane ``normal`` (or the
    current plane when None)."""
    rhat = unit(r)
    h = unit(cross(r, v)) if normal is None else normal
    that = cross(h, rhat)
    rmag = norm(r)
    vr0 = dot(v, rhat)
    vt_in = dot(v, that)
    side = outward(vr0, norm(v))  # at an apsis: never the sign of a rounding error
    if goals.argp is not None:
        p2, e2 = apse_target(r, v, mu, goals, radius, failures)
        vr, vt = apse_speeds(r, v, mu, p2, e2, goals.argp, failures, radius)
    elif len(goals.named) == 2:
        p2, e2 = conic_of(goals, mu, radius)
        vr, vt = conic_speeds(rmag, vr0, mu, p2, e2, failures, radius, side)
    elif goals.energy is not None:
        vr, vt = energy_speeds(rmag, vr0, vt_in, mu, goals.energy, goals, failures, radius)
    else:
        # the curve is symmetric in the radial speed: solved on the outward side
        vr, vt = ecc_speeds(rmag, np.abs(vr0), vt_in, mu, goals.ecc * np.ones_like(rmag))
        vr = side * np.abs(vr)
    ok = failures.ok
    vr, vt = np.where(ok, vr, vr0), np.where(ok, vt, np.maximum(vt_in, 0.0))
    return vr[:, None] * rhat + vt[:, None] * that
