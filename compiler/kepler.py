"""Two-body (Kepler) motion on a batch of states.

Every coast moves the state along its conic.  A coast to a place (an apsis, a node, an
anomaly) is a sweep through an angle ``dtheta`` measured from the current position in
the direction of motion: the new position and velocity follow in closed form from the
eccentricity vector, with no equation to solve, and the time taken follows from Kepler's
equation.  A coast for a time solves Kepler's equation (elliptic or hyperbolic; Barker's
for a parabola) for the angle, then sweeps it the same way.  Position-by-angle is exact
for circular orbits too, where no periapsis exists.

>>> import numpy as np
>>> mu = 398600.4418
>>> r = np.array([[7000.0, 0.0, 0.0]]); v = np.array([[0.0, np.sqrt(mu / 7000.0), 0.0]])
>>> r2, v2, ok = place(r, v, mu, np.array([np.pi / 2]))
>>> [round(float(x), 6) for x in r2[0]]
[0.0, 7000.0, 0.0]
>>> dt, ok = time_of_flight(r, v, mu, np.array([2 * np.pi]))
>>> bool(abs(dt[0] - 2 * np.pi * np.sqrt(7000.0**3 / mu)) < 1e-9)
True
"""

from __future__ import annotations

import numpy as np

from .state import TWO_PI, dot, frame, norm, signed_angle, unit

PARABOLIC_BAND = 1e-9


def anomaly(r: np.ndarray, v: np.ndarray, mu: float) -> tuple[np.ndarray, np.ndarray]:
    """True anomaly in [0, 2 pi) (from the node line if circular) and eccentricity."""
    f = frame(r, v, mu)
    return signed_angle(f.periapsis, r, f.h), norm(f.e_vec)


def place(r: np.ndarray, v: np.ndarray, mu: float, dtheta: np.ndarray):
    """State after sweeping ``dtheta`` (rad, >= 0) along the conic through (r, v).

    Returns (r1, v1, ok); ok is False where the sweep would pass a hyperbola's asymptote.
    """
    f = frame(r, v, mu)
    hvec = np.cross(r, v)
    hmag = norm(hvec)
    p = hmag**2 / mu
    r0hat = unit(r)
    t0hat = np.cross(f.h, r0hat)
    c = np.cos(dtheta)[..., None]
    s = np.sin(dtheta)[..., None]
    r1hat = c * r0hat + s * t0hat
    t1hat = -s * r0hat + c * t0hat
    denom = 1.0 + dot(f.e_vec, r1hat)
    ok = denom > 1e-12
    safe = np.where(ok, denom, 1.0)
    r1 = p / safe
    vr = -(mu / hmag) * dot(f.e_vec, t1hat)
    vt = hmag / r1
    return r1[..., None] * r1hat, vr[..., None] * r1hat + vt[..., None] * t1hat, ok


def _mean_anomaly_closed(nu: np.ndarray, e: np.ndarray) -> np.ndarray:
    """Unwrapped mean anomaly of an unwrapped true anomaly on an ellipse."""
    revs = np.floor(nu / TWO_PI)
    nw = nu - revs * TWO_PI
    E = np.mod(np.arctan2(np.sqrt(1.0 - e**2) * np.sin(nw), e + np.cos(nw)), TWO_PI)
    # at nw just below 2 pi, E can round to 0: keep E on the same turn as nu
    E = np.where((nw > np.pi) & (E < np.pi / 2), E + TWO_PI, E)
    return E - e * np.sin(E) + revs * TWO_PI


def _wrap_pi(a: np.ndarray) -> np.ndarray:
    return np.mod(a + np.pi, TWO_PI) - np.pi


def _mean_anomaly_open(nu: np.ndarray, e: np.ndarray) -> np.ndarray:
    """Hyperbolic mean anomaly (e sinh H - H) of a true anomaly in (-pi, pi]."""
    H = np.arcsinh(np.sqrt(e**2 - 1.0) * np.sin(nu) / (1.0 + e * np.cos(nu)))
    return e * np.sinh(H) - H


def _conic(r: np.ndarray, v: np.ndarray, mu: float):
    """Energy, true anomaly, eccentricity, semi-latus rectum and which conic each is."""
    energy = 0.5 * dot(v, v) - mu / norm(r)
    nu0, e = anomaly(r, v, mu)
    p = norm(np.cross(r, v)) ** 2 / mu
    closed = (e < 1.0 - PARABOLIC_BAND) & (energy < 0)
    parabolic = np.abs(e - 1.0) <= PARABOLIC_BAND
    return energy, nu0, e, p, closed, parabolic


