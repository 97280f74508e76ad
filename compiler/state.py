"""Orbit state and classical elements, batched over a leading axis.

The state of record is position and velocity (km, km/s) in the body's inertial frame,
z along the spin axis.  Elements are derived from it, robustly:

* circular orbits (e < ``CIRCULAR_ECC``) have argp = 0 and the anomaly is the argument
  of latitude, measured from the ascending node;
* equatorial orbits (i within ``EQUATORIAL_RAD`` of 0 or 180 deg) have raan = 0 and
  angles measured from the x axis, so a circular equatorial orbit's anomaly is its true
  longitude;
* every in-plane angle is measured in the direction of motion, so retrograde orbits need
  no special case, and every angle but the inclination (in [0, pi]) is in [0, 2 pi);
* hyperbolic orbits have a negative sma and an infinite apoapsis and period.

>>> import numpy as np
>>> r, v = state_from_elements(398600.4418, np.array([7000.0]), np.array([0.1]),
...                            np.radians([30.0]), np.radians([40.0]), np.radians([50.0]),
...                            np.radians([60.0]))
>>> el = elements_from_state(r, v, 398600.4418)
>>> [round(float(x), 9) for x in (el.sma[0], el.ecc[0], np.degrees(el.argp[0]))]
[7000.0, 0.1, 50.0]
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

TWO_PI = 2.0 * np.pi
CIRCULAR_ECC = 1e-9
EQUATORIAL_RAD = 1e-9
Z = np.array([0.0, 0.0, 1.0])
X = np.array([1.0, 0.0, 0.0])


LEVI_CIVITA = np.zeros((3, 3, 3))
LEVI_CIVITA[0, 1, 2] = LEVI_CIVITA[1, 2, 0] = LEVI_CIVITA[2, 0, 1] = 1.0
LEVI_CIVITA[0, 2, 1] = LEVI_CIVITA[2, 1, 0] = LEVI_CIVITA[1, 0, 2] = -1.0
SMALL = 8  # batches up to this size take one einsum call (numpy's per-call cost rules)


def cross(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``np.cross`` over the last axis of length 3, without the axis juggling that
    makes ``np.cross`` slow on small batches: one einsum with the Levi-Civita symbol
    for a few vectors, the products written out for many.

    >>> cross(np.array([[1.0, 0, 0]]), np.array([[0, 1.0, 0]])).tolist()
    [[0.0, 0.0, 1.0]]
    >>> big = np.tile([[0.0, 1.0, 0]], (20, 1))
    >>> cross(big, np.tile([[0.0, 0, 1.0]], (20, 1)))[19].tolist()
    [1.0, 0.0, 0.0]
    """
    if a.ndim == 2 and a.shape[0] <= SMALL and a.shape == b.shape:
        return np.einsum("ijk,...j,...k->...i", LEVI_CIVITA, a, b)
    if a.shape != b.shape:
        a, b = np.broadcast_arrays(a, b)
    a0, a1, a2 = a[..., 0], a[..., 1], a[..., 2]
    b0, b1, b2 = b[..., 0], b[..., 1], b[..., 2]
    out = np.empty(a.shape, dtype=np.result_type(a, b))
    out[..., 0] = a1 * b2 - a2 * b1
    out[..., 1] = a2 * b0 - a0 * b2
    out[..., 2] = a0 * b1 - a1 * b0
    return out


_VECDOT = getattr(np, "vecdot", None)  # numpy 2: a ufunc, cheaper per call than einsum


def norm(a: np.ndarray) -> np.ndarray:
    return np.sqrt(dot(a, a))


def dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """The dot product over the last axis (``vecdot`` for small batches, where numpy's
    per-call cost rules, ``einsum`` for large ones, where it is the faster loop)."""
    if _VECDOT is not None and a.shape[0] <= 64:
        return _VECDOT(a, b)
    return np.einsum("...i,...i->...", a, b)


