"""Lowering of a burn's explicit components (in their frame) and of its goals on the conic.

``lower.Lowerer._burn`` hands these the goals of one burn by kind.  They decide what
one burn may combine, turn each value into internal units, and refuse the rest with the
goal's own span and a hint (docs/language.md, "Burns"):

* components: `along`, `cross`, `radial` without a frame (the velocity-normal-binormal
  frame under its older names, kept so every existing plan means what it meant);
  `velocity`, `normal`, `binormal` with `frame vnb`; `radial`, `transverse`, `normal`
  with `frame rtn`.
* at most one energy goal (`sma`, `period`, `vinf`, `c3`); at most two of periapsis,
  apoapsis, an energy goal and `ecc` (two fix the conic); `circular` alone among them.
* `argp to` alone (today's size and shape) or with two of them, never with a plane
  goal (it turns the orbit within its own plane).
"""

from __future__ import annotations

import numpy as np
from apsidal.lang.errors import PlanError

from . import frames
from .conic_goals import ENERGY_GOALS, ConicGoals, Unreachable, conic_of

COMPONENT_WORDS = frozenset(frames.LEGACY) | frozenset(
    w for names in frames.NAMES.values() for w in names)
CONIC_WORDS = (*ENERGY_GOALS, "ecc", "argp")
PLANE_WORDS = ("inclination", "raan")
_FRAME_OF = {"velocity": "vnb", "binormal": "vnb", "transverse": "rtn"}
_VNB_WORD = dict(zip(frames.LEGACY, frames.NAMES["vnb"]))


def _err(message: str, node, hint: str | None = None) -> PlanError:
    return PlanError(message, node.span, None, hint)


def components(goals: dict, frame, node) -> tuple[tuple[float, float, float], str]:
    """The components of an explicit burn, in the order of their frame, and the frame.

    ``frame`` is the `frame` option (an ast.Option) or None; ``goals`` maps each
    component word to its goal node.
    """
    name = frame.value.text if frame is not None else None
    allowed = frames.NAMES[name] if name else frames.LEGACY
    for word, goal in goals.items():
        if word in allowed:
            continue
        if name is None:
            owner = _FRAME_OF.get(word)
            if owner is None:  # `normal`: the same axis in both frames
                raise _err(f"`{word}` is a component of the named frames", goal,
                           "add `frame rtn` (radial, transverse, normal) or `frame vnb` "
                           "(velocity, normal, binormal); without a frame the components are "
                           "`along`, `cross` (the normal) and `radial`")
            raise _err(f"`{word}` is a component of the {owner} frame", goal,
                       f"add `frame {owner}` to the burn"
                       + (" (in it `radial` is along the position vector; without a frame "
                          "`radial` is v x (r x v), in the plane and perpendicular to the "
                          "velocity)" if owner == "rtn" else ""))
        if name == "vnb" and word in _VNB_WORD:
            raise _err(f"with `frame vnb` the components are `velocity`, `normal` and "
                       f"`binormal`, not `{word}`", goal,
                       f"write `{_VNB_WORD[word]}`" + (": `radial` along the position "
                                                       "vector is a component of `frame rtn`"
                                                       if word == "radial" else ""))
        raise _err(f"`{word}` is not a component of the {name} frame", goal,
                   f"with `frame {name}` the components are "
                   + ", ".join(f"`{w}`" for w in allowed))
    vec = tuple(goals[k].value.internal() if k in goals else 0.0 for k in allowed)
    return vec, name or "vnb"


def _energy(kind: str, goal, mu: float) -> float:
    """Specific orbital energy (km2/s2) an energy goal names."""
    x = goal.value.internal()
    if kind == "vinf":
        return 0.5 * x * x
    if kind == "c3":
        return 0.5 * x
    if kind == "period":
        x = (mu * (x / (2.0 * np.pi)) ** 2) ** (1.0 / 3.0)
    if x == 0.0:
        raise _err("an sma of zero names no orbit", goal,
                   "the sma is measured from the centre: positive for a closed orbit, "
                   "negative for an open one")
    return -mu / (2.0 * x)


def conic(goals: dict, kw: dict, mu: float, radius: float) -> dict:
    """Burn fields for the goals on energy, eccentricity and apse line; ``kw`` holds the
    apsis and plane goals already lowered (radii, rad)."""
    energies = [k for k in ENERGY_GOALS if k in goals]
    if len(energies) > 1:
        raise _err(f"`{energies[0]} to` and `{energies[1]} to` both set the orbit's energy",
                   goals[energies[1]], f"keep one of them (`{energies[0]} to` or "
                   f"`{energies[1]} to`)")
    out: dict = {}
    if energies:
        out["energy"] = _energy(energies[0], goals[energies[0]], mu)
        out["energy_goal"] = energies[0]
    if "ecc" in goals:
        out["ecc"] = goals["ecc"].value.value
    if "argp" in goals:
        out["argp"] = float(np.mod(goals["argp"].value.internal(), 2.0 * np.pi))
    if not out:
        return out
    new = [k for k in CONIC_WORDS if k in goals]
    if "circular" in goals:
        what = ("a circular orbit has no apse line to turn" if new == ["argp"] else
                "`circular` already fixes the size and shape")
        raise _err(what, goals["circular"], f"drop `circular`, or drop `{new[0]} to`")
    named = [k for k in ("periapsis", "apoapsis", *ENERGY_GOALS, "ecc") if k in goals]
    if len(named) > 2:
        raise _err(f"{', '.join(f'`{k}`' for k in named[:-1])} and `{named[-1]}` name the "
                   "orbit's size and shape more than once: two of them fix it",
                   goals[named[2]], "keep two (any two of periapsis, apoapsis, an energy "
                   "goal and ecc)")
    if "argp" in goals:
        plane = [k for k in PLANE_WORDS if k in goals]
        if plane:
            raise _err("`argp to` turns the orbit within its own plane; it cannot share a "
                       "burn with a plane change", goals[plane[0]],
                       "turn the plane in a burn of its own, before or after the apse line")
        if len(named) == 1:
            raise _err(f"`argp to` with `{named[0]}` alone leaves the rest of the shape free",
                       goals["argp"], "give a second shape goal (two of periapsis, apoapsis, "
                       "an energy goal and ecc fix the orbit), or `argp to` alone to keep "
                       "today's size and shape")
    if len(named) == 2:
        try:
            _, e = conic_of(ConicGoals(kw.get("periapsis"), kw.get("apoapsis"),
                                       out.get("energy"), out.get("energy_goal"),
                                       out.get("ecc")), mu, radius)
        except Unreachable as why:
            raise _err(why.args[0], goals[named[1]], why.args[1]) from None
        if "argp" in goals and e < 1e-9:
            raise _err("the orbit these goals name is circular: it has no apse line to turn",
                       goals["argp"], "drop `argp to`, or give an eccentric orbit")
    return out