def time_of_flight(r: np.ndarray, v: np.ndarray, mu: float, dtheta: np.ndarray):
    """Time to sweep ``dtheta`` (rad, >= 0) from (r, v); returns (dt, ok)."""
    energy, nu0, e, p, closed, parabolic = _conic(r, v, mu)
    dtheta = np.asarray(dtheta, dtype=float) * np.ones_like(nu0)
    dt = np.zeros_like(nu0)
    ok = np.ones_like(nu0, dtype=bool)
    with np.errstate(invalid="ignore", divide="ignore"):
        if closed.any():
            ec = e[closed]
            a = -mu / (2.0 * energy[closed])
            n = np.sqrt(mu / a**3)
            m0 = _mean_anomaly_closed(nu0[closed], ec)
            m1 = _mean_anomaly_closed(nu0[closed] + dtheta[closed], ec)
            dt[closed] = (m1 - m0) / n
        opened = ~closed & ~parabolic
        if opened.any():
            eo = e[opened]
            a = -mu / (2.0 * energy[opened])  # negative
            n = np.sqrt(mu / (-a) ** 3)
            start = _wrap_pi(nu0[opened])
            end = start + dtheta[opened]
            limit = np.arccos(-1.0 / eo)
            fine = end < limit - 1e-12
            m0 = _mean_anomaly_open(start, eo)
            m1 = _mean_anomaly_open(np.where(fine, end, start), eo)
            dt[opened] = np.where(fine, (m1 - m0) / n, 0.0)
            ok[opened] = fine
        if parabolic.any():
            pp = p[parabolic]
            start = _wrap_pi(nu0[parabolic])
            end = start + dtheta[parabolic]
            fine = end < np.pi - 1e-12
            d0 = np.tan(start / 2.0)
            d1 = np.tan(np.where(fine, end, start) / 2.0)
            k = 0.5 * np.sqrt(pp**3 / mu)
            dt[parabolic] = np.where(fine, k * ((d1 + d1**3 / 3) - (d0 + d0**3 / 3)), 0.0)
            ok[parabolic] = fine
    return dt, ok


def _solve_elliptic(M: np.ndarray, e: np.ndarray) -> np.ndarray:
    """E with E - e sin E = M (M in [0, 2 pi)), by Newton from Danby's start."""
    E = M + 0.85 * e * np.sign(np.sin(M) + (np.sin(M) == 0))
    for _ in range(60):
        step = (E - e * np.sin(E) - M) / (1.0 - e * np.cos(E))
        E = E - step
        if np.all(np.abs(step) < 1e-15 * np.maximum(1.0, np.abs(E))):
            break
    return E


def _solve_hyperbolic(M: np.ndarray, e: np.ndarray) -> np.ndarray:
    """H with e sinh H - H = M, by Newton."""
    H = np.arcsinh(M / e)
    H = np.where(np.abs(M) > 6 * e, np.sign(M) * np.log(2 * np.abs(M) / e + 1.8), H)
    for _ in range(100):
        step = (e * np.sinh(H) - H - M) / (e * np.cosh(H) - 1.0)
        H = H - step
        if np.all(np.abs(step) < 1e-15 * np.maximum(1.0, np.abs(H))):
            break
    return H


def sweep_for_time(r: np.ndarray, v: np.ndarray, mu: float, dt: np.ndarray):
    """The angle swept in time ``dt`` (s, >= 0) from (r, v); returns (dtheta, ok)."""
    energy, nu0, e, p, closed, parabolic = _conic(r, v, mu)
    dt = np.asarray(dt, dtype=float) * np.ones_like(nu0)
    dtheta = np.zeros_like(nu0)
    ok = np.ones_like(nu0, dtype=bool)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        if closed.any():
            ec = e[closed]
            a = -mu / (2.0 * energy[closed])
            n = np.sqrt(mu / a**3)
            m0 = _mean_anomaly_closed(nu0[closed], ec)
            m1 = np.mod(m0 + n * dt[closed], TWO_PI)
            E1 = _solve_elliptic(m1, ec)
            nu1 = 2.0 * np.arctan2(np.sqrt(1.0 + ec) * np.sin(E1 / 2),
                                   np.sqrt(1.0 - ec) * np.cos(E1 / 2))
            swept = np.mod(nu1 - nu0[closed], TWO_PI)
            # rounding can leave a zero sweep just below a full turn: that is no sweep
            dtheta[closed] = np.where(swept > TWO_PI - 1e-12, 0.0, swept)
        opened = ~closed & ~parabolic
        if opened.any():
            eo = e[opened]
            a = -mu / (2.0 * energy[opened])
            n = np.sqrt(mu / (-a) ** 3)
            start = _wrap_pi(nu0[opened])
            m1 = _mean_anomaly_open(start, eo) + n * dt[opened]
            H1 = _solve_hyperbolic(m1, eo)
            nu1 = 2.0 * np.arctan(np.sqrt((eo + 1) / (eo - 1)) * np.tanh(H1 / 2))
            dtheta[opened] = nu1 - start
            ok[opened] = np.isfinite(nu1)
        if parabolic.any():
            pp = p[parabolic]
            start = _wrap_pi(nu0[parabolic])
            d0 = np.tan(start / 2.0)
            target = (d0 + d0**3 / 3) + dt[parabolic] / (0.5 * np.sqrt(pp**3 / mu))
            # D + D^3/3 = target: the one real root of the depressed cubic
            q = 1.5 * target
            w = np.cbrt(q + np.sqrt(q**2 + 1.0))
            d1 = w - 1.0 / w
            dtheta[parabolic] = 2.0 * np.arctan(d1) - start
    ok &= np.isfinite(dtheta)
    return np.where(ok, dtheta, 0.0), ok


def propagate(r: np.ndarray, v: np.ndarray, mu: float, dt: np.ndarray):
    """State after coasting ``dt`` seconds; returns (r1, v1, ok)."""
    dtheta, ok = sweep_for_time(r, v, mu, dt)
    r1, v1, ok2 = place(r, v, mu, dtheta)
    return r1, v1, ok & ok2