def unit(a: np.ndarray) -> np.ndarray:
    n = norm(a)
    return a / np.where(n > 0, n, 1.0)[..., None]


def wrap_angle(a: np.ndarray) -> np.ndarray:
    """An angle brought into [0, 2 pi).

    ``np.mod`` alone rounds a tiny negative angle up to 2 pi itself:

    >>> float(np.mod(-1e-17, TWO_PI)) == TWO_PI, float(wrap_angle(-1e-17))
    (True, 0.0)
    """
    ang = np.mod(a, TWO_PI)
    return np.where(ang >= TWO_PI, 0.0, ang) + 0.0  # + 0.0: no negative zero either


def signed_angle(a: np.ndarray, b: np.ndarray, axis: np.ndarray) -> np.ndarray:
    """Angle from ``a`` to ``b`` about ``axis`` (right hand), in [0, 2 pi)."""
    return wrap_angle(np.arctan2(dot(axis, cross(a, b)), dot(a, b)))


@dataclass(frozen=True)
class Elements:
    """Classical elements, each an array over the batch (km, rad, s)."""

    sma: np.ndarray
    ecc: np.ndarray
    inclination: np.ndarray
    raan: np.ndarray
    argp: np.ndarray
    anomaly: np.ndarray  # true anomaly; argument of latitude / true longitude if circular
    periapsis: np.ndarray  # radius
    apoapsis: np.ndarray  # radius; inf for open orbits
    p: np.ndarray  # semi-latus rectum
    period: np.ndarray  # inf for open orbits
    energy: np.ndarray  # specific orbital energy, km2/s2

    @property
    def circular(self) -> np.ndarray:
        return self.ecc < CIRCULAR_ECC

    @property
    def equatorial(self) -> np.ndarray:
        return (self.inclination < EQUATORIAL_RAD) | (self.inclination > np.pi - EQUATORIAL_RAD)

    @property
    def closed(self) -> np.ndarray:
        return self.ecc < 1.0


@dataclass(frozen=True)
class Frame:
    """The orbit's own directions: normal, node line, periapsis line (reference if none)."""

    h: np.ndarray  # unit angular momentum
    node: np.ndarray  # unit ascending-node direction (x axis for equatorial orbits)
    periapsis: np.ndarray  # unit eccentricity direction (node for circular orbits)
    e_vec: np.ndarray  # eccentricity vector itself


def frame(r: np.ndarray, v: np.ndarray, mu: float | np.ndarray) -> Frame:
    mu = np.asarray(mu, dtype=float)[..., None] if np.ndim(mu) else mu
    hvec = cross(r, v)
    h = unit(hvec)
    nvec = cross(np.broadcast_to(Z, hvec.shape), hvec)
    equatorial = norm(nvec) <= np.sin(EQUATORIAL_RAD) * norm(hvec)
    node = np.where(equatorial[..., None], X, unit(nvec))
    rn = norm(r)[..., None]
    e_vec = ((dot(v, v)[..., None] - mu / rn) * r - dot(r, v)[..., None] * v) / mu
    circular = norm(e_vec) < CIRCULAR_ECC
    periapsis = np.where(circular[..., None], node, unit(e_vec))
    return Frame(h=h, node=node, periapsis=periapsis, e_vec=e_vec)


def periapsis_radius(r: np.ndarray, v: np.ndarray, mu: float) -> tuple[np.ndarray, np.ndarray]:
    """The periapsis radius of the conic through (r, v), and whether it is closed:
    p / (1 + e) from the angular momentum and the energy alone (the cheap part of
    ``elements_from_state``).  Closed means bound (negative energy): a radial orbit has
    e = 1 and a periapsis at the centre, and still falls back, whichever way it moves.

    >>> r, v = np.array([[7000.0, 0, 0]]), np.array([[0, 8.0, 0]])
    >>> el = elements_from_state(r, v, 398600.4418)
    >>> bool(np.isclose(periapsis_radius(r, v, 398600.4418)[0][0], el.periapsis[0]))
    True
    """
    h = cross(r, v)
    h2 = dot(h, h)
    energy = 0.5 * dot(v, v) - mu / norm(r)
    ecc = np.sqrt(np.maximum(1.0 + 2.0 * energy * h2 / (mu * mu), 0.0))
    return h2 / mu / (1.0 + ecc), (ecc < 1.0) | (energy < 0.0)


