"""The lowered plan: a craft, a start state and an ordered list of typed steps.

All numbers are in internal units (km, km/s, s, kg, N, rad).  Radii, not altitudes:
lowering adds the body's equatorial radius.  Each step keeps the span of the statement
it came from, so a failure deep in the evaluator points at the line that caused it.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from apsidal.lang.errors import Source, Span
from apsidal.lang.syntax import Plan

from .bodies import Body

G0 = 9.80665  # standard gravity, m/s^2 (CGPM 1901, exact)


@dataclass(frozen=True)
class EngineSpec:
    """An engine of the craft, in internal units."""

    name: str
    isp: float  # s
    thrust: float  # N
    mixture: float | None = None  # oxidiser-to-fuel mass ratio of a two-component engine

    @property
    def exhaust_speed(self) -> float:
        """Effective exhaust speed in km/s."""
        return self.isp * G0 / 1000.0


@dataclass(frozen=True)
class Craft:
    """The craft: dry mass, the propellant load and its engines (kg, s, N)."""

    name: str
    dry: float  # kg
    propellant: float  # kg, the load
    engines: tuple[EngineSpec, ...]
    residual_kg: float = 0.0  # propellant that cannot be used, as a mass
    residual_share: float = 0.0  # ... or as a share of the load
    fuel: float | None = None  # kg, when the craft loads its components apart
    oxidiser: float | None = None

    @property
    def components(self) -> bool:
        """Fuel and oxidiser are loaded (and tracked) apart."""
        return self.fuel is not None

    def residual_of(self, load: float) -> float:
        """The unusable part of a load (kg)."""
        return self.residual_kg + self.residual_share * load

    @property
    def residual(self) -> float:
        return self.residual_of(self.propellant)

    @property
    def usable(self) -> float:
        """The part of the load the engines can burn (kg)."""
        return self.propellant - self.residual

    @property
    def default_engine(self) -> EngineSpec:
        return self.engines[0]

    def engine(self, name: str) -> EngineSpec | None:
        return next((e for e in self.engines if e.name == name), None)


@dataclass(frozen=True)
class Place:
    """Where a burn happens or a coast ends."""

    # here | periapsis | apoapsis | ascending node | descending node | node | anomaly |
    # crossing (where the current plane meets the plane the burn's goals name, or with an
    # `argp to` goal where the current orbit meets the orbit they name; the cheaper of the
    # two, like `node`) | radius (where the orbit crosses a radius, the next time)
    kind: str
    angle: float | None = None  # rad, for anomaly
    radius: float | None = None  # km from the centre, for radius
    next: bool = False  # the next pass, a revolution on when the craft stands there now
    shown: str = ""  # a radius place as the plan wrote it (`500 km`, `radius 6878 km`)

    def label(self) -> str:
        lead = "next " if self.next else ""
        if self.kind == "anomaly":
            return f"{lead}anomaly {np.degrees(self.angle):g} deg"
        if self.kind == "radius":
            return lead + (self.shown or f"radius {self.radius:g} km")
        return lead + self.kind


HERE = Place("here")


@dataclass(frozen=True)
class Burn:
    """A burn: where, its goals (target radii, angles) or explicit vector, engine, margin."""

    name: str
    place: Place
    periapsis: float | None = None  # target radius, km
    apoapsis: float | None = None
    circular: bool = False
    circular_radius: float | None = None
    inclination: float | None = None  # rad
    raan: float | None = None
    normal: tuple[float, float, float] | None = None  # explicit target plane normal
    apsis_here: bool = False  # the current point becomes the other apsis (transfer burns)
    tangential: bool = False  # one apsis goal flown keeping the flight-path angle
    # km/s in ``frame``: vnb (velocity, normal, binormal: today's along, cross, radial)
    # or rtn (radial, transverse, normal)
    vector: tuple[float, float, float] | None = None
    engine: EngineSpec | None = None
    margin: float = 0.0
    span: Span | None = None
    fixed: bool = False  # pinned in place: the reorder search does not move it
    movable: bool = False  # an explicit-vector burn the plan lets the search move
    energy: float | None = None  # specific orbital energy, km2/s2 (sma, period, vinf or c3)
    energy_goal: str | None = None  # the goal that named it, for messages
    ecc: float | None = None  # target eccentricity
    argp: float | None = None  # rad: rotate the apse line to this argument of periapsis
    frame: str = "vnb"  # the frame of ``vector`` and of the reported components: vnb | rtn
    kind: str = field(default="burn", init=False)

    @property
    def changes_plane(self) -> bool:
        return self.inclination is not None or self.raan is not None or self.normal is not None

    @property
    def changes_shape(self) -> bool:
        return (self.circular or self.periapsis is not None or self.apoapsis is not None
                or self.energy is not None or self.ecc is not None or self.argp is not None)

    @property
    def one_apsis(self) -> bool:
        """Only one apsis is named (the other is free): no other goal on size or shape."""
        return ((self.periapsis is None) != (self.apoapsis is None) and not self.circular
                and self.energy is None and self.ecc is None and self.argp is None)


@dataclass(frozen=True)
class Transfer:
    """A composite manoeuvre that expands into burns named NAME/1, NAME/2, ..."""

    name: str
    place: Place
    form: str  # hohmann | bielliptic | plane-change | phasing
    radius: float | None = None  # target circular radius, km
    via: float | None = None  # intermediate apoapsis radius, km
    inclination: float | None = None
    raan: float | None = None
    split: float | None = None  # fixed share of the plane change at the first burn
    engine: EngineSpec | None = None
    margin: float = 0.0
    span: Span | None = None
    fixed: bool = False
    phase: float | None = None  # rad, phasing: ahead (> 0) or behind (< 0) on return
    revs: int | None = None  # phasing: revolutions of the phasing orbit
    kind: str = field(default="transfer", init=False)

    @property
    def changes_plane(self) -> bool:
        return self.inclination is not None or self.raan is not None


@dataclass(frozen=True)
class Coast:
    """A coast for a time, to a place, or for whole revolutions."""

    name: str
    mode: str  # for | to | rev
    duration: float | None = None  # s
    place: Place | None = None
    revs: float | None = None  # whole or fractional revolutions (periods of time)
    span: Span | None = None
    movable: bool = False
    kind: str = field(default="coast", init=False)


@dataclass(frozen=True)
class Drop:
    """Mass released at this point of the chain (kg)."""

    name: str
    mass: float
    span: Span | None = None
    movable: bool = False
    kind: str = field(default="drop", init=False)


@dataclass(frozen=True)
class CheckSpec:
    """One condition of an expectation, in internal units."""

    kind: str  # periapsis apoapsis circular sma ecc inclination raan argp period mass propellant
               # vinf c3 elapsed anomaly
    target: float  # internal units; radii for periapsis/apoapsis/circular
    comparator: str  # within | at least | at most
    tolerance: float
    span: Span | None = None


@dataclass(frozen=True)
class Expect:
    """An expectation: conditions on the state at this point of the chain."""

    name: str
    checks: tuple[CheckSpec, ...]
    span: Span | None = None
    movable: bool = False
    kind: str = field(default="expect", init=False)


@dataclass(frozen=True)
class Allow:
    """A budget line that costs delta-v and propellant but does not move the orbit."""

    name: str
    dv: float  # km/s, the whole line (a rate already multiplied by its duration)
    statistical: bool = False  # a 3-sigma figure: combined with the others by RSS
    engine: EngineSpec | None = None
    margin: float = 0.0
    span: Span | None = None
    movable: bool = False
    rate: float | None = None  # km/s per year, when given as a rate
    years: float | None = None
    kind: str = field(default="allow", init=False)


@dataclass(frozen=True)
class Entry:
    """The end of the chain: a coast down to the entry interface, the next time the
    craft descends through that radius (the body's radius for an impact)."""

    name: str
    radius: float  # km from the centre
    shown: str = ""  # as the plan wrote it: `120 km`
    span: Span | None = None
    kind: str = field(default="entry", init=False)


Step = Burn | Transfer | Coast | Drop | Expect | Allow | Entry


@dataclass(frozen=True)
class Program:
    """The lowered plan: body, craft, settings, start state and steps."""

    title: str
    body: Body
    craft: Craft
    margin: float  # fraction
    reserve: float  # km/s
    start_r: np.ndarray  # (3,)
    start_v: np.ndarray  # (3,)
    steps: tuple[Step, ...]
    source: Source
    plan: Plan | None = None
    start_span: Span | None = None
    ceiling: float | None = None  # highest apoapsis radius (km) a suggested detour may use

    def allowance_sums(self) -> tuple[float, float, float] | None:
        """(deterministic sum, root-sum-square of the statistical lines, their plain sum)
        of the plan's allowances, km/s; None without any."""
        lines = [s for s in self.steps if isinstance(s, Allow)]
        if not lines:
            return None
        stat = [s.dv for s in lines if s.statistical]
        return (sum(s.dv for s in lines if not s.statistical),
                float(np.sqrt(sum(x * x for x in stat))), sum(stat))

    @property
    def statistical_scale(self) -> float:
        """The factor on each statistical allowance so that together they price their
        root-sum-square: sqrt(sum dv_i^2) / sum dv_i (1 when there are none)."""
        sums = self.allowance_sums()
        return sums[1] / sums[2] if sums and sums[2] > 0 else 1.0

    def with_steps(self, steps) -> Program:
        return replace(self, steps=tuple(steps))

    @property
    def descent_from(self) -> int | None:
        """Where a plan that ends with `entry` starts its way down: the index of its last
        burn or transfer (-1 when it has none: the start orbit is already on its way).
        From there on the conic may pass under the surface; None without an entry."""
        if not self.steps or not isinstance(self.steps[-1], Entry):
            return None
        # a leg starts the way down as a burn does: the arrival hyperbola may be aimed at
        # the surface (a direct entry)
        return max((i for i, s in enumerate(self.steps)
                    if isinstance(s, Burn | Transfer) or s.kind == "leg"), default=-1)
