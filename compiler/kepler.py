"""Two-body (Kepler) motion on a batch of states, one code path for every conic.

Every coast moves the state along its conic.  A coast to a place (an apsis, a node, an
anomaly) is a sweep through an angle ``dtheta`` measured from the current position in
the direction of motion: the new position and velocity follow in closed form from the
eccentricity vector, with no equation to solve (``place``).  Position-by-angle is exact
for circular orbits too, where no periapsis exists.

Time enters through the universal variable chi (Vallado, *Fundamentals of Astrodynamics
and Applications*, 4th ed., algorithm 8 KEPLER; Curtis, *Orbital Mechanics for
Engineering Students*, 3rd ed., algorithm 3.3, its number from memory), which runs
smoothly through e = 1, where the elliptic and hyperbolic forms of Kepler's equation
lose their digits.
With sigma0 = r0 . v0 / sqrt(mu), alpha = 2/r0 - v0^2/mu and the universal functions
U1, U2, U3 of chi (from Stumpff's C and S, by series near z = alpha chi^2 = 0),

    sqrt(mu) dt = r0 U1 + sigma0 U2 + U3.

* ``propagate`` (a coast for a time) solves this for chi over the batch by Laguerre's
  method (Conway's form of it for Kepler's equation) kept inside a bracket that only
  shrinks, after taking whole periods off an ellipse's dt, and builds the new state
  from the Lagrange coefficients f, g, fdot, gdot.
* ``radius_crossings`` finds where the conic crosses a radius, from the orbit equation.
* ``time_of_flight`` (a coast to a place) needs no iteration: the geometry of the sweep
  gives f and g exactly, hence U2 = r0 (1 - f) and U1 = (sqrt(mu) g - sigma0 U2) / r0,
  chi from their ratio, and dt = g + U3 / sqrt(mu); whole revolutions add periods.

Failures come back as an ``ok`` mask (a sweep past a hyperbola's asymptote, a state that
cannot be propagated), with the input state or a zero in their place, never NaN.

>>> import numpy as np
>>> mu = 398600.4418
>>> r = np.array([[7000.0, 0.0, 0.0]]); v = np.array([[0.0, np.sqrt(mu / 7000.0), 0.0]])
>>> r2, v2, ok = place(r, v, mu, np.array([np.pi / 2]))
>>> [round(float(x), 6) for x in r2[0]]
[0.0, 7000.0, 0.0]
>>> dt, ok = time_of_flight(r, v, mu, np.array([2 * np.pi]))
>>> bool(abs(dt[0] - 2 * np.pi * np.sqrt(7000.0**3 / mu)) < 1e-9)
True
>>> r3, v3, ok = propagate(r, v, mu, dt / 4)
>>> [round(float(x), 6) for x in r3[0]]
[0.0, 7000.0, 0.0]
"""

from __future__ import annotations

import numpy as np

from .state import CIRCULAR_ECC, TWO_PI, cross, dot, frame, norm, signed_angle, unit

SERIES_Z = 1.0  # |z| below this: Stumpff's functions by their power series
_SERIES_TERMS = 12  # the last term is z^11 / 25!: far below double precision for |z| < 1
_MAX_STEPS = 200  # bracketed: a bisection wherever Newton would leave the bracket


def anomaly(r: np.ndarray, v: np.ndarray, mu: float) -> tuple[np.ndarray, np.ndarray]:
    """True anomaly in [0, 2 pi) (from the node line if circular) and eccentricity."""
    f = frame(r, v, mu)
    return signed_angle(f.periapsis, r, f.h), norm(f.e_vec)


