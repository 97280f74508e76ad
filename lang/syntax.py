"""The syntax tree of a plan: plain frozen dataclasses, each with its source span.

Nothing is evaluated here.  The compiler lowers these nodes to steps; the formatter
turns them back into canonical text; the checks and the diff read them for names and
spans.  Keywords are kept as the lowercase words of the language (``"apoapsis"``,
``"ascending node"``), so a node prints back as what the user wrote.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import Source, Span
from .units import UNITS, to_internal


@dataclass(frozen=True)
class Quantity:
    """A number with its unit as written: ``35786 km``, ``5 %``, ``0.1`` (no unit)."""

    number: str  # the digits exactly as written, so the formatter keeps them
    unit: str  # "" for a bare number
    span: Span

    @property
    def value(self) -> float:
        return float(self.number)

    @property
    def dimension(self) -> str:
        return UNITS[self.unit][0]

    def internal(self) -> float:
        """The value in the compiler's internal unit (km, km/s, s, kg, N, rad, ...)."""
        return to_internal(self.value, self.unit)

    def text(self) -> str:
        return f"{self.number} {self.unit}" if self.unit else self.number


@dataclass(frozen=True)
class Name:
    """A name as written (a craft, engine, body or step), with its span."""

    text: str
    span: Span


@dataclass(frozen=True)
class Distance:
    """An altitude above the equatorial radius, or with ``radius`` a radius."""

    quantity: Quantity
    is_radius: bool
    span: Span


@dataclass(frozen=True)
class Where:
    """Where a burn or a coast ends: an apsis, a node, a true anomaly, a radius, or here.

    ``next`` (`at next apoapsis`) takes the next pass of the place even when the craft
    stands there now; ``distance`` is the altitude or radius of a ``radius`` place.
    """

    kind: str  # periapsis | apoapsis | ascending node | descending node | node | crossing | anomaly
    # | radius
    angle: Quantity | None
    span: Span
    distance: Distance | None = None
    next: bool = False


@dataclass(frozen=True)
class SunSynchronous:
    """``sun-synchronous`` in place of an inclination: the inclination whose secular J2
    node drift matches the Sun's mean motion, at the orbit's size (found by lowering)."""

    span: Span

    def text(self) -> str:
        return "sun-synchronous"


@dataclass(frozen=True)
class Field:
    """``key value`` inside a block or a start orbit: ``gm 398600.4418 km3/s2``."""

    key: str
    value: Quantity | Distance
    span: Span


@dataclass(frozen=True)
class Goal:
    """A burn or transfer goal, or an explicit component.

    kind: apoapsis | periapsis | circular | inclination | raan | sma | ecc | argp | period |
    vinf | c3 (goals), along | cross | radial | velocity | normal | binormal | transverse
    (explicit components)
    """

    kind: str
    value: Quantity | Distance | None
    span: Span
    revs: Quantity | None = None  # `phase ANGLE in N rev`: the phasing orbit's revolutions


@dataclass(frozen=True)
class Option:
    """A trailing step option: ``using trim``, ``margin 20 %``, ``frame rtn`` or ``fixed``."""

    key: str  # using | margin | frame | tangential | statistical | fixed | movable
    value: Name | Quantity | None  # None for the bare words
    span: Span


@dataclass(frozen=True)
class Check:
    """One condition of an ``expect``: ``circular 35786 km within 1 km``.

    comparator: within | at least | at most (``within`` with tolerance None means the
    default tolerance of the quantity's dimension).
    """

    kind: str
    value: Quantity | Distance | None
    comparator: str
    tolerance: Quantity | None
    span: Span


# --- statements -------------------------------------------------------------------


@dataclass(frozen=True)
class PlanTitle:
    """``plan "TITLE"``: the title the reports carry."""

    title: str
    span: Span


@dataclass(frozen=True)
class Around:
    """``around BODY``: the central body of the plan."""

    body: Name
    span: Span


@dataclass(frozen=True)
class BodyDef:
    """``body NAME { gm ... radius ... }``: a body the plan defines itself."""

    name: Name
    fields: tuple[Field, ...]
    span: Span


@dataclass(frozen=True)
class Engine:
    """``engine NAME isp ... thrust ...`` inside a craft block."""

    name: Name
    fields: tuple[Field, ...]  # isp, thrust
    span: Span


@dataclass(frozen=True)
class CraftDef:
    """``craft NAME { ... }``: the craft's masses and its engines."""

    name: Name
    fields: tuple[Field, ...]  # dry, propellant
    engines: tuple[Engine, ...]
    span: Span


