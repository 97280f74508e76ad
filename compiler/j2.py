"""Secular J2 drift: the first-order rates of the node, the apse line and the mean motion.

Under ``gravity j2`` every closed orbit turns slowly: its node line regresses (or
advances, for a retrograde orbit), its apse line turns in the plane and the craft runs
round it at a mean motion a little different from two-body's.  The classical
first-order secular rates (Vallado, *Fundamentals of Astrodynamics and Applications*,
4th ed., Sec. 9.6; Curtis, *Orbital Mechanics for Engineering Students*, 3rd ed.,
Sec. 4.7, equations 4.52 and 4.53 - the numbers from memory), with n = sqrt(mu / a^3),
p = a (1 - e^2) and R the radius J2 is referred to:

    raan rate  = -(3/2) n J2 (R/p)^2 cos i
    argp rate  =  (3/4) n J2 (R/p)^2 (5 cos^2 i - 1)
    mean motion n_bar = n [1 + (3/4) J2 (R/p)^2 sqrt(1 - e^2) (3 cos^2 i - 1)]

The state of record is read as the mean elements (the short-period terms are not
modelled).  A coast of ``dt`` is then exact for these rates: the two-body motion for
the time ``dt n_bar / n`` (which advances the mean anomaly by n_bar dt), turned by
argp rate x dt about the orbit normal and by raan rate x dt about the body's spin axis.
A rigid turn of the state commutes with two-body motion, so a place on the drifted orbit
(an apsis, a node, a crossing) is reached by sweeping to it on the turned orbit: the
sweep and the time that turns the orbit are found together by a fixed-point iteration
(``Drift.goto``), which contracts by about the ratio of the drift rates to the mean
motion (1e-3 in low Earth orbit).  Open orbits coast as in the point-mass model.

>>> import numpy as np
>>> a = 6378.1366 + 700.0
>>> i = sun_synchronous(398600.4418, 6378.1366, 0.0010826359, np.array([a]))
>>> round(float(np.degrees(i[0])), 2)
98.19
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import kepler
from .state import TWO_PI, cross, dot, norm, unit

# The Sun's mean motion in right ascension: one tropical year, 365.2422 d (Astronomical
# Almanac's mean tropical year, 365.24219 d, rounded - from memory), gives 0.98565 deg/day.
TROPICAL_YEAR_S = 365.2422 * 86400.0
SUN_RATE = TWO_PI / TROPICAL_YEAR_S  # rad/s, at the Earth
SUN_GM = 1.32712440018e11  # km3/s2 (the catalogue's Sun, for the years of other bodies)
_ITERATIONS = 30  # fixed-point steps for a place on the drifting orbit (a few suffice)


@dataclass(frozen=True)
class Rates:
    """Secular rates of a batch of orbits (rad/s); zero on open orbits."""

    n: np.ndarray  # two-body mean motion (0 on an open orbit)
    n_bar: np.ndarray  # mean motion with J2 (0 on an open orbit)
    raan: np.ndarray
    argp: np.ndarray
    closed: np.ndarray

    @property
    def time_scale(self) -> np.ndarray:
        """n_bar / n: two-body seconds per second of a J2 coast (1 on open orbits)."""
        return np.where(self.closed, self.n_bar / np.where(self.closed, self.n, 1.0), 1.0)


def factor(mu: float, radius: float, j2: float, p):
    """(3/2) J2 (R/p)^2, the common factor of the rates (per unit of mean motion)."""
    return 1.5 * j2 * (radius / p) ** 2


def raan_rate(mu: float, radius: float, j2: float, a, e, i):
    """Node rate (rad/s) of an orbit of sma ``a`` (km), eccentricity ``e``, inclination
    ``i`` (rad).

    >>> import numpy as np
    >>> w = raan_rate(398600.4418, 6378.1366, 0.0010826359, 7000.0, 0.0, np.radians(28.5))
    >>> round(float(np.degrees(w) * 86400), 3)
    -6.323
    """
    a, e, i = np.asarray(a, float), np.asarray(e, float), np.asarray(i, float)
    n = np.sqrt(mu / a**3)
    p = a * (1.0 - e**2)
    return -factor(mu, radius, j2, p) * n * np.cos(i)


def sun_rate(body) -> float | None:
    """The Sun's mean motion as seen from ``body`` (rad/s): the mean motion of the
    planet it belongs to around the Sun.  The Earth's (and the Moon's) is the tropical
    year's, the rate sun-synchronous orbits are defined by; another planet's is its
    orbital mean motion sqrt(GM_sun / a^3) from the catalogue.  None where the body has
    no year: the Sun itself, a body defined in the plan."""
    from .bodies import lookup

    b, seen = body, 0
    while b is not None and b.parent not in (None, "sun") and seen < 8:
        b, seen = lookup(b.parent), seen + 1
    if b is None or b.parent != "sun" or not b.orbit_sma:
        return None
    if b.name.lower() == "earth":
        return SUN_RATE
    sun = lookup("sun")
    return math.sqrt((sun.gm if sun else SUN_GM) / b.orbit_sma**3)


def sun_synchronous(mu: float, radius: float, j2: float, a, e=0.0, rate: float = SUN_RATE):
    """The inclination (rad) whose node rate is the Sun's mean motion ``rate`` (the
    Earth's by default), for sma ``a`` and eccentricity ``e``; NaN where none is (cos i
    would pass -1: the orbit is too high).

    cos i = -rate_sun / ((3/2) n J2 (R/p)^2).
    """
    a, e = np.asarray(a, float), np.asarray(e, float)
    closed = (a > 0) & (e < 1)  # an open orbit has none (NaN)
    with np.errstate(invalid="ignore", divide="ignore"):
        a = np.where(closed, a, 1.0)
        n = np.sqrt(mu / a**3)
        p = a * (1.0 - np.where(closed, e, 0.0) ** 2)
        c = -rate / (factor(mu, radius, j2, p) * n)
        return np.where(closed & (np.abs(c) <= 1.0), np.arccos(np.clip(c, -1.0, 1.0)), np.nan)


def highest_sun_synchronous(mu: float, radius: float, j2: float, e=0.0,
                            rate: float = SUN_RATE) -> float:
    """The largest sma (km) with a sun-synchronous inclination (a polar retrograde limit,
    i = 180 deg): (3/2) n J2 (R/p)^2 = rate_sun, solved for a."""
    # n (R/p)^2 = sqrt(mu) a^-3.5 R^2 (1 - e^2)^-2
    k = 1.5 * j2 * np.sqrt(mu) * radius**2 / (1.0 - e**2) ** 2
    return float((k / rate) ** (1.0 / 3.5))


@dataclass(frozen=True)
class Drift:
    """The secular J2 motion of a body: rates, coasts for a time and to a place (equal
    for equal constants, so two contexts of one plan compare equal)."""

    mu: float  # km3/s2
    radius: float  # km, the radius J2 is referred to
    j2: float

    def rates(self, r: np.ndarray, v: np.ndarray) -> Rates:
        mu = self.mu
        h = cross(r, v)
        hmag = norm(h)
        p = hmag**2 / mu
        alpha = 2.0 / norm(r) - dot(v, v) / mu  # 1 / a
        closed = alpha > 0
        a = 1.0 / np.where(closed, alpha, 1.0)
        e2 = np.clip(1.0 - p / a, 0.0, 1.0)
        n = np.where(closed, np.sqrt(mu * np.where(closed, alpha, 1.0) ** 3), 0.0)
        cos_i = h[..., 2] / hmag
        k = factor(mu, self.radius, self.j2, np.where(p > 0, p, 1.0))
        raan = np.where(closed, -k * n * cos_i, 0.0)
        argp = np.where(closed, 0.5 * k * n * (5.0 * cos_i**2 - 1.0), 0.0)
        n_bar = n * (1.0 + 0.5 * k * np.sqrt(1.0 - e2) * (3.0 * cos_i**2 - 1.0))
        return Rates(n, n_bar, raan, argp, closed)

    @staticmethod
    def turn(r, v, d_raan, d_argp):
        """The state turned by ``d_argp`` about its orbit normal, then ``d_raan`` about z:
        the same orbit with its apse line and node line moved, the craft at the same
        anomaly."""
        h = unit(cross(r, v))
        z = np.zeros_like(r)
        z[..., 2] = 1.0
        out = []
        for vec in (r, v):
            vec = _rotate(vec, h, d_argp)
            out.append(_rotate(vec, z, d_raan))
        return out[0], out[1]

    def propagate(self, r, v, dt, rates: Rates | None = None):
        """State after coasting ``dt`` seconds (>= 0); returns (r1, v1, ok)."""
        rates = self.rates(r, v) if rates is None else rates
        dt = np.asarray(dt, float) * np.ones(r.shape[0])
        r1, v1, ok = kepler.propagate(r, v, self.mu, dt * rates.time_scale)
        r1, v1 = self.turn(r1, v1, rates.raan * dt, rates.argp * dt)
        return r1, v1, ok

    def secular(self, r, v, dt, rates: Rates | None = None):
        """The secular drift alone over ``dt`` seconds: the state moved by what a J2
        coast of ``dt`` adds to two-body motion (the mean motion's excess, n_bar / n - 1
        of ``dt`` along the orbit, either way, and the turns of the apse and node lines),
        for an arc flown two-body over that time (a finite burn's thrust arc).  Open
        orbits are returned as they are; returns (r1, v1)."""
        rates = self.rates(r, v) if rates is None else rates
        dt = np.asarray(dt, float) * np.ones(r.shape[0])
        extra = dt * (rates.time_scale - 1.0)  # two-body seconds, of either sign
        sign = np.where(extra < 0, -1.0, 1.0)[:, None]
        r1, v1, ok = kepler.propagate(r, v * sign, self.mu, np.abs(extra))
        keep = (~rates.closed | ~ok)[:, None]
        r1, v1 = np.where(keep, r, r1), np.where(keep, v, v1 * sign)
        return self.turn(r1, v1, rates.raan * dt, rates.argp * dt)

    def whole_revs(self, r, v, revs: float, rates: Rates | None = None):
        """``revs`` anomalistic periods (2 pi / n_bar: from one periapsis to the next of
        the drifting orbit); (r1, v1, seconds, ok).  Whole revolutions bring the craft to
        the same anomaly of the turned orbit."""
        rates = self.rates(r, v) if rates is None else rates
        closed = rates.closed
        period = np.where(closed, TWO_PI / np.where(closed, rates.n_bar, 1.0), 0.0)
        part = revs - np.floor(revs)
        if part > 0:
            two_body = np.where(closed, TWO_PI / np.where(closed, rates.n, 1.0), 0.0)
            r1, v1, ok = kepler.propagate(r, v, self.mu, two_body * part)
        else:
            r1, v1, ok = r, v, np.ones(r.shape[0], dtype=bool)
        dt = period * revs
        r1, v1 = self.turn(r1, v1, rates.raan * dt, rates.argp * dt)
        return r1, v1, dt, ok & closed

    def goto(self, r, v, d0, aim, rates: Rates | None = None):
        """Coast to a place of the drifting orbit.

        ``d0`` is the sweep to the place on today's orbit; ``aim(r, v)`` gives the
        candidate sweeps to it from a state on a turned orbit (the place moves with the
        orbit, or, for a crossing with a fixed plane, against it); None for a place fixed
        in true anomaly (an apsis, an anomaly, a radius), which the turn does not move.
        The sweep d and the time t(d) = two-body time of flight x n / n_bar are iterated
        until the place of the orbit turned for t(d) is d ahead: (r1, v1, seconds, ok).
        """
        rates = self.rates(r, v) if rates is None else rates
        d = np.asarray(d0, float).copy()
        scale = rates.time_scale
        converged = np.zeros(r.shape[0], dtype=bool)
        before = np.full(r.shape[0], np.inf)  # the step before, to see a noise floor
        last = d.copy()  # the sweep before (for the secant step)
        for k in range(_ITERATIONS):
            t2b, ok_t = kepler.time_of_flight(r, v, self.mu, d)
            t = t2b / scale
            rt, vt = self.turn(r, v, rates.raan * t, rates.argp * t)
            if aim is None:  # the place does not move: this d is the answer
                converged[:] = True
                break
            best = None
            for c in aim(rt, vt):
                moved = d + np.mod(c - d + np.pi, TWO_PI) - np.pi  # nearest to the last
                best = moved if best is None else np.where(
                    np.abs(moved - d) < np.abs(best - d), moved, best)
            best = np.maximum(best, 0.0)
            step = np.abs(best - d)
            # settled: a step at rounding, or steps that stopped shrinking at the noise
            # floor of the place itself (an apsis of a nearly circular orbit is defined
            # only to about 1e-16 / e rad).  A settled element keeps the d its time and
            # turn were worked out for, so the place below is swept on that very orbit.
            settled = (step <= 1e-14 * np.maximum(1.0, d)) | (
                (k >= 2) & (step >= 0.5 * before) & (step < 1e-6))
            # the map d -> best is nearly linear with a small slope: a secant step on
            # best - d (from the last two passes) lands far closer than best itself
            with np.errstate(divide="ignore", invalid="ignore"):
                slope = (best - d) / (d - last)
                ahead = d + (best - d) / (1.0 - slope)
            ahead = np.where(np.isfinite(ahead) & (np.abs(slope) < 0.5) & (ahead >= 0),
                             ahead, best)
            last = d
            d = np.where(converged | settled, d, ahead if k else best)
            converged |= settled
            before = step
            if converged.all():
                break
        r1, v1, ok_p = kepler.place(rt, vt, self.mu, d)
        return r1, v1, t, ok_t & ok_p & converged

def _rotate(vec, axis, angle):
    """Rodrigues rotation of ``vec`` about unit ``axis`` by ``angle`` (batched)."""
    c = np.cos(angle)[..., None]
    s = np.sin(angle)[..., None]
    return vec * c + cross(axis, vec) * s + axis * dot(axis, vec)[..., None] * (1 - c)
