"""Units and dimensions of plan quantities.

Every quantity literal in a plan is a number and an optional unit.  The unit fixes the
dimension; the compiler asks for a dimension and receives the value in the compiler's
internal unit for it (km, km/s, s, kg, N, rad, km3/s2, km2/s2, rad/s, a plain fraction for %).

>>> to_internal(35786, "km")
35786.0
>>> round(to_internal(1.5, "m/s"), 6)
0.0015
>>> dimension_of("kN")
'force'
"""

from __future__ import annotations

import math

# unit -> (dimension, factor to the compiler's internal unit of that dimension)
UNITS: dict[str, tuple[str, float]] = {
    "m": ("length", 1e-3),
    "km": ("length", 1.0),
    # IAU 2012 Resolution B2: the astronomical unit is exactly 149 597 870 700 m.
    "au": ("length", 149_597_870.700),
    "deg": ("angle", math.pi / 180.0),
    "rad": ("angle", 1.0),
    "s": ("time", 1.0),
    "min": ("time", 60.0),
    "h": ("time", 3600.0),
    "d": ("time", 86400.0),
    "yr": ("time", 365.25 * 86400.0),  # the Julian year (IAU), exactly 365.25 d
    "m/s": ("speed", 1e-3),
    "km/s": ("speed", 1.0),
    "kg": ("mass", 1.0),
    "t": ("mass", 1000.0),
    "N": ("force", 1.0),
    "kN": ("force", 1000.0),
    "mN": ("force", 1e-3),  # electric thrusters are rated in mN
    "uN": ("force", 1e-6),  # micronewtons, ASCII spelling
    "µN": ("force", 1e-6),  # U+00B5 micro sign
    "μN": ("force", 1e-6),  # U+03BC Greek mu
    "km3/s2": ("gravitational parameter", 1.0),
    "m3/s2": ("gravitational parameter", 1e-9),
    "km2/s2": ("specific energy", 1.0),
    "m2/s2": ("specific energy", 1e-6),
    # a rate of turn: J2's drift of the node (`expect raan drift 0.9856 deg/d`)
    "deg/d": ("angular rate", math.pi / 180.0 / 86400.0),
    "rad/s": ("angular rate", 1.0),
    "%": ("ratio", 0.01),
    "": ("number", 1.0),
}

# The unit each dimension is shown in when a message needs an example.
PREFERRED: dict[str, str] = {
    "length": "km",
    "angle": "deg",
    "time": "s",
    "speed": "m/s",
    "mass": "kg",
    "force": "N",
    "gravitational parameter": "km3/s2",
    "specific energy": "km2/s2",
    "angular rate": "deg/d",
    "ratio": "%",
    "number": "",
}


def dimension_of(unit: str) -> str:
    """The dimension a unit measures; ``KeyError`` for an unknown unit."""
    return UNITS[unit][0]


def to_internal(value: float, unit: str) -> float:
    """Convert ``value`` in ``unit`` to the compiler's internal unit for its dimension."""
    return float(value) * UNITS[unit][1]


def units_of(dimension: str) -> list[str]:
    """Every unit that measures ``dimension``, in table order."""
    return [u for u, (d, _) in UNITS.items() if d == dimension and u]


def suggest_unit(unit: str, dimension: str | None = None) -> str | None:
    """The known unit closest in spelling to ``unit`` (within ``dimension`` if given).

    >>> suggest_unit("kms")
    'km/s'
    >>> suggest_unit("dgr", "angle")
    'deg'
    """
    pool = units_of(dimension) if dimension else [u for u in UNITS if u]
    if unit in pool:
        return unit
    lowered = {u.lower(): u for u in pool}
    if unit.lower() in lowered and lowered[unit.lower()] != unit:
        return lowered[unit.lower()]
    squashed = {u.replace("/", "").lower(): u for u in pool}
    if unit.replace("/", "").lower() in squashed:
        return squashed[unit.replace("/", "").lower()]
    import difflib  # on a mistake only: not at start-up

    match = difflib.get_close_matches(unit, pool, n=1, cutoff=0.5)
    return match[0] if match else None
