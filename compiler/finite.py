"""Finite burns: constant thrust and mass flow, integrated on the batch axis.

A plan with ``burns finite`` prices every burn as a real burn instead of an instant
velocity change.  The impulsive solution (where, which way, how much) comes first, as
always; then the burn is flown as constant thrust F and mass flow F / ve, centred on the
impulse point (it starts T/2 before the time the craft reaches that point on the orbit
before the burn and ends T/2 after), with the thrust either

* ``velocity``: holding the angles the impulsive delta-v makes with the mean of the
  velocities before and after it (in that velocity's velocity-normal-binormal frame) to
  the current velocity: a tangential burn thrusts along the velocity throughout, a pure
  turn of the plane square to it, or
* ``inertial``: fixed in space along the impulsive delta-v.

Its length T is what meets the burn's governing goal (``governing``): the apsis it
names, the orbital energy of the orbit its goals name, or the turn of the plane or of
the apse line; a burn given as components spends the same delta-v.  The other goals are
checked on the real end orbit by the caller (``misses``).

Two-body gravity plus thrust / mass, state (r, v, m) in km, km/s, kg; classic
fourth-order Runge-Kutta with a fixed number of steps for the whole batch, set by the
largest arc the batch sweeps (``STEP_RAD`` of the orbital angle per step).  The length
is found by a bracketed Illinois (regula falsi) iteration on every element at once.
numpy only: this module is on ``apsidal run``'s path.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import kepler
from .state import cross, dot, norm, unit

STEP_RAD = 0.006  # rad of orbital angle per Runge-Kutta step (RK4: ~1e-9 relative)
MIN_STEPS = 16
MAX_ARC_DEG = 720.0  # a longer thrust arc (two revolutions: a spiral) is refused
MAX_STEPS = int(np.ceil(np.radians(MAX_ARC_DEG) * 1.5 / STEP_RAD))
LENGTH_RTOL = 1e-12  # the burn's length is found to this relative tolerance
MAX_ITER = 60
MASS_FLOOR = 1e-6  # the burn may not use more than this short of the whole mass
DV_ROUNDING = 1e-12  # an impulsive delta-v below this share of the speed is nothing
# ln of the mass ratio per RK4 step at most: the thrust acceleration F / m grows as the
# mass falls, and a burn that uses much of the craft (a high-thrust escape) needs steps
# set by that, not only by its orbital angle (16 steps over a mass ratio of 3 missed the
# energy by 5e-7 relative; at this step the error is below 1e-10)
MASS_STEP = 0.01


@dataclass
class FiniteBurn:
    """A finite burn over a batch: where it starts and ends, its length and mass."""

    r_start: np.ndarray  # (B, 3) km: T/2 before the impulse point
    v_start: np.ndarray
    r_end: np.ndarray  # (B, 3) km: T/2 after
    v_end: np.ndarray
    length: np.ndarray  # (B,) s: T, the burn time without margin
    mass_end: np.ndarray  # (B,) kg
    dv: np.ndarray  # (B,) km/s: ve ln(m0 / m1), the delta-v the engine gives
    arc: np.ndarray  # (B,) rad: central angle from start to end
    ok: np.ndarray  # (B,) bool: the goal was reached (by a burn that leaves some mass)
    too_long: np.ndarray  # (B,) bool: the arc would sweep more than MAX_ARC_DEG


def vnb(r, v):
    """The velocity-normal-binormal axes of (r, v): V, N = r x v / |r x v|, B = V x N."""
    V = unit(v)
    N = unit(cross(r, v))
    return V, N, cross(V, N)


def _rates(y, mu, accel, mdot, steering, comps, direction):
    """Time derivative of y = (r, v, m, angle swept) (B, 8); thrust ``accel`` = F in kN
    (km kg/s^2)."""
    r, v, m = y[:, :3], y[:, 3:6], y[:, 6]
    rr2 = np.einsum("ij,ij->i", r, r)
    vv2 = np.einsum("ij,ij->i", v, v)
    h = cross(r, v)
    hh = np.sqrt(np.einsum("ij,ij->i", h, h))
    grav = r * (-mu / (rr2 * np.sqrt(rr2)))[:, None]
    if steering == "velocity":
        vv = np.sqrt(vv2)
        u = v * (comps[:, 0] / vv)[:, None]
        if comps.shape[1] > 1:  # out of the along-track line: the normal and binormal too
            # N = h / |h|; B = V x N = (r (v.v) - v (r.v)) / (|v| |h|)
            rv = np.einsum("ij,ij->i", r, v)
            u = (u + h * (comps[:, 1] / hh)[:, None]
                 + (r * vv2[:, None] - v * rv[:, None]) * (comps[:, 2] / (vv * hh))[:, None])
    else:
        u = direction
    out = np.empty_like(y)
    out[:, :3] = v
    out[:, 3:6] = grav + (accel / m)[:, None] * u
    out[:, 6] = -mdot
    out[:, 7] = hh / rr2  # the central angle's rate, |r x v| / r^2
    return out


def integrate(r0, v0, m0, length, mu, thrust_kn, mdot, steering, comps, direction,
              steps: int | None = None):
    """Fly the thrust arc from (r0, v0, m0) for ``length`` s; returns (r, v, m, central
    angle swept, rad).

    ``comps``: the unit thrust direction's vnb components (``velocity`` steering);
    ``direction``: the inertial unit direction (``inertial``).  ``steps``: fixed number
    of RK4 steps (default: from the largest orbital angle the batch covers).
    """
    y0 = np.concatenate([r0, v0, m0[:, None], np.zeros((r0.shape[0], 1))], axis=1)
    length = np.asarray(length, dtype=float)
    chosen = steps
    if steps is None:
        rate = norm(v0) / norm(r0)  # rad/s of orbital angle, about
        steps = _steps(np.max(rate * length, initial=0.0) * 1.3)
        with np.errstate(divide="ignore", invalid="ignore"):
            spent = np.log(m0 / np.maximum(m0 - mdot * length, MASS_FLOOR * m0))
        spent = np.max(np.where(np.isfinite(spent), spent, 0.0), initial=0.0)
        steps = max(steps, min(int(np.ceil(spent / MASS_STEP)), MAX_STEPS))
    f = lambda yy: _rates(yy, mu, thrust_kn, mdot, steering, comps, direction)
    while True:
        hc = (length / steps)[:, None]
        y, widest = y0, 0.0
        for _ in range(steps):
            k1 = f(y)
            k2 = f(y + 0.5 * hc * k1)
            k3 = f(y + 0.5 * hc * k2)
            k4 = f(y + hc * k3)
            new = y + hc / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)
            widest = max(widest, float(np.max(new[:, 7] - y[:, 7], initial=0.0)))
            y = new
        # the step count came from the rate at the start: where the arc swept faster (past
        # a periapsis), fly it again with steps as fine as asked
        if chosen is not None or widest <= 1.2 * STEP_RAD or steps >= MAX_STEPS:
            break
        steps = min(_steps(widest * steps * 1.1), MAX_STEPS)
    return y[:, :3], y[:, 3:6], y[:, 6], y[:, 7]


def _steps(angle: float) -> int:
    """Runge-Kutta steps for an arc of ``angle`` rad (``STEP_RAD`` each)."""
    return int(np.clip(np.ceil(angle / STEP_RAD), MIN_STEPS, MAX_STEPS))


def back(r, v, mu, dt):
    """The state ``dt`` s earlier on the conic through (r, v): the reversed motion flown
    forward.  Returns (r, v, ok)."""
    rb, vb, ok = kepler.propagate(r, -v, mu, dt)
    return rb, -vb, ok


def governing_value(kind: str, r, v, mu, h0=None, e0=None, toward=None):
    """The scalar a finite burn's length sets: ``apoapsis`` or ``periapsis`` (radius, km),
    ``energy`` (km2/s2), ``ecc``, ``turn`` (the plane's normal turned from ``h0`` toward the
    normal ``toward``, along the great circle through both: the part of the turn the
    burn is for) or ``apse`` (angle of the apse line from ``e0``), rad."""
    rr = norm(r)
    energy = 0.5 * dot(v, v) - mu / rr
    if kind == "energy":
        return energy
    h = cross(r, v)
    if kind == "turn":
        n0 = unit(h0)
        w = toward - dot(toward, n0)[:, None] * n0
        w = np.where(norm(w)[:, None] > 0, unit(np.where(norm(w)[:, None] > 0, w, n0)), n0)
        return np.arctan2(dot(h, w), dot(h, n0))
    e_vec = cross(v, h) / mu - r / rr[:, None]
    if kind == "apse":
        return np.arctan2(norm(cross(unit(e0), e_vec)), dot(unit(e0), e_vec))
    ecc = norm(e_vec)
    if kind == "ecc":
        return ecc
    p = dot(h, h) / mu
    if kind == "periapsis":
        return p / (1.0 + ecc)
    if kind == "apoapsis":  # an open orbit's apoapsis is at infinity
        with np.errstate(divide="ignore"):
            return np.where(ecc < 1.0, p / np.maximum(1.0 - ecc, 1e-300), np.inf)
    raise ValueError(kind)


def _pointing(r, v_before, v_after):
    """The thrust direction of the finite burn that replaces the impulsive one at ``r``:
    (inertial unit direction, its vnb components)."""
    dv_imp = v_after - v_before
    dvn = norm(dv_imp)
    direction = unit(np.where(dvn[:, None] > 0, dv_imp, v_before))
    # the angles to the mean of the velocities before and after: a change of speed along
    # the velocity keeps to it, a pure turn (|v| kept) is square to it and stays so
    V, N, B = vnb(r, 0.5 * (v_before + v_after))
    comps = np.stack([dot(direction, V), dot(direction, N), dot(direction, B)], axis=-1)
    if np.all(np.abs(comps[:, 1:]) <= 1e-15 * np.abs(comps[:, :1])):
        comps = comps[:, :1]  # along the velocity only (or against it): fewer operations
    return direction, comps


def arc_points(r, v_before, v_after, mass: float, thrust_n: float, ve: float, mu: float,
               steering: str, length: float, samples: int) -> np.ndarray:
    """Points (samples, 3) km along the thrust arc of one finite burn of ``length`` s
    centred on the impulse point ``r`` (3,), from ignition to cutoff, flown as ``fly``
    flies it (for drawing): every sample is the same arc integrated to a fraction of its
    length."""
    one = lambda x: np.tile(np.asarray(x, float), (samples, 1))
    rr, vb, va = one(r), one(v_before), one(v_after)
    direction, comps = _pointing(rr, vb, va)
    rs, vs, _ = back(rr, vb, mu, np.full(samples, 0.5 * length))
    mdot = thrust_n / (ve * 1000.0)
    pts, _, _, _ = integrate(rs, vs, np.full(samples, float(mass)),
                             np.linspace(0.0, length, samples), mu,
                             np.full(samples, thrust_n / 1000.0), np.full(samples, mdot),
                             steering, comps, direction)
    return pts


def fly(r, v_before, v_after, mass, thrust_n: float, ve: float, mu: float, steering: str,
        kind: str | None) -> FiniteBurn:
    """The finite burn that replaces the impulsive one from ``v_before`` to ``v_after``
    at ``r`` (B, 3), for a craft of ``mass`` (B,) kg, thrust ``thrust_n`` N, exhaust speed
    ``ve`` km/s.  ``kind`` is the governing scalar (``governing_value``) the burn's length
    must reach as the impulsive end orbit has it, or None to spend the impulsive delta-v.
    """
    size = r.shape[0]
    dvn = norm(v_after - v_before)
    # a burn whose impulsive delta-v is rounding (a circle made on a circle: ~1e-15 km/s)
    # has nothing to fly; no length could meet a goal it already meets to that rounding
    dvn = np.where(dvn > DV_ROUNDING * norm(v_before), dvn, 0.0)
    direction, comps = _pointing(r, v_before, v_after)
    thrust_kn = np.full(size, thrust_n / 1000.0)
    mdot = np.full(size, thrust_n / (ve * 1000.0))
    t_imp = mass * -np.expm1(-dvn / ve) / mdot  # the impulsive delta-v's burn time
    t_mass = mass * (1.0 - MASS_FLOOR) / mdot  # all of the craft burnt
    # past MAX_ARC_DEG of orbit at the impulse point's rate no length is tried: a spiral
    t_arc = np.radians(MAX_ARC_DEG) * norm(r) / norm(v_before)
    t_max = np.minimum(t_mass, t_arc)

    def flown(length):
        rs, vs, ok = back(r, v_before, mu, 0.5 * length)
        re, ve_, me, arc = integrate(rs, vs, mass, length, mu, thrust_kn, mdot, steering,
                                     comps, direction)
        return rs, vs, re, ve_, me, ok, arc

    if kind is None:
        length = np.minimum(t_imp, t_max)
        found = t_imp <= t_max
    else:
        h0, e0 = cross(r, v_before), None
        if kind == "apse":
            e0 = cross(v_before, h0) / mu - r / norm(r)[:, None]
        toward = unit(cross(r, v_after))
        value = lambda rr, vv: governing_value(kind, rr, vv, mu, h0, e0, toward)
        before, target = value(r, v_before), value(r, v_after)
        sense = np.where(target >= before, 1.0, -1.0)
        gap = lambda length: sense * (value(*flown(length)[2:4]) - target)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            length, found = _solve_length(gap, t_imp, t_max, dvn > 0,
                                          sense * (before - target))
    rs, vs, re, ve_, me, ok, arc = flown(length)
    if kind is not None:  # the goal met, or the burn refused: never a near miss passed on
        with np.errstate(invalid="ignore"):
            off = np.abs(value(re, ve_) - target)
        scale = np.where(np.isfinite(before), np.abs(target - before), np.abs(target))
        found &= ~(dvn > 0) | (off <= 1e-7 * np.maximum(scale, 1e-300))
    too_long = (~found & (t_arc < t_mass)) | (arc > np.radians(MAX_ARC_DEG))
    return FiniteBurn(rs, vs, re, ve_, length, me, ve * np.log(mass / me), arc,
                      ok & found & np.isfinite(re).all(-1) & ~too_long, too_long)


def _solve_length(gap, t_imp, t_max, active, g0):
    """The length where ``gap`` (``g0`` < 0 at 0, rising) crosses 0, for every element:
    secant steps from the impulsive burn time (a finite burn is a little longer), kept
    inside the bracket found so far, bisection where a step would leave it.  Returns
    (length, found)."""
    lo, g_lo = np.zeros_like(t_imp), np.where(active, g0, -1.0)
    hi, g_hi = np.where(active, t_max, 0.0), np.full_like(t_imp, np.inf)  # g_hi unknown yet
    x0 = np.where(active, np.minimum(t_imp, t_max), 0.0)
    g_x0 = np.where(active, gap(x0), 0.0)
    x1 = np.minimum(x0 * 1.001 + 1e-9, t_max)
    done, failed = ~active, np.zeros_like(active)
    for _ in range(MAX_ITER):
        # the bracket: the largest length short of the goal, the least one past it
        below, above = ~done & (g_x0 < 0), ~done & (g_x0 >= 0)
        lo, g_lo = np.where(below & (x0 > lo), x0, lo), np.where(below & (x0 > lo), g_x0, g_lo)
        hi, g_hi = np.where(above & (x0 < hi), x0, hi), np.where(above & (x0 < hi), g_x0, g_hi)
        g_x1 = np.where(done, 0.0, gap(x1))
        below, above = ~done & (g_x1 < 0), ~done & (g_x1 >= 0)
        lo, g_lo = np.where(below & (x1 > lo), x1, lo), np.where(below & (x1 > lo), g_x1, g_lo)
        hi, g_hi = np.where(above & (x1 < hi), x1, hi), np.where(above & (x1 < hi), g_x1, g_hi)
        step = np.where(g_x1 != g_x0, g_x1 * (x1 - x0) / np.where(g_x1 != g_x0, g_x1 - g_x0, 1.0),
                        0.0)
        x2 = x1 - step
        bad = ~np.isfinite(x2) | (x2 <= lo) | (x2 >= hi) | ((g_x1 == g_x0) & (g_x1 != 0))
        known = np.isfinite(g_hi)
        x2 = np.where(bad, np.where(known, 0.5 * (lo + hi), np.minimum(2.0 * x1, t_max)), x2)
        x2 = np.where(bad & ~known & (x1 >= t_max), t_max, x2)
        converged = ~done & ((np.abs(x2 - x1) <= LENGTH_RTOL * x1) | (g_x1 == 0)
                             | (known & (hi - lo <= LENGTH_RTOL * hi)))
        stuck = ~done & ~known & (x1 >= t_max) & (g_x1 < 0)  # the whole mass is not enough
        x1 = np.where(converged, np.where(g_x1 == 0, x1, x2), x1)
        done |= converged | stuck
        failed |= stuck
        if done.all():
            break
        x0, g_x0, x1 = np.where(done, x0, x1), np.where(done, g_x0, g_x1), np.where(done, x1, x2)
    found = ~active | (done & ~failed)
    return np.where(active, np.clip(x1, lo, np.where(np.isfinite(g_hi), hi, t_max)), 0.0), found
