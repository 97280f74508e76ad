"""The catalogue of central bodies a plan can fly around (``around earth``).

The constants live in ``bodies.toml`` next to this module, each with its published
source.  The file is read once; every :class:`Body` is in the compiler's units (km,
km3/s2).  Names are matched without regard to case, and ``names()`` lists the words a
plan may write, in catalogue order (the Sun, then each planet followed by its moons).

>>> earth = lookup("Earth")
>>> earth.name, earth.gm, earth.radius
('Earth', 398600.4418, 6378.1366)
>>> round(earth.soi)
924649
>>> lookup("vulcan") is None
True
>>> names()[:4]
['sun', 'mercury', 'venus', 'earth']

``j2`` is referred to ``radius``: where a J2 was published with another reference radius
R, the loader stores J2 * (R / radius)^2, which describes the same degree-2 field.
``soi`` is Laplace's sphere-of-influence radius around ``parent``; :func:`laplace_soi`
computes it for a body a plan defines itself.
"""

from __future__ import annotations

import functools
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Any

# Package data beside this module (see pyproject.toml), found from the module's own file
# as lang/parse.py finds the grammar, however the module was imported; importlib.resources
# would cost `apsidal run` about 2 ms of imports to say the same.
_DATA_FILE = "bodies.toml"
_SOURCE_ORDER = ("gm", "radius", "j2", "orbit", "soi")


@dataclass(frozen=True)
class Body:
    """A central body: gravitational parameter, equatorial radius and where they come from."""

    name: str
    gm: float  # km3/s2
    radius: float  # km, equatorial; altitudes in a plan are measured above it
    j2: float | None  # referred to ``radius``
    soi: float | None  # km, Laplace sphere of influence around ``parent``
    parent: str | None  # catalogue key of the body it orbits
    source: str  # the published source of each value
    orbit_sma: float | None = None  # km, the semi-major axis of its orbit around ``parent``


def laplace_soi(sma_km: float, gm_body: float, gm_parent: float) -> float:
    """Laplace's sphere-of-influence radius a * (m / M)^(2/5), in km.

    ``sma_km`` is the semi-major axis of the body's orbit around its parent; the two
    gravitational parameters stand in for the masses (G cancels).

    >>> round(laplace_soi(384400.0, 4902.800118, 398600.4418))
    66183
    >>> laplace_soi(7000.0, 5.0, 1.0)
    Traceback (most recent call last):
      ...
    ValueError: a sphere of influence needs a body lighter than its parent (gm 5 vs 1 km3/s2)
    """
    given = {"sma": sma_km, "gm of the body": gm_body, "gm of the parent": gm_parent}
    for label, value in given.items():
        if not (math.isfinite(value) and value > 0.0):
            raise ValueError(f"a sphere of influence needs a positive, finite {label}, not {value}")
    if gm_body >= gm_parent:
        raise ValueError(
            "a sphere of influence needs a body lighter than its parent "
            f"(gm {gm_body:g} vs {gm_parent:g} km3/s2)"
        )
    return sma_km * (gm_body / gm_parent) ** 0.4


def catalogue() -> dict[str, Body]:
    """Every catalogue body by its lowercase key, in catalogue order (a fresh copy)."""
    return dict(_table())


_GIVEN: dict[str, Body] = {}  # the bodies lookup has returned: one object each, however read


def lookup(name: str) -> Body | None:
    """The catalogue body called ``name`` (any case, surrounding blanks ignored), or None."""
    key = name.strip().lower()
    if key not in _GIVEN:
        # before the whole catalogue is read, this body alone
        body = (None if _table.cache_info().currsize else _one(key)) or _table().get(key)
        if body is None:
            return None
        _GIVEN[key] = body
    return _GIVEN[key]


def names() -> list[str]:
    """The keys a plan can write after ``around``, in catalogue order."""
    return list(_table())


@functools.cache
def _text() -> str:
    return Path(__file__).with_name(_DATA_FILE).read_text(encoding="utf-8")


_HEADER = re.compile(r"^\[([A-Za-z0-9_-]+)(?:\.[A-Za-z0-9_-]+)*\][ \t]*$", re.MULTILINE)


def _one(key: str) -> Body | None:
    """The body ``key`` read from its own tables (``[key]``, ``[key.source]``) of the
    file, or None where that cannot be done by the headers alone: `apsidal run` reads one
    body, and reading all of them cost it 2 ms.  Anything this cannot promise (no such
    header, a multi-line string that might hide one, a table it does not understand, a
    parent not in the file) is left to the whole catalogue, which is read then."""
    text = _text()
    if '"""' in text or "'''" in text:
        return None
    heads = list(_HEADER.finditer(text))
    ends = [h.start() for h in heads[1:]] + [len(text)]
    own = "".join(text[h.start():end] for h, end in zip(heads, ends) if h[1].lower() == key)
    try:
        raw = tomllib.loads(own)
    except tomllib.TOMLDecodeError:
        return None
    if len(raw) != 1 or next(iter(raw)).lower() != key:
        return None
    [(name, entry)] = raw.items()
    try:
        body = _body(name, entry)
    except ValueError:
        return None
    if body.parent is not None and body.parent not in {h[1].lower() for h in heads}:
        return None  # the whole catalogue says what is wrong
    return body


@functools.cache
def _table() -> Mapping[str, Body]:
    raw = tomllib.loads(_text())
    table = {key.lower(): _body(key, entry) for key, entry in raw.items()}
    for key, body in _GIVEN.items():  # read alone before: the same values, the same object
        if table.get(key) != body:
            raise ValueError(f"{_DATA_FILE}: [{key}] reads differently alone than in the file")
        table[key] = body
    for key, body in table.items():
        if body.parent is not None and body.parent not in table:
            raise ValueError(f"{_DATA_FILE}: [{key}] orbits {body.parent!r}, which is not in it")
    return MappingProxyType(table)


def _body(key: str, entry: Mapping[str, Any]) -> Body:
    def number(field: str) -> float:
        value = entry.get(field)
        is_number = isinstance(value, (int, float)) and not isinstance(value, bool)
        if not (is_number and math.isfinite(value)):
            raise ValueError(f"{_DATA_FILE}: [{key}] needs a finite number for {field}: {value!r}")
        return float(value)

    gm, radius = number("gm_km3_s2"), number("radius_km")
    if gm <= 0.0 or radius <= 0.0:
        raise ValueError(f"{_DATA_FILE}: [{key}] needs a positive gm_km3_s2 and radius_km")
    j2 = None
    if "j2" in entry:
        j2 = number("j2") * (number("j2_radius_km") / radius) ** 2
    parent = entry.get("parent")
    soi = number("soi_km") if parent is not None else None
    sources = entry.get("source", {})
    source = "; ".join(f"{f}: {sources[f]}" for f in _SOURCE_ORDER if sources.get(f))
    if not source:
        raise ValueError(f"{_DATA_FILE}: [{key}] names no source for its values")
    return Body(
        name=str(entry.get("name", key)),
        gm=gm,
        radius=radius,
        j2=j2,
        soi=soi,
        parent=None if parent is None else str(parent).lower(),
        source=source,
        orbit_sma=number("orbit_sma_km") if "orbit_sma_km" in entry else None,
    )


def moons_within(body: Body, radius_km: float) -> list[Body]:
    """Catalogue bodies that orbit ``body`` inside ``radius_km`` of its centre: what a
    trajectory reaching that far passes (and is pulled by, beyond the two-body model)."""
    return [b for b in _table().values() if b.parent == body.name.lower()
            and b.orbit_sma is not None and b.orbit_sma < radius_km]