@dataclass(frozen=True)
class Setting:
    """A plan-wide setting: ``margin 5 %``, ``reserve 25 m/s``, ``ceiling 150000 km`` (an
    altitude) or ``ceiling radius 156378 km`` (from the centre), ``gravity j2`` (the
    model of the coasts: ``point-mass`` or ``j2``), ``drift at most 90 d`` (the longest
    wait a drift may take, key ``drift``)."""

    key: str
    value: Quantity | None  # None for a setting that names a choice (``word``)
    span: Span
    is_radius: bool = False
    word: Name | None = None  # a setting that names a choice: ``burns finite``


@dataclass(frozen=True)
class Epoch:
    """``epoch 2027-03-01T00:00:00 UTC``: the date and time of the start orbit, in a
    time scale (what `apsidal export` writes as the epoch of the state)."""

    timestamp: str  # ISO 8601 as written, without a zone: `2027-03-01T00:00:00`
    scale: str  # UTC | TAI | TT | GPS | TDB
    span: Span


@dataclass(frozen=True)
class Start:
    """``start circular ...`` or ``start orbit ...``: the orbit the plan starts in."""

    form: str  # circular | orbit
    fields: tuple[Field, ...]  # for circular the first field has key "circular"
    span: Span


@dataclass(frozen=True)
class Burn:
    """``burn [NAME] [at WHERE]: GOALS OPTIONS``."""

    name: Name | None
    where: Where | None
    goals: tuple[Goal, ...]
    options: tuple[Option, ...]
    span: Span


@dataclass(frozen=True)
class Transfer:
    """``transfer [NAME] [at WHERE]: GOALS [via apoapsis D] OPTIONS``, expanded into burns."""

    name: Name | None
    where: Where | None
    goals: tuple[Goal, ...]
    via: Distance | None
    options: tuple[Option, ...]
    span: Span


@dataclass(frozen=True)
class Coast:
    """``coast NAME for 3 h`` | ``coast NAME to apoapsis`` | ``coast NAME 2.5 rev``."""

    name: Name | None
    mode: str  # for | to | rev
    duration: Quantity | None
    where: Where | None
    span: Span
    movable: bool = False  # `movable`: the reorder search may move it


@dataclass(frozen=True)
class Drop:
    """``drop NAME MASS``: mass released at this point."""

    name: Name | None
    mass: Quantity
    span: Span
    movable: bool = False


@dataclass(frozen=True)
class Allow:
    """``allow NAME 50 m/s [per year for 15 yr] [statistical] [using E] [margin X %]``."""

    name: Name | None
    amount: Quantity
    duration: Quantity | None  # with `per year for`: the amount is a yearly rate
    options: tuple[Option, ...]
    span: Span

    @property
    def movable(self) -> bool:
        return any(o.key == "movable" for o in self.options)


@dataclass(frozen=True)
class Expect:
    """``expect NAME CHECK, ...``: conditions on the state at this point."""

    name: Name | None
    checks: tuple[Check, ...]
    span: Span
    movable: bool = False


@dataclass(frozen=True)
class Entry:
    """``entry NAME at 120 km``: the chain ends where the craft comes down through the
    entry interface (``0 km``: the surface)."""

    name: Name | None
    interface: Distance
    span: Span


@dataclass(frozen=True)
class Leg:
    """``leg NAME to BODY [vinf V1 to V2 for T]``: a patched-conic leg to another body."""

    name: Name | None
    body: Name
    depart: Quantity | None  # given departure hyperbolic excess speed
    arrive: Quantity | None  # given arrival hyperbolic excess speed
    duration: Quantity | None  # given time of flight
    span: Span


@dataclass(frozen=True)
class TradeWord:
    """One token of a trade item as written: a word, a NAME.FIELD target, a number or a
    LOW..HIGH range."""

    kind: str  # word | target | number | range
    text: str
    span: Span


@dataclass(frozen=True)
class TradeItem:
    """``vary geo.circular 30000..42000 km points 25``: its first word and the rest."""

    word: TradeWord
    args: tuple[TradeWord, ...]
    span: Span


@dataclass(frozen=True)
class Trade:
    """``trade NAME: ITEM, ...``: a trade study `apsidal sweep` reads; not a step, and
    nothing `run` prices."""

    name: Name
    items: tuple[TradeItem, ...]
    span: Span


Statement = (
    PlanTitle | Around | BodyDef | CraftDef | Setting | Epoch | Start | Burn | Transfer | Coast
    | Drop | Expect | Allow | Entry | Leg | Trade
)
STEP_TYPES = (Burn, Transfer, Coast, Drop, Expect, Allow, Entry, Leg)


@dataclass(frozen=True)
class Comment:
    """A ``#`` comment, kept for the formatter."""

    text: str  # including the leading '#'
    line: int
    trailing: bool  # True when code precedes it on the same line


@dataclass(frozen=True)
class Plan:
    """A parsed plan: its statements in order, its comments and its source."""

    statements: tuple[Statement, ...]
    comments: tuple[Comment, ...]
    source: Source

    def steps(self) -> list[Statement]:
        return [s for s in self.statements if isinstance(s, STEP_TYPES)]
