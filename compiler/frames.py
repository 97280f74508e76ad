"""Burn frames: the directions a burn's explicit components are given and reported in.

Both frames are built from the state just before the burn, r and v, and share their
normal N = (r x v) / |r x v|:

* ``vnb`` (velocity-normal-binormal): V = v / |v|, N, and B = V x N, in the plane and
  perpendicular to the velocity (outward where the craft climbs or circles).  The
  older component names `along`, `cross` and `radial` are this frame: along = V,
  cross = N, radial = B.
* ``rtn`` (radial-transverse-normal): R = r / |r|, T = N x R (in the plane,
  perpendicular to the radius, in the direction of motion), N.

On a circular orbit the two frames coincide up to the order of their axes (V = T,
B = R).

>>> import numpy as np
>>> r = np.array([[7000.0, 0, 0]]); v = np.array([[0.5, 7.5, 0]])
>>> [round(float(x), 6) for x in components("rtn", r, v, np.array([[1.0, 2.0, 3.0]]))[0]]
[1.0, 2.0, 3.0]
>>> [round(float(x), 6) + 0.0 for x in components("vnb", r, v, v / np.linalg.norm(v))[0]]
[1.0, 0.0, 0.0]
"""

from __future__ import annotations

import numpy as np

from .state import cross, dot, local_frame, unit

NAMES = {"vnb": ("velocity", "normal", "binormal"), "rtn": ("radial", "transverse", "normal")}
LEGACY = ("along", "cross", "radial")  # today's names of the vnb axes, in the same order


def axes(name: str, r: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The three unit axes of frame ``name`` at the state (r, v), in the frame's order."""
    if name == "vnb":
        return local_frame(r, v)
    normal = unit(cross(r, v))
    radial = unit(r)
    return radial, cross(normal, radial), normal


def components(name: str, r: np.ndarray, v: np.ndarray, dv: np.ndarray) -> np.ndarray:
    """An inertial velocity change ``dv`` (B, 3) as components in frame ``name``."""
    a, b, c = axes(name, r, v)
    return np.stack([dot(dv, a), dot(dv, b), dot(dv, c)], axis=-1)


def inertial(name: str, r: np.ndarray, v: np.ndarray, comps) -> np.ndarray:
    """Components in frame ``name`` as an inertial velocity change (B, 3)."""
    a, b, c = axes(name, r, v)
    # a component may be an array over the batch (a trade's variants): one per element
    x, y, z = (np.asarray(k, dtype=float)[..., None] if np.ndim(k) else k for k in comps)
    return x * a + y * b + z * c