def stumpff(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Stumpff's C(z) = (1 - cos sqrt z) / z and S(z) = (sqrt z - sin sqrt z) / sqrt z^3.

    Continued to z < 0 by cosh and sinh, and summed as power series for |z| <
    ``SERIES_Z``, where the closed forms cancel.  C(0) = 1/2, S(0) = 1/6; an overflow
    (z very negative) gives inf, which the callers treat as a failure.

    >>> import numpy as np
    >>> c, s = stumpff(np.array([0.0, 0.5, -0.5, np.pi**2]))
    >>> [round(float(x), 12) for x in c]
    [0.5, 0.479510805849, 0.521183673043, 0.202642367285]
    >>> [round(float(x), 12) for x in s]
    [0.166666666667, 0.162549260269, 0.170883282545, 0.101321183642]
    """
    z = np.asarray(z, dtype=float)
    series = np.abs(z) < SERIES_Z
    c_ser = s_ser = np.zeros_like(z)
    if series.any():  # (each form only where some element needs it)
        zs = np.where(series, z, 0.0)
        # C = (1/2!) (1 - z/(3*4) (1 - z/(5*6) (...))), S = (1/3!) (1 - z/(4*5) (1 - ...))
        c_ser = np.ones_like(zs)
        s_ser = np.ones_like(zs)
        for k in range(_SERIES_TERMS - 1, 0, -1):
            c_ser = 1.0 - zs * c_ser / ((2 * k + 1) * (2 * k + 2))
            s_ser = 1.0 - zs * s_ser / ((2 * k + 2) * (2 * k + 3))
        c_ser, s_ser = c_ser / 2.0, s_ser / 6.0
        if series.all():
            return c_ser, s_ser
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        zc = np.where(series, 1.0, z)
        q = np.sqrt(np.abs(zc))
        ell = zc > 0
        half = np.where(ell, np.sin(q / 2), np.sinh(q / 2))
        c_closed = 2.0 * half**2 / np.abs(zc)
        s_closed = np.where(ell, q - np.sin(q), np.sinh(q) - q) / q**3
    return np.where(series, c_ser, c_closed), np.where(series, s_ser, s_closed)


def _universal(chi: np.ndarray, alpha: np.ndarray):
    """U0, U1, U2, U3 of chi: the universal functions of Battin's formulation."""
    c, s = stumpff(alpha * chi**2)
    u2 = chi**2 * c
    u3 = chi**3 * s
    with np.errstate(invalid="ignore"):
        return 1.0 - alpha * u2, chi - alpha * u3, u2, u3


def _elements(r: np.ndarray, v: np.ndarray, mu: float):
    """What both directions need: |r0|, sigma0, alpha, |h|, p and sqrt(mu)."""
    r0 = norm(r)
    sqmu = np.sqrt(mu)
    sigma0 = dot(r, v) / sqmu
    alpha = 2.0 / r0 - dot(v, v) / mu
    hmag = norm(cross(r, v))
    return r0, sigma0, alpha, hmag, hmag**2 / mu, sqmu


def _period(alpha: np.ndarray, sqmu: float) -> np.ndarray:
    """The period of a closed orbit (alpha > 0), inf for an open one."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(alpha > 0, TWO_PI / (sqmu * np.where(alpha > 0, alpha, 1.0) ** 1.5),
                        np.inf)


# --- a coast for a time --------------------------------------------------------------


def _solve_chi(r0, sigma0, alpha, target, hi):
    """chi >= 0 with r0 U1 + sigma0 U2 + U3 = target, bracketed in [0, hi].

    The left side grows with chi (its derivative is the radius r > 0).  Each step is
    Laguerre's (n = 5; B. A. Conway, Celestial Mechanics 39, 1986, from memory), kept
    safe as in Numerical Recipes' rtsafe: bisect where a step would leave the bracket
    or would not halve the step before last.  Returns (chi, converged).
    """
    lo = np.zeros_like(target)
    hi = hi.copy()
    chi = target / r0  # to first order sqrt(mu) dt = r0 chi
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        # an open orbit's start (Vallado, algorithm 8): chi grows with log(dt)
        a = 1.0 / np.where(alpha < 0, alpha, -1.0)
        arg = -2.0 * alpha * target / (sigma0 + np.sqrt(-a) * (1.0 - r0 * alpha))
        chi = np.where((alpha < 0) & (arg > 0), np.sqrt(-a) * np.log(arg), chi)
        chi = np.where((chi > lo) & (chi < hi), chi, 0.5 * (lo + hi))
        done = target == 0.0
        chi = np.where(done, 0.0, chi)
        step_before = hi - lo
        step = step_before
        for _ in range(_MAX_STEPS):
            u0, u1, u2, u3 = _universal(chi, alpha)
            miss = r0 * u1 + sigma0 * u2 + u3 - target
            radius = r0 * u0 + sigma0 * u1 + u2
            # an overflow (far out on a hyperbola) is past any finite target
            miss = np.where(np.isfinite(miss), miss, np.inf)
            lo = np.where(miss < 0, chi, lo)
            hi = np.where(miss > 0, chi, hi)
            bend = sigma0 * u0 + (1.0 - alpha * r0) * u1  # d radius / d chi
            root = np.sqrt(np.abs(16.0 * radius**2 - 20.0 * miss * bend))
            new = chi - 5.0 * miss / (radius + root)  # Laguerre's step (n = 5)
            # the steps converge at least quadratically: after one of 1e-13 chi, chi is exact
            tol = 1e-13 * np.maximum(np.abs(new), chi)
            settled = (np.abs(new - chi) <= tol) | (miss == 0) | (hi - lo <= tol)
            accept = (new >= lo) & (new <= hi) & (np.abs(new - chi) <= 0.5 * np.abs(step_before))
            new = np.where(accept | settled, new, 0.5 * (lo + hi))
            step_before, step = step, new - chi
            chi = np.where(done, chi, new)
            done |= settled
            if done.all():
                break
    return chi, done


def propagate(r: np.ndarray, v: np.ndarray, mu: float, dt: np.ndarray):
    """State after coasting ``dt`` seconds; returns (r1, v1, ok).

    ``dt`` < 0 is refused (ok False) on an open orbit; on a closed one it is taken
    modulo the period, as a coast forward.
    """
    r0, sigma0, alpha, _, p, sqmu = _elements(r, v, mu)
    dt = np.asarray(dt, dtype=float) * np.ones_like(r0)
    period = _period(alpha, sqmu)
    closed = alpha > 0
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # whole periods change nothing on an ellipse; keep 0 <= dt < period
        left = np.where(closed, dt - np.floor(dt / np.where(closed, period, 1.0)) * period, dt)
        left = np.clip(left, 0.0, np.where(closed, period, np.inf))
        # the radius never drops below periapsis: sqrt(mu) dt >= rp chi bounds chi
        e = np.sqrt(np.maximum(1.0 - alpha * p, 0.0))
        rp = p / (1.0 + e)
        hi = 1.01 * sqmu * left / rp
        hi = np.where(closed, np.minimum(hi, TWO_PI / np.sqrt(np.where(closed, alpha, 1.0))),
                      hi)
        finite = np.isfinite(hi) & (rp > 0)
        hi = np.where(finite, hi, 0.0)
        chi, ok = _solve_chi(r0, sigma0, alpha, sqmu * left, hi)
        _, u1, u2, _ = _universal(chi, alpha)
        f = 1.0 - u2 / r0
        g = (r0 * u1 + sigma0 * u2) / sqmu
        r1 = f[..., None] * r + g[..., None] * v
        radius = norm(r1)
        fdot = -sqmu * u1 / (radius * r0)
        gdot = 1.0 - u2 / radius
        v1 = fdot[..., None] * r + gdot[..., None] * v
    ok &= finite & (radius > 0) & np.isfinite(r1).all(-1) & np.isfinite(v1).all(-1)
    ok &= closed | (dt >= 0)  # back in time only where whole periods make it forward
    return np.where(ok[..., None], r1, r), np.where(ok[..., None], v1, v), ok


def sweep_for_time(r: np.ndarray, v: np.ndarray, mu: float, dt: np.ndarray):
    """The angle swept in time ``dt`` (s, >= 0) from (r, v), in [0, 2 pi); (dtheta, ok)."""
    r1, _, ok = propagate(r, v, mu, dt)
    swept = signed_angle(r, r1, unit(cross(r, v)))
    # rounding can leave a zero sweep just below a full turn: that is no sweep
    swept = np.where(swept > TWO_PI - 1e-12, 0.0, swept)
    return np.where(ok, swept, 0.0), ok


# --- a coast to a place --------------------------------------------------------------


def _sweep(r: np.ndarray, v: np.ndarray, mu: float, dtheta: np.ndarray, f=None):
    """Unit vectors and radius after sweeping ``dtheta``, and where that is possible
    (``f``: the orbit's ``frame`` if already at hand)."""
    f = frame(r, v, mu) if f is None else f
    hmag = norm(cross(r, v))
    p = hmag**2 / mu
    r0hat = unit(r)
    t0hat = cross(f.h, r0hat)
    c = np.cos(dtheta)[..., None]
    s = np.sin(dtheta)[..., None]
    r1hat = c * r0hat + s * t0hat
    t1hat = -s * r0hat + c * t0hat
    denom = 1.0 + dot(f.e_vec, r1hat)
    ok = denom > 1e-12
    r1 = p / np.where(ok, denom, 1.0)
    return f, hmag, r1hat, t1hat, r1, ok


def place(r: np.ndarray, v: np.ndarray, mu: float, dtheta: np.ndarray, f=None):
    """State after sweeping ``dtheta`` (rad, >= 0) along the conic through (r, v)
    (``f``: its ``frame`` if already at hand).

    Returns (r1, v1, ok); ok is False where the sweep would pass a hyperbola's asymptote.
    """
    dtheta = np.asarray(dtheta, dtype=float) * np.ones(r.shape[:-1])
    f, hmag, r1hat, t1hat, r1, ok = _sweep(r, v, mu, dtheta, f)
    ok &= _reachable(r, v, mu, dtheta, f)
    vr = -(mu / hmag) * dot(f.e_vec, t1hat)
    vt = hmag / r1
    return r1[..., None] * r1hat, vr[..., None] * r1hat + vt[..., None] * t1hat, ok


def _reachable(r, v, mu, dtheta, f) -> np.ndarray:
    """False where a sweep passes an open orbit's asymptote (true anomaly from -pi)."""
    e = norm(f.e_vec)
    opened = e >= 1.0
    start = np.mod(signed_angle(f.periapsis, r, f.h) + np.pi, TWO_PI) - np.pi
    with np.errstate(invalid="ignore"):
        limit = np.arccos(-1.0 / np.where(opened, e, 1.0))
    return ~opened | (start + dtheta < limit - 1e-12)


def time_of_flight(r: np.ndarray, v: np.ndarray, mu: float, dtheta: np.ndarray, f=None):
    """Time to sweep ``dtheta`` (rad, >= 0) from (r, v); returns (dt, ok) (``f``: the
    orbit's ``frame`` if already at hand)."""
    r0, sigma0, alpha, hmag, p, sqmu = _elements(r, v, mu)
    dtheta = np.asarray(dtheta, dtype=float) * np.ones_like(r0)
    closed = alpha > 0
    revs = np.where(closed, np.floor(dtheta / TWO_PI), 0.0)
    part = dtheta - revs * TWO_PI
    f, _, _, _, r1, ok = _sweep(r, v, mu, part, f)
    ok &= _reachable(r, v, mu, dtheta, f) & (closed | (dtheta < TWO_PI))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # Lagrange's f and g from the geometry: 1 - f = (r1 / p)(1 - cos dtheta)
        u2 = r0 * r1 * 2.0 * np.sin(part / 2) ** 2 / p
        g = r0 * r1 * np.sin(part) / hmag
        u1 = (sqmu * g - sigma0 * u2) / r0
        # chi from U1 and U2: tan(sqrt(alpha) chi / 2) = sqrt(alpha) U2 / U1 on an
        # ellipse, tanh(...) on a hyperbola, written so neither loses digits near alpha = 0
        root = np.sqrt(np.abs(alpha))
        safe = np.where(root > 0, root, 1.0)
        chi_ell = 2.0 * np.arctan2(root * u2, u1) / safe
        chi_hyp = np.log1p(root * u1 + root**2 * u2) / safe
        chi = np.where(alpha > 0, chi_ell, np.where(alpha < 0, chi_hyp, u1))
        _, _, _, u3 = _universal(chi, alpha)
        dt = g + u3 / sqmu + revs * np.where(closed, _period(alpha, sqmu), 0.0)
    ok &= np.isfinite(dt) & (dt >= 0)
    return np.where(ok, dt, 0.0), ok


# --- where the conic crosses a radius ----------------------------------------------------


def radius_crossings(r: np.ndarray, v: np.ndarray, mu: float, radius: float):
    """Sweep angles from (r, v) to where the conic crosses ``radius`` (km): outbound
    (climbing) and inbound, each inf where it is not ahead; and whether it crosses at all.

    The orbit equation r = p / (1 + e cos nu) puts the crossings at nu = +-nu_R with
    tan^2(nu_R / 2) = (1 - cos nu_R) / (1 + cos nu_R) = (1 + e)(R - rp) / (p - (1 - e) R),
    written with R - rp so that a crossing at an apsis comes out exact.  On an ellipse
    both crossings come round again (sweeps in [0, 2 pi)); on an open orbit only those
    ahead of the craft count, and the sweep is the difference of true anomalies.  A
    circular orbit (e < 1e-9) crosses only its own radius, here.

    >>> import numpy as np
    >>> mu = 398600.4418
    >>> r = np.array([[7000.0, 0, 0]]); v = np.array([[0, 8.0, 0]])   # at periapsis
    >>> up, down, meets = radius_crossings(r, v, mu, 7000.0)
    >>> float(up[0]), round(float(down[0]), 12), bool(meets[0])
    (0.0, 0.0, True)
    """
    f = frame(r, v, mu)
    e = norm(f.e_vec)
    rmag = norm(r)
    p = norm(cross(r, v)) ** 2 / mu
    rp = p / (1.0 + e)
    closed = e < 1.0
    R = np.full_like(rmag, float(radius))
    with np.errstate(divide="ignore", invalid="ignore"):
        ra = np.where(closed, p / np.where(closed, 1.0 - e, 1.0), np.inf)
    round_ = e < CIRCULAR_ECC
    tol = 1e-12 * R
    meets = np.where(round_, np.abs(rmag - R) <= 1e-9 * R,
                     (R >= rp - tol) & (R <= ra + tol))
    above = np.maximum((1.0 + e) * (R - rp), 0.0)
    below = np.maximum(p - (1.0 - e) * R, 0.0)
    nu = np.where(np.abs(R - rp) <= tol, 0.0, 2.0 * np.arctan2(np.sqrt(above), np.sqrt(below)))
    now = signed_angle(f.periapsis, r, f.h)
    signed_now = np.where(now > np.pi, now - TWO_PI, now)  # open orbits: (-pi, pi]
    out_closed = np.mod(nu - now, TWO_PI)
    in_closed = np.mod(-nu - now, TWO_PI)
    out_open = nu - signed_now
    in_open = -nu - signed_now
    ahead = lambda d: np.where(d >= -1e-12, np.maximum(d, 0.0), np.inf)
    up = np.where(closed, out_closed, ahead(out_open))
    down = np.where(closed, in_closed, ahead(in_open))
    up = np.where(round_, 0.0, up)
    down = np.where(round_, 0.0, down)
    return np.where(meets, up, np.inf), np.where(meets, down, np.inf), meets