def elements_from_state(r: np.ndarray, v: np.ndarray, mu: float) -> Elements:
    r = np.atleast_2d(np.asarray(r, dtype=float))
    v = np.atleast_2d(np.asarray(v, dtype=float))
    f = frame(r, v, mu)
    hvec = cross(r, v)
    hmag = norm(hvec)
    rmag = norm(r)
    energy = 0.5 * dot(v, v) - mu / rmag
    ecc = norm(f.e_vec)
    p = hmag**2 / mu
    with np.errstate(divide="ignore", invalid="ignore"):
        sma = np.where(np.abs(energy) > 0, -mu / (2.0 * energy), np.inf)
    inc = np.arctan2(np.hypot(f.h[..., 0], f.h[..., 1]), f.h[..., 2])  # well-conditioned at 0
    raan = wrap_angle(np.arctan2(f.node[..., 1], f.node[..., 0]))
    argp = signed_angle(f.node, f.periapsis, f.h)
    anomaly = signed_angle(f.periapsis, r, f.h)
    periapsis = p / (1.0 + ecc)
    closed = ecc < 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        apoapsis = np.where(closed, p / np.where(closed, 1.0 - ecc, 1.0), np.inf)
        period = np.where(closed, TWO_PI * np.sqrt(np.abs(sma) ** 3 / mu), np.inf)
    return Elements(sma, ecc, inc, raan, argp, anomaly, periapsis, apoapsis, p, period, energy)


def plane_normal(inclination: np.ndarray, raan: np.ndarray) -> np.ndarray:
    """Unit angular-momentum direction of the plane with these angles."""
    si = np.sin(inclination)
    return np.stack([np.sin(raan) * si, -np.cos(raan) * si, np.cos(inclination)], axis=-1)


def state_from_elements(
    mu: float,
    sma: np.ndarray,
    ecc: np.ndarray,
    inclination: np.ndarray,
    raan: np.ndarray,
    argp: np.ndarray,
    anomaly: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Position and velocity from elements in the conventions of this module.

    ``sma`` is negative for a hyperbola.  For a circular orbit pass argp = 0 and the
    argument of latitude as ``anomaly``; for an equatorial one raan = 0.
    """
    sma, ecc, inclination, raan, argp, anomaly = np.broadcast_arrays(
        *(np.atleast_1d(np.asarray(x, dtype=float)) for x in
          (sma, ecc, inclination, raan, argp, anomaly)))
    p = sma * (1.0 - ecc) * (1.0 + ecc)  # not 1 - e^2: that loses digits near e = 1
    h = np.sqrt(mu * p)
    node = np.stack([np.cos(raan), np.sin(raan), np.zeros_like(raan)], axis=-1)
    normal = plane_normal(inclination, raan)
    in_plane = cross(normal, node)
    u = argp + anomaly
    rhat = np.cos(u)[..., None] * node + np.sin(u)[..., None] * in_plane
    that = cross(normal, rhat)
    rmag = p / (1.0 + ecc * np.cos(anomaly))
    vr = mu / h * ecc * np.sin(anomaly)
    vt = h / rmag
    r = rmag[..., None] * rhat
    v = vr[..., None] * rhat + vt[..., None] * that
    return r, v


def local_frame(r: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The burn frame: along (velocity), cross (orbit normal r x v), radial (v x (r x v))."""
    along = unit(v)
    normal = unit(cross(r, v))
    return along, normal, cross(along, normal)
