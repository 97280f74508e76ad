"""The evaluator: steps applied to a batch of states, giving the orbit-state chain.

One code path serves every caller.  A batch holds B craft states (a leading axis on
every array); ``apply`` moves the whole batch through one step and returns the rows it
produced (one per burn, coast, drop or expectation; a transfer gives one row per burn)
and which elements failed and why.  ``run`` prices one plan as a batch of one and turns
the first failure into a located error.  The reorder search feeds thousands of states at
once through the same ``apply``.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from apsidal.lang.errors import PlanError

from . import conic_goals, frames, kepler
from .legs import in_phase, leg_rows, phases_of
from .solvers import (
    Failures,
    Shape,
    crossings,
    new_velocity,
    normal_for,
    rotate_about,
    target_plane,
)
from .state import (
    CIRCULAR_ECC,
    EQUATORIAL_RAD,
    TWO_PI,
    cross,
    dot,
    elements_from_state,
    frame,
    local_frame,
    norm,
    periapsis_radius,
    signed_angle,
    unit,
)
from .steps import (
    Allow,
    Burn,
    Coast,
    Drop,
    EngineSpec,
    Entry,
    Expect,
    Place,
    Program,
    Step,
    Transfer,
)

HERE_TOL = 1e-9  # rad: a place this close ahead is "here"
PRICED_KINDS = ("burn", "allow")  # rows that carry delta-v and propellant


def element(x, i: int) -> float:
    """Element ``i`` of a step's value: a number, or an array over the batch (a trade's
    variants), for a message worded on demand."""
    return float(x[i]) if np.ndim(x) else float(x)


@dataclass(frozen=True)
class Batch:
    r: np.ndarray  # (B, 3) km
    v: np.ndarray  # (B, 3) km/s
    mass: np.ndarray  # (B,) kg
    propellant: np.ndarray  # (B,) kg
    t: np.ndarray  # (B,) s
    dv: np.ndarray  # (B,) km/s, running total without margin
    dv_margin: np.ndarray  # (B,) km/s, running total with margin
    expect_ok: np.ndarray  # (B,) every expectation so far met

    @property
    def size(self) -> int:
        return self.r.shape[0]

    def take(self, idx) -> Batch:
        return Batch(*(getattr(self, f)[idx] for f in _FIELDS))

    def where(self, mask: np.ndarray, other: Batch) -> Batch:
        """Elementwise: self where mask, else other."""
        def pick(a, b):
            m = mask.reshape(mask.shape + (1,) * (a.ndim - 1))
            return np.where(m, a, b)
        return Batch(*(pick(getattr(self, f), getattr(other, f)) for f in _FIELDS))

    @staticmethod
    def concat(batches: list[Batch]) -> Batch:
        """The batches one after another along the batch axis."""
        return Batch(*(np.concatenate([getattr(b, f) for b in batches]) for f in _FIELDS))


_FIELDS = ("r", "v", "mass", "propellant", "t", "dv", "dv_margin", "expect_ok")


def start_batch(program: Program, size: int = 1) -> Batch:
    """The start state, ``size`` times; a program whose start state and masses are arrays
    over the batch (a trade's variants, ``compiler/sweep.py``) gives one per element."""
    ones = np.ones(size)
    craft = program.craft
    each = lambda x: np.array(np.broadcast_to(x, (size, 3)), dtype=float)
    return Batch(
        r=each(program.start_r),
        v=each(program.start_v),
        mass=ones * (craft.dry + craft.propellant),
        propellant=ones * craft.usable,  # the residual rides along as mass
        t=np.zeros(size),
        dv=np.zeros(size),
        dv_margin=np.zeros(size),
        expect_ok=np.ones(size, dtype=bool),
    )


@dataclass
class CheckResult:
    kind: str
    comparator: str
    target: float
    tolerance: float
    actual: np.ndarray
    passed: np.ndarray
    undefined: np.ndarray | None = None  # the orbit has no such value (open: no apoapsis)
    ecc: np.ndarray | None = None  # for the reason an undefined value is worded with
    apsides: tuple[np.ndarray, np.ndarray] | None = None  # `circular`: both, as radii

    def missing(self, i: int) -> str | None:
        """Why element ``i`` has no value to compare, or None when it has one."""
        if self.undefined is None or not self.undefined[i]:
            return None
        if self.kind in CLOSED_UNDEFINED:
            return (f"the orbit is closed (eccentricity {self.ecc[i]:.6f}): it has no "
                    "hyperbolic excess speed")
        what = {"period": "period", "circular": "apoapsis",
                "raan drift": "secular node drift"}.get(self.kind, self.kind)
        return (f"the orbit is open (eccentricity {self.ecc[i]:.6f}): it has no {what}")


@dataclass
class Row:
    """One reported line of the chain; arrays over the batch."""

    step: int  # index of the plan step (0-based)
    name: str
    kind: str  # burn | coast | drop | expect | allow | entry
    at: str
    after: Batch
    dv_vec: np.ndarray | None = None  # (B, 3) along, cross, radial (vnb) in km/s
    dv: np.ndarray | None = None
    dv_margin: np.ndarray | None = None
    propellant: np.ndarray | None = None
    burn_time: np.ndarray | None = None
    coast_time: np.ndarray | None = None
    duration: np.ndarray | None = None
    engine: EngineSpec | None = None
    margin: float = 0.0
    checks: list[CheckResult] = field(default_factory=list)
    v_before: np.ndarray | None = None  # (B, 3) velocity just before a burn
    covered: np.ndarray | None = None  # (B,) the load still covers this burn
    frame: str = "vnb"  # the frame the plan gave this burn in (frames.NAMES)
    # a burn priced finite (``burns finite``, compiler/finite.py): the impulsive delta-v it
    # replaces, the thrust arc's length (s, without margin) and central angle (rad), what
    # its length met, and the burn it flew (its goals, for the misses)
    dv_impulsive: np.ndarray | None = None
    finite_time: np.ndarray | None = None
    finite_arc: np.ndarray | None = None
    v_impulsive: np.ndarray | None = None  # (B, 3) the impulsive burn's velocity after
    r_impulse: np.ndarray | None = None  # (B, 3) and where it stood: the impulse point
    finite_goal: str | None = None
    spec: Burn | None = None
    # (B, 6) under `gravity j2`: r and v at the end of the thrust arc before the secular
    # drift of its second half is added (the goals are checked there; finite_price.py)
    arc_end: np.ndarray | None = None

    def take(self, idx, step: int | None = None) -> Row:
        """The row for the batch elements ``idx`` (a slice or index array keeps the
        axis), renumbered to plan step ``step`` if given."""
        part = lambda x: None if x is None else x[idx]
        return replace(
            self, step=self.step if step is None else step, after=self.after.take(idx),
            **{f: part(getattr(self, f)) for f in _ROW_ARRAYS},
            checks=[replace(c, actual=c.actual[idx], passed=c.passed[idx],
                            undefined=part(c.undefined), ecc=part(c.ecc),
                            apsides=None if c.apsides is None else
                            (c.apsides[0][idx], c.apsides[1][idx])) for c in self.checks])


_ROW_ARRAYS = ("dv_vec", "dv", "dv_margin", "propellant", "burn_time", "coast_time",
               "duration", "v_before", "covered", "dv_impulsive", "finite_time", "finite_arc",
               "v_impulsive", "r_impulse", "arc_end")


@dataclass(frozen=True)
class Context:
    mu: float
    radius: float  # body equatorial radius, km
    default_engine: EngineSpec
    margin: float
    statistical_scale: float = 1.0  # see Program.statistical_scale
    descent_from: int | None = None  # see Program.descent_from
    entry_radius: float | None = None  # the interface of the plan's `entry`, km
    interface: float | None = None  # set on the way down (``apply``): coasts stay above it
    finite: bool = False  # `burns finite`: burns are flown as finite burns
    steering: str = "velocity"  # their thrust direction: velocity | inertial
    phases: tuple = ()  # (first step, mu, radius) of each phase after a leg (legs.phases_of)
    drift: object | None = None  # a ``j2.Drift`` under `gravity j2`: coasts drift secularly
    j2: float | None = None  # the body's J2 (for sun-synchronous goals in either model)
    # (first step, Drift or None, J2) of each phase after a leg, under `gravity j2`
    phase_drifts: tuple = ()


def context_for(program: Program) -> Context:
    end = program.steps[-1] if program.steps else None
    drift = None
    if program.gravity == "j2":
        from .j2 import Drift

        drift = Drift(program.body.gm, program.body.radius, program.body.j2)
    return Context(program.body.gm, program.body.radius, program.craft.default_engine,
                   program.margin, program.statistical_scale, program.descent_from,
                   end.radius if isinstance(end, Entry) else None,
                   finite=program.burns == "finite", steering=program.steering,
                   phases=phases_of(program.steps), drift=drift, j2=program.body.j2,
                   phase_drifts=_phase_drifts(program, drift is not None))


def _phase_drifts(program: Program, drifting: bool) -> tuple:
    """(first step, Drift or None, J2) of each phase after a leg: every phase drifts with
    its own body's J2 under `gravity j2` (lowering refuses it where one has none), and
    sun-synchronous goals there read that body's J2."""
    from .j2 import Drift
    from .legs import is_leg

    return tuple((i + 1, Drift(s.body.gm, s.body.radius, s.body.j2) if drifting else None,
                  s.body.j2) for i, s in enumerate(program.steps) if is_leg(s))


def descending(ctx: Context, index: int) -> Context:
    """The context of step ``index``: past the start of a plan's way down (its last burn
    before `entry`) the conic may pass under the surface, and coasts must end above the
    entry interface instead."""
    if ctx.descent_from is None or index < ctx.descent_from:
        return ctx
    return replace(ctx, interface=ctx.entry_radius)


# --- getting somewhere -------------------------------------------------------------


def _ahead(d, later: bool):
    """A sweep within HERE_TOL of none (or of a full turn) is here: no sweep, or with
    `next` a full revolution."""
    here = (d < HERE_TOL) | (d > TWO_PI - HERE_TOL)
    return np.where(here, TWO_PI if later else 0.0, d)


def _target_angle(place: Place, r, v, mu, fails: Failures, radius: float = 0.0, f=None):
    """Sweep angle ahead to ``place``; zero where the place is here (a full turn with
    ``next``).  ``radius`` is the body's, for messages; ``f`` the orbit's ``frame`` if
    already at hand."""
    f = frame(r, v, mu) if f is None else f
    ecc = norm(f.e_vec)
    equatorial = np.hypot(f.h[:, 0], f.h[:, 1]) <= np.sin(EQUATORIAL_RAD)
    circular = ecc < CIRCULAR_ECC
    open_ = ecc >= 1.0
    kind = place.kind
    if kind == "radius":
        return _radius_angle(place, r, v, mu, fails, radius)
    if kind in ("periapsis", "apoapsis", "anomaly"):
        now = signed_angle(f.periapsis, r, f.h)
        target = {"periapsis": 0.0, "apoapsis": np.pi}.get(kind, place.angle)
        d = np.mod(target - now, TWO_PI)
        if kind != "anomaly":
            d = np.where(circular, 0.0, d)
        if kind == "apoapsis":
            fails.add(open_, lambda i: (
                f"there is no apoapsis on an open orbit (eccentricity {ecc[i]:.6f})",
                "burn `at periapsis` or here, or close the orbit first"))
        if kind == "periapsis":
            # on an open orbit the true anomaly runs from -limit to +limit: past 0 (and
            # below pi) the craft is leaving and never comes back to periapsis
            outbound = open_ & (now > HERE_TOL) & (now < np.pi)
            fails.add(outbound, lambda i: (
                (f"periapsis already passed on this open orbit (true anomaly "
                f"{np.degrees(now[i]):.3f} deg, outbound)"), "burn here instead"))
        return _ahead(d, place.next)
    now = signed_angle(f.node, r, f.h)
    asc = _ahead(np.where(equatorial, 0.0, np.mod(-now, TWO_PI)), place.next)
    desc = _ahead(np.where(equatorial, 0.0, np.mod(np.pi - now, TWO_PI)), place.next)
    if kind == "ascending node":
        return asc
    if kind == "descending node":
        return desc
    if kind == "node":  # for a coast: the next node (a burn prices both instead)
        return np.minimum(asc, desc)
    raise ValueError(f"unknown place {kind!r}")


def _radius_angle(place: Place, r, v, mu, fails: Failures, body_radius: float):
    """Sweep to the next crossing of the place's radius, on either branch."""
    R = place.radius
    up, down, meets = kepler.radius_crossings(r, v, mu, R)
    later = lambda d: np.where(np.isfinite(d), _ahead(d, place.next), np.inf)
    d = np.minimum(later(up), later(down))
    alt = lambda x: f"{x - body_radius:.3f} km"

    def never(i: int) -> tuple[str, str]:
        el = elements_from_state(r[i:i + 1], v[i:i + 1], mu)  # worded on demand only
        return ((f"the orbit never reaches {place.label()} ({R - body_radius:.3f} km "
                 f"altitude, {R:.3f} km from the centre): it runs from periapsis "
                 f"{alt(el.periapsis[0])} to "
                 + (f"apoapsis {alt(el.apoapsis[0])}" if el.closed[0] else "infinity (open)")
                 + " altitude"),
                "coast to an altitude between its periapsis and apoapsis, or change the orbit")

    fails.add(~meets, never)
    fails.add(meets & ~np.isfinite(d), lambda i: (
        f"the craft has passed {place.label()} on this open orbit and never comes back to it",
        "coast to a radius ahead of the craft, or burn here"))
    return np.where(np.isfinite(d), d, 0.0)


def goto(place: Place, r, v, mu, fails: Failures, sweep=None, radius: float = 0.0,
         drift=None):
    """Coast to ``place``; returns (r, v, seconds).

    A ``crossing`` is resolved by the caller, who knows the plane: ``sweep`` is the angle
    to it, per element (under drift an ``Aim``, which finds it again on a turned orbit).
    ``radius`` (the body's) words the messages in altitudes; ``drift`` (a ``j2.Drift``)
    makes the coast drift secularly, reaching the place of the drifted orbit.
    """
    if place.kind == "here":
        return r, v, np.zeros(r.shape[0])
    aim = sweep if isinstance(sweep, Aim) else None
    if aim is not None:
        sweep = aim.angle
    f = frame(r, v, mu)  # shared by the three below
    if place.kind == "crossing":  # exact geometry: no snapping of small angles to here
        d = np.where(sweep > TWO_PI - 1e-15, 0.0, sweep)
    else:
        d = _target_angle(place, r, v, mu, fails, radius, f)
    if not d.any():  # already there, every element: no coast
        return r, v, np.zeros(r.shape[0])
    if drift is not None:
        if aim is not None:
            again = aim.again
        elif place.kind == "crossing":  # pragma: no cover - callers under drift give an Aim
            raise ValueError("a crossing under drift needs an Aim")
        elif place.kind in ("periapsis", "apoapsis", "anomaly", "radius"):
            again = None  # a true anomaly: the same place on the turned orbit
        else:
            again = lambda rr, vv: (_target_angle(place, rr, vv, mu, Failures(rr.shape[0]),
                                                  radius),)
        r1, v1, dt, good = drift.goto(r, v, d, again)
    else:
        dt, ok_t = kepler.time_of_flight(r, v, mu, d, f)
        r1, v1, ok_p = kepler.place(r, v, mu, d, f)
        good = ok_t & ok_p
    open_ = norm(f.e_vec) >= 1.0
    fails.add(~good & (open_ | (drift is None)), lambda i: (
        f"the craft never reaches {place.label()} on this open orbit",
        "burn here or at a point ahead of the craft"))
    fails.add(~good & ~open_ & (drift is not None), lambda i: (
        (f"{place.label()} could not be found on the drifting orbit (the sweep to it and "
         "the drift of the orbit did not settle together)"),
        "coast for a time to near the place first, or fly this step under `gravity point-mass`"))
    return (np.where(good[:, None], r1, r), np.where(good[:, None], v1, v),
            np.where(good, dt, 0.0))


@dataclass(frozen=True)
class Aim:
    """The sweep to a crossing, and how to find it again from a state on a turned orbit
    (``again(r, v)`` gives the candidate sweeps; the nearest to the last is taken)."""

    angle: np.ndarray
    again: object


def _aims(ctx: Context, first, second, again):
    """The two crossings as they are (point-mass) or as ``Aim`` (under drift)."""
    if ctx.drift is None:
        return first, second
    return Aim(first, again), Aim(second, again)


# --- burns ---------------------------------------------------------------------------


@dataclass
class BurnOutcome:
    r: np.ndarray
    v_before: np.ndarray
    v_after: np.ndarray
    coast: np.ndarray
    fails: Failures
    at: str = ""  # where it happened, for the report ("node" resolves to the one chosen)


def _solve_burn(step: Burn, r, v, ctx: Context, fails: Failures, normal=None):
    """Velocity after the burn at the current position."""
    mu = ctx.mu
    if step.sun_synchronous is not None and normal is None:
        return _sun_synchronous_burn(step, r, v, ctx, fails)
    if step.vector is not None:
        return v + frames.inertial(step.frame, r, v, step.vector)
    rmag = norm(r)
    if step.circular:
        if step.circular_radius is not None:
            R = step.circular_radius
            off = np.abs(rmag - R) > 1e-9 * rmag
            fails.add(off, lambda i: (
                (f"`circular {element(R, i) - ctx.radius:.3f} km` needs the craft at that "
                f"altitude, but it is at {rmag[i] - ctx.radius:.3f} km; one burn can only "
                "circularise at the current radius"),
                (f"use `transfer NAME: circular {element(R, i) - ctx.radius:g} km`, or drop "
                "the altitude to circularise here")))
        shape = Shape(periapsis=rmag, apoapsis=rmag)
    elif step.apsis_here:
        far = np.full_like(rmag, step.apoapsis if step.apoapsis is not None else step.periapsis)
        shape = Shape(periapsis=np.minimum(rmag, far), apoapsis=np.maximum(rmag, far))
    else:
        full = lambda x: None if x is None else np.full_like(rmag, x)
        shape = Shape(periapsis=full(step.periapsis), apoapsis=full(step.apoapsis),
                      tangential=step.tangential)
    if normal is None and step.normal is not None:
        normal = np.broadcast_to(np.asarray(step.normal), r.shape)
    if normal is None and (step.inclination is not None or step.raan is not None):
        normal = normal_for(r, v, step.inclination, step.raan, fails, _descending(step))
    goals = conic_goals.ConicGoals.of(step)
    if goals is not None:
        v_new = conic_goals.new_velocity(r, v, mu, goals, normal, fails, ctx.radius)
    else:
        v_new = new_velocity(r, v, mu, shape, normal, fails, ctx.radius)
    return np.where(fails.ok[:, None], v_new, v)


def _descending(step) -> bool:
    """Whether a step stands `at descending node`: from an equatorial orbit its plane goal
    then leaves the craft at the new plane's descending node (``normal_for``)."""
    return step.place is not None and step.place.kind == "descending node"


def _sun_synchronous_burn(step: Burn, r, v, ctx: Context, fails: Failures):
    """A burn to the sun-synchronous inclination of the orbit it makes: the inclination
    depends on that orbit's size and shape, which (through the plane's turn) may depend
    on the inclination, so the two are iterated to a fixed point (they contract fast:
    the inclination moves with p^3.5)."""
    from .j2 import sun_synchronous

    plain = replace(step, sun_synchronous=None)
    rate = step.sun_synchronous
    orbit = lambda vv: elements_from_state(r, vv, ctx.mu)
    el = orbit(v)
    inc = sun_synchronous(ctx.mu, ctx.radius, ctx.j2, el.sma, np.minimum(el.ecc, 0.999), rate)
    for _ in range(30):
        scratch = Failures(r.shape[0])
        ok = np.isfinite(inc)
        normal = normal_for(r, v, np.where(ok, inc, 0.0), step.raan, scratch,
                            _descending(step))
        el = orbit(_solve_burn(plain, r, v, ctx, scratch, normal))
        closed = el.closed & (el.sma > 0)
        new = np.where(closed, sun_synchronous(ctx.mu, ctx.radius, ctx.j2,
                                               np.where(closed, el.sma, 1.0),
                                               np.where(closed, el.ecc, 0.0), rate), np.nan)
        settled = np.all(~np.isfinite(new) | (np.abs(new - inc) <= 1e-14))
        inc = new
        if settled:
            break
    bad = ~np.isfinite(inc)
    fails.add(bad, lambda i: (
        (f"the orbit after the burn (sma {el.sma[i]:.3f} km, eccentricity {el.ecc[i]:.6f}) "
         "has no sun-synchronous inclination: it is open, or too high for any "
         "inclination's node drift to match the Sun's"),
        "lower the orbit first, or give the inclination in degrees"))
    normal = normal_for(r, v, np.where(bad, el.inclination, inc), step.raan, fails,
                        _descending(step))
    return _solve_burn(plain, r, v, ctx, fails, normal)


def _burn_at(step: Burn, place: Place, r, v, ctx: Context, normal=None,
             sweep=None) -> BurnOutcome:
    fails = Failures(r.shape[0])
    r1, v1, coast = goto(place, r, v, ctx.mu, fails, sweep, ctx.radius, ctx.drift)
    v2 = _solve_burn(step, r1, v1, ctx, fails, normal)
    return BurnOutcome(r1, v1, v2, coast, fails, place.label())


COST_TIE = 1e-9  # km/s (1 micrometre per second), and relative: two costs this close tie


def _prefer_first(cost_a, cost_b, wait_a, wait_b) -> np.ndarray:
    """The first option where it is cheaper, or as cheap and sooner.

    As cheap means within ``COST_TIE``, absolute and relative: far above the rounding
    of a delta-v (two burns that do nothing both cost about 1e-13 km/s; the same turn
    at either node of a circular orbit differs in the last digits), far below anything a
    report shows.  A tie decided by rounding would send the same step to one node when
    it is priced alone and to the other in a batch.
    """
    tie = np.abs(cost_a - cost_b) <= COST_TIE * (np.maximum(cost_a, cost_b) + 1.0)
    # the same with the waits (s): the first unless the other is sooner past rounding
    sooner = wait_a <= wait_b + 1e-9 * (np.maximum(np.abs(wait_a), np.abs(wait_b)) + 1.0)
    return np.where(tie, sooner, cost_a < cost_b)


def _cheaper(a: BurnOutcome, b: BurnOutcome) -> BurnOutcome:
    da = norm(a.v_after - a.v_before)
    db = norm(b.v_after - b.v_before)
    take_a = a.fails.ok & (~b.fails.ok | _prefer_first(da, db, a.coast, b.coast))
    take_a |= ~a.fails.ok & ~b.fails.ok
    fails = Failures(take_a.shape[0])
    fails.merge(take_a, a.fails)
    fails.merge(~take_a, b.fails)
    m = take_a[:, None]
    at = a.at if take_a.all() else b.at if not take_a.any() else "node"
    return BurnOutcome(np.where(m, a.r, b.r), np.where(m, a.v_before, b.v_before),
                       np.where(m, a.v_after, b.v_after), np.where(take_a, a.coast, b.coast),
                       fails, at)


def burn_outcome(step: Burn, r, v, ctx: Context, normal=None) -> BurnOutcome:
    """Where and how the burn happens; ``node`` picks the cheaper node per element."""
    if step.place.kind == "node":
        asc = _burn_at(step, replace(step.place, kind="ascending node"), r, v, ctx, normal)
        desc = _burn_at(step, replace(step.place, kind="descending node"), r, v, ctx, normal)
        return _cheaper(asc, desc)
    if step.place.kind == "crossing" and step.argp is not None:
        return _apse_crossing(step, r, v, ctx, normal)
    if step.place.kind == "crossing":
        target = target_plane(r, v, step.inclination, step.raan)
        first, second = _aims(ctx, *crossings(r, v, target),
                              lambda rr, vv: crossings(rr, vv, target))
        return _cheaper(_burn_at(step, step.place, r, v, ctx, normal, first),
                        _burn_at(step, step.place, r, v, ctx, normal, second))
    return _burn_at(step, step.place, r, v, ctx, normal)


def _apse_crossing(step: Burn, r, v, ctx: Context, normal=None) -> BurnOutcome:
    """An `argp to` burn where the current orbit meets the turned one: both crossings
    priced, the cheaper flown (the sooner on a tie)."""
    found = Failures(r.shape[0])
    goals = conic_goals.ConicGoals.of(step)
    p2, e2 = conic_goals.apse_target(r, v, ctx.mu, goals, ctx.radius, found)
    first, second = conic_goals.apse_crossings(r, v, ctx.mu, p2, e2, step.argp, found,
                                               ctx.radius)
    ahead = kepler.place(r, v, ctx.mu, first)[2] | kepler.place(r, v, ctx.mu, second)[2]
    found.add(~ahead, lambda i: (
        ("the two orbits cross only behind the craft or beyond the asymptote of this open "
         "orbit"),
        "turn the apse line on the way in (before periapsis), or change the shape first"))
    first, second = _aims(ctx, first, second, lambda rr, vv: conic_goals.apse_crossings(
        rr, vv, ctx.mu, p2, e2, step.argp, Failures(rr.shape[0]), ctx.radius))
    out = _cheaper(_burn_at(step, step.place, r, v, ctx, normal, first),
                   _burn_at(step, step.place, r, v, ctx, normal, second))
    found.merge(np.ones(r.shape[0], dtype=bool), out.fails)
    out.fails = found
    out.v_after = np.where(found.ok[:, None], out.v_after, out.v_before)
    return out


def propellant_for(mass, dv_margin, exhaust_speed):
    """Propellant (kg) a burn of ``dv_margin`` km/s takes from ``mass`` kg: the rocket
    equation, m (1 - exp(-dv / ve))."""
    return mass * -np.expm1(-dv_margin / exhaust_speed)


def carry(batch: Batch, rows: list[Row], mass_before: float) -> tuple[Batch, np.ndarray]:
    """Steps already priced, flown again from the same orbit state at another mass.

    The orbit part of a step does not depend on the mass, so a rewritten plan that is
    back in the state the plan was in (``batch``, same r and v as the state the plan had
    before ``rows``, whose mass was ``mass_before`` kg) flies ``rows`` with the same
    delta-v; only the propellant of each burn follows the new mass (the rocket equation
    of ``_price``; the load never stops the chain, it may run negative) and each drop
    takes the same mass.  Returns the final state and whether every step flew (always,
    here: the orbit part is the plan's own).  Expectations on the orbit pass as they
    did; those on mass or propellant are the caller's to rerun.
    """
    mass, left = batch.mass.copy(), batch.propellant.copy()
    dv, dvm = batch.dv.copy(), batch.dv_margin.copy()
    ok = np.ones(batch.size, dtype=bool)
    expect_ok = batch.expect_ok.copy()
    prev = mass_before
    last = batch
    for row in rows:
        if row.kind in PRICED_KINDS:
            used = propellant_for(mass, row.dv_margin, row.engine.exhaust_speed)
            mass, left = mass - used, left - used
            dv, dvm = dv + row.dv, dvm + row.dv_margin
        elif row.kind == "drop":
            mass = mass - (prev - float(row.after.mass[0]))
        elif row.kind == "expect":
            for check in row.checks:
                expect_ok &= check.passed
        prev = float(row.after.mass[0])
        last = row.after
    return replace(last, mass=mass, propellant=left, dv=dv, dv_margin=dvm,
                   expect_ok=expect_ok), ok


SURFACE_HINT = ("raise the periapsis, or check the goal's altitude (altitudes are above the "
                "equatorial radius; `radius X` gives a radius)")
# A goal naming one apsis takes the cheapest burn that reaches it; with a large turn of
# the plane that is a slower, steeper orbit (the velocity kept least), which can fall.
ONE_APSIS_HINT = ("a goal naming one apsis takes the cheapest burn that reaches it, and with "
                  "this turn of the plane that is an orbit that falls: name both apsides "
                  "(`periapsis to ..., apoapsis to ...`) to keep this point an apsis, or turn "
                  "the plane in a burn of its own")


def _price(batch: Batch, out: BurnOutcome, engine: EngineSpec, margin: float, ctx: Context,
           fails: Failures, name: str, hint: str = SURFACE_HINT):
    """Rocket equation, propellant check and burn time; returns (batch, row parts)."""
    dv_inertial = out.v_after - out.v_before
    along, normal, radial = local_frame(out.r, out.v_before)
    vec = np.stack([dot(dv_inertial, along), dot(dv_inertial, normal),
                    dot(dv_inertial, radial)], axis=-1)
    dv = norm(dv_inertial)
    dvm = dv * (1.0 + margin)
    need, covered, burn_time = _propellant(batch, dvm, engine)
    used = need
    mass = batch.mass - used
    ok = fails.ok
    _check_surface(out.r, out.v_after, ctx, fails, name, hint)
    new = Batch(
        r=out.r,
        v=np.where(ok[:, None], out.v_after, out.v_before),
        mass=mass,
        propellant=batch.propellant - used,
        t=batch.t + out.coast,
        dv=batch.dv + dv,
        dv_margin=batch.dv_margin + dvm,
        expect_ok=batch.expect_ok,
    )
    return new, vec, dv, dvm, used, burn_time, covered


def _propellant(batch: Batch, dvm, engine: EngineSpec):
    """Propellant for a delta-v (with margin) by the rocket equation, whether the load
    covers it, and the burn time.

    The load never stops the chain: in the impulsive model the geometry, and so every
    delta-v, does not depend on the mass.  Past the point where the usable load runs out
    the propellant left goes negative (the deficit at that load) and the burns are marked
    not covered; the exact load that flies the plan comes from the backward pass of
    ``size``.
    """
    ve = engine.exhaust_speed
    need = propellant_for(batch.mass, dvm, ve)
    covered = batch.propellant - need >= -1e-9 * np.maximum(need, 1.0)
    return need, covered, need * ve * 1000.0 / engine.thrust


def _check_surface(r, v, ctx: Context, fails: Failures, name: str, hint: str = SURFACE_HINT):
    """A conic whose periapsis is under the surface hits the body (if it gets there);
    on the way down to a plan's `entry` that is what it is meant to do."""
    if ctx.interface is not None:
        return
    periapsis, closed = periapsis_radius(r, v, ctx.mu)
    inbound = dot(r, v) < 0
    reaches = closed | inbound
    low = reaches & (periapsis < ctx.radius)
    fails.add(low, lambda i: (
        (f"the periapsis falls to {periapsis[i] - ctx.radius:.3f} km altitude, under the "
        f"surface (the body's radius is {ctx.radius:.3f} km)"), hint))


def _engine(step, ctx: Context) -> EngineSpec:
    return step.engine or ctx.default_engine


def _burn_rows(step: Burn, index: int, name: str, batch: Batch, ctx: Context, fails: Failures,
               normal=None, sweep=None):
    if sweep is not None:  # a transfer's first burn at a crossing already chosen
        out = _burn_at(step, step.place, batch.r, batch.v, ctx, normal, sweep)
    else:
        out = burn_outcome(step, batch.r, batch.v, ctx, normal)
    fails.merge(~out.fails.ok, out.fails)
    margin = step.margin
    new, vec, dv, dvm, prop, burn_time, covered, extra = _price_burn(
        batch, out, _engine(step, ctx), margin, ctx, fails, name, step)
    row = Row(index, name, "burn", out.at or step.place.label(), new, vec, dv, dvm, prop, burn_time,
              out.coast, out.coast, _engine(step, ctx), margin, v_before=out.v_before,
              covered=covered, frame=step.frame, **extra)
    return new, row


def _price_burn(batch: Batch, out: BurnOutcome, engine: EngineSpec, margin: float,
                ctx: Context, fails: Failures, name: str, step: Burn):
    """``_price`` for a burn, flown as a finite burn where the plan says so; returns its
    parts and the row's finite fields (empty for an impulsive burn)."""
    if not ctx.finite:
        hint = ONE_APSIS_HINT if step.one_apsis and step.changes_plane else SURFACE_HINT
        return (*_price(batch, out, engine, margin, ctx, fails, name, hint), {})
    from .finite_price import price_finite

    return price_finite(batch, out, engine, margin, ctx, fails, name, step)


# --- transfers -----------------------------------------------------------------------


def _phase_burns(step: Transfer, r, v, ctx: Context):
    """The burns of a transfer as plain Burn steps (plane goals filled in later).

    The first burn makes the point it stands on an apsis of the transfer orbit (it takes
    out any radial speed), so the next burn is half a revolution on, at the opposite
    apsis, which lies in every plane through the first point: the transfer reaches the
    circle and the plane it names from anywhere on any orbit.
    """
    rmag = norm(r)
    eng, margin, span = step.engine, step.margin, step.span
    mk = lambda i, place, **goals: Burn(f"{step.name}/{i}", place, engine=eng,
                                        margin=margin, span=span, **goals)
    if step.form == "hohmann":
        up = step.radius >= rmag
        first_up = mk(1, step.place, apoapsis=step.radius, apsis_here=True)
        first_down = mk(1, step.place, periapsis=step.radius, apsis_here=True)
        second_up = mk(2, Place("apoapsis"), circular=True)
        second_down = mk(2, Place("periapsis"), circular=True)
        return up, [(first_up, first_down), (second_up, second_down)]
    if step.form == "bielliptic":
        return None, [(mk(1, step.place, apoapsis=step.via, apsis_here=True),) * 2,
                      (mk(2, Place("apoapsis"), periapsis=step.radius, apsis_here=True),) * 2,
                      (mk(3, Place("periapsis"), circular=True),) * 2]
    raise ValueError(step.form)


def _transfer(step: Transfer, index: int, batch: Batch, ctx: Context, fails: Failures):
    if ctx.drift is not None and step.raan is not None:
        # the node moves while the transfer orbit is flown: no fixed plane to arrive in
        fails.add(np.ones(batch.size, dtype=bool), lambda i: (
            ("under `gravity j2` the node drifts during a transfer, so a transfer cannot "
             "arrive in a fixed plane with `raan to`"),
            ("transfer with `inclination to` alone, then turn the node with a burn `at "
             "crossing: raan to ...`")))
        return batch, []
    if step.place.kind in ("node", "crossing"):
        # price the whole transfer from each node (crossing) and keep the cheaper per element
        if step.place.kind == "node":
            ways = [(replace(step, place=replace(step.place, kind=kind)), None)
                    for kind in ("ascending node", "descending node")]
        else:
            target = target_plane(batch.r, batch.v, step.inclination, step.raan)
            ways = [(step, d) for d in _aims(ctx, *crossings(batch.r, batch.v, target),
                                             lambda rr, vv: crossings(rr, vv, target))]
        results = []
        for way, sweep in ways:
            sub = Failures(batch.size)
            res = _transfer_from(way, index, batch, ctx, sub, sweep)
            results.append((res, sub))
        (a, fa), (b, fb) = results
        ca, cb = a[0].dv_margin, b[0].dv_margin
        take_a = fa.ok & (~fb.ok | _prefer_first(ca, cb, a[0].t, b[0].t)) | (~fa.ok & ~fb.ok)
        fails.merge(take_a, fa)
        fails.merge(~take_a, fb)
        new = a[0].where(take_a, b[0])
        rows = [_merge_rows(ra, rb, take_a) for ra, rb in zip(a[1], b[1])]
        return new, rows
    return _transfer_from(step, index, batch, ctx, fails)


def _merge_rows(a: Row, b: Row, take_a: np.ndarray) -> Row:
    def pick(x, y):
        if x is None:
            return None
        m = take_a.reshape(take_a.shape + (1,) * (np.ndim(x) - 1))
        return np.where(m, x, y)
    at = a.at if take_a.all() else b.at if not take_a.any() else "node" if a.at != b.at else a.at
    return Row(a.step, a.name, a.kind, at, a.after.where(take_a, b.after),
               *(pick(getattr(a, f), getattr(b, f)) for f in
                 ("dv_vec", "dv", "dv_margin", "propellant", "burn_time", "coast_time",
                  "duration")), a.engine, a.margin, v_before=pick(a.v_before, b.v_before),
               covered=pick(a.covered, b.covered), frame=a.frame,
               **{f: pick(getattr(a, f), getattr(b, f))
                  for f in ("dv_impulsive", "finite_time", "finite_arc", "v_impulsive",
                            "r_impulse", "arc_end")},
               finite_goal=a.finite_goal, spec=a.spec)


def _either(b_up: Burn, b_down: Burn, up, index, batch: Batch, ctx: Context, fails, normal,
            sweep=None):
    """Burn ``b_up`` where ``up`` else ``b_down`` (a transfer raising or lowering)."""
    f_up, f_dn = Failures(batch.size), Failures(batch.size)
    new_up, row_up = _burn_rows(b_up, index, b_up.name, batch, ctx, f_up, normal, sweep)
    new_dn, row_dn = _burn_rows(b_down, index, b_down.name, batch, ctx, f_dn, normal, sweep)
    fails.merge(up, f_up)
    fails.merge(~up, f_dn)
    return new_up.where(up, new_dn), _merge_rows(row_up, row_dn, up)


def _transfer_from(step: Transfer, index: int, batch: Batch, ctx: Context, fails: Failures,
                   sweep=None):
    if step.form == "phasing":
        from .phasing import phasing_rows

        return phasing_rows(step, index, batch, ctx, fails)
    if step.form == "plane-change":
        return _three_burn_plane_change(step, index, batch, ctx, fails, sweep)
    r0, v0, _ = goto(step.place, batch.r, batch.v, ctx.mu, Failures(batch.size), sweep,
                     ctx.radius, ctx.drift)
    up, phases = _phase_burns(step, r0, v0, ctx)
    normals = [None] * len(phases)
    if step.changes_plane:
        # the target plane as seen from the first burn's position
        tmp = Failures(batch.size)
        target = normal_for(r0, v0, step.inclination, step.raan, tmp, _descending(step))
        fails.merge(~tmp.ok, tmp)
        if step.form == "hohmann":
            share = (np.full(batch.size, step.split) if step.split is not None
                     else _best_split(r0, v0, target, step.radius, ctx.mu))
            normals = _split_normals(r0, v0, target, share)
        else:
            normals = [None, target, None]  # all of it at the bi-elliptic's far apoapsis
        if ctx.drift is not None:
            # the orbit drifts between the burns: the burn that finishes the plane change
            # turns about its own radius to the goal's inclination (no raan goal here)
            last = len(phases) - 1 if step.form == "hohmann" else 1
            phases[last] = tuple(replace(b, inclination=step.inclination)
                                 for b in phases[last])
            normals[last] = None
    rows = []
    for k, ((b_up, b_down), normal) in enumerate(zip(phases, normals)):
        first = sweep if k == 0 else None
        if ctx.drift is not None and b_up.inclination is not None:
            _far_from_the_node(step, b_up, b_down, up, batch, ctx, fails)
        if up is None:
            batch, row = _burn_rows(b_up, index, b_up.name, batch, ctx, fails, normal, first)
        else:
            batch, row = _either(b_up, b_down, up, index, batch, ctx, fails, normal, first)
        rows.append(row)
    return batch, rows


def _far_from_the_node(step: Transfer, b_up: Burn, b_down: Burn, up, batch: Batch,
                       ctx: Context, fails: Failures) -> None:
    """Under drift the burn that finishes a transfer's plane change is no longer on the
    node line (the transfer orbit's apse line and node have turned on the way): an
    inclination below the latitude there cannot be reached by it.  Refused with the
    numbers, before the burn's own (plainer) refusal."""
    tmp = Failures(batch.size)
    place_of = lambda b: goto(b.place, batch.r, batch.v, ctx.mu, tmp, None, ctx.radius,
                              ctx.drift)[0]
    r = place_of(b_up) if up is None else np.where(up[:, None], place_of(b_up),
                                                   place_of(b_down))
    lat = np.arcsin(np.clip(r[:, 2] / norm(r), -1.0, 1.0))
    goal = step.inclination
    low = (goal < np.abs(lat) - 1e-12) | (goal > np.pi - np.abs(lat) + 1e-12)
    fails.add(low & tmp.ok, lambda i: (
        (f"under `gravity j2` the transfer orbit's node and apse line turn on the way, so "
         f"its far burn stands at latitude {np.degrees(lat[i]):.4f} deg, off the node line, "
         f"where no plane has inclination {np.degrees(goal):.4f} deg"),
        ("transfer without the plane change and turn the plane with a burn `at node: "
         "inclination to ...` after it, or price this transfer under `gravity point-mass`")))


def _split_normals(r, v, target, share):
    """Plane normals after each burn of a two-burn transfer that turns ``share`` first."""
    h0 = unit(cross(r, v))
    axis = unit(cross(h0, target))
    small = norm(cross(h0, target)) < 1e-15
    axis = np.where(small[:, None], unit(r), axis)
    total = np.arctan2(norm(cross(h0, target)), dot(h0, target))
    first = rotate_about(h0, axis, share * total)
    return [first, target]


def _best_split(r0, v0, target, radius: float, mu: float) -> np.ndarray:
    """Share of the plane change at the first burn that minimises the total delta-v.

    The burns of the transfer are known in closed form: the first turns the transverse
    velocity about the radius vector by an angle t and sets the speed v1 of the
    transfer orbit at this apsis (taking out the radial speed), the second, at the
    opposite apsis, turns the rest, D - t, while setting the circular speed there.  By
    the cosine rule the total is

        sqrt(vr0^2 + vt0^2 + v1^2 - 2 vt0 v1 cos t) + sqrt(va^2 + vc^2 - 2 va vc cos(D - t))

    (va = v1 r0 / R by the angular momentum, vc = sqrt(mu / R)), and its derivative
    is increasing on [0, D]: bisection on the derivative finds the minimum to rounding,
    for the whole batch at once, with no pass through the burns.  The evaluator then
    prices the burns themselves at that share (the tests check the two agree).
    """
    rmag = norm(r0)
    rhat = unit(r0)
    vr0 = dot(v0, rhat)
    vt0 = norm(v0 - vr0[:, None] * rhat)
    v1 = np.sqrt(2.0 * mu * radius / (rmag * (rmag + radius)))
    va, vc = v1 * rmag / radius, np.sqrt(mu / radius)
    h0 = unit(cross(r0, v0))
    turn = np.arctan2(norm(cross(h0, target)), dot(h0, target))
    A, B = vr0**2 + vt0**2 + v1**2, 2.0 * vt0 * v1
    C, D = va**2 + vc**2, 2.0 * va * vc

    def cost(t):
        return (np.sqrt(np.maximum(A - B * np.cos(t), 0.0))
                + np.sqrt(np.maximum(C - D * np.cos(turn - t), 0.0)))

    def slope(t):
        one = np.sqrt(np.maximum(A - B * np.cos(t), 1e-300))
        two = np.sqrt(np.maximum(C - D * np.cos(turn - t), 1e-300))
        return B * np.sin(t) / one - D * np.sin(turn - t) / two

    lo, hi = np.zeros_like(turn), turn.copy()
    for _ in range(64):
        mid = 0.5 * (lo + hi)
        rising = slope(mid) > 0
        hi, lo = np.where(rising, mid, hi), np.where(rising, lo, mid)
    best = 0.5 * (lo + hi)
    for edge in (np.zeros_like(turn), turn):  # a minimum at an end of the range
        best = np.where(cost(edge) < cost(best), edge, best)
    return np.where(turn > 0, best / np.where(turn > 0, turn, 1.0), 0.0)


def _three_burn_plane_change(step: Transfer, index, batch: Batch, ctx: Context, fails,
                            sweep=None):
    """Raise the apoapsis, turn the plane there, lower it back.

    The raise makes the first point the periapsis of the detour, so the turn is half a
    revolution on and the lowering is back at the first point's radius, where it restores
    both apsides of the orbit the craft started from (the apse line may have turned): an
    ordinary burn whose two apsis goals are per element, the apsides each element started
    from.
    """
    tmp = Failures(batch.size)
    r0, v0, _ = goto(step.place, batch.r, batch.v, ctx.mu, tmp, sweep, ctx.radius, ctx.drift)
    el = elements_from_state(r0, v0, ctx.mu)
    circular = el.ecc < CIRCULAR_ECC
    here = norm(r0)
    keep_pe = np.where(circular, here, el.periapsis)
    keep_ap = np.where(circular | ~el.closed, here, el.apoapsis)  # open: refused below
    eng, margin, span = step.engine, step.margin, step.span
    raise_ = Burn(f"{step.name}/1", step.place, apoapsis=step.via, apsis_here=True,
                  engine=eng, margin=margin, span=span)
    turn = Burn(f"{step.name}/2", Place("apoapsis"), inclination=step.inclination,
                raan=step.raan, engine=eng, margin=margin, span=span)
    # the first point is the detour's periapsis: its radius lies within the apsides kept
    lower = Burn(f"{step.name}/3", Place("periapsis"), periapsis=np.minimum(keep_pe, here),
                 apoapsis=np.maximum(keep_ap, here), engine=eng, margin=margin, span=span)
    fails.add(~el.closed, lambda i: (
        (f"a three-burn plane change starts from a closed orbit; this one is open "
         f"(eccentricity {el.ecc[i]:.6f})"), "capture first, then turn the plane"))
    normal = None
    if ctx.drift is None and step.raan is None:
        # the turn stands opposite the first point (-r0, flying the other way in the same
        # plane), and the plane it turns to passes through both: on a tie (from an
        # equatorial orbit) the first point, where the step is placed, is the new plane's
        # ascending node, or its descending node when placed so; the far point the other
        tmp = Failures(batch.size)
        normal = normal_for(-r0, -v0, step.inclination, None, tmp, not _descending(step))
        fails.merge(~tmp.ok, tmp)
    rows = []
    for burn, first, given in ((raise_, sweep, None), (turn, None, normal),
                               (lower, None, None)):
        batch, row = _burn_rows(burn, index, burn.name, batch, ctx, fails, given, first)
        rows.append(row)
    return batch, rows


# --- the other steps -----------------------------------------------------------------


def _span_text(seconds: float) -> str:
    """A coast's length as a reader would write it: 2 d, 90 min, 3.5 h, 40 s; a length
    no unit gives in whole hundredths (a drift's wait, to the microsecond) in its largest
    unit, to six figures: 117.561 d, never 1.01572e+07 s.

    >>> _span_text(172800.0), _span_text(5400.0), _span_text(10157234.57919)
    ('2 d', '1.5 h', '117.561 d')
    """
    units = (("d", 86400.0), ("h", 3600.0), ("min", 60.0))
    for word, size in units:
        if seconds >= size and (seconds / size) * 100 == round((seconds / size) * 100):
            return f"{seconds / size:g} {word}"
    for word, size in units:
        if seconds >= size:
            return f"{seconds / size:.6g} {word}"
    return f"{seconds:g} s"


def _coast(step: Coast, index: int, batch: Batch, ctx: Context, fails: Failures):
    mu = ctx.mu
    if step.mode == "for":
        move = kepler.propagate if ctx.drift is None else (
            lambda r, v, mu, dt: ctx.drift.propagate(r, v, dt))
        r, v, ok = move(batch.r, batch.v, mu, np.full(batch.size, step.duration))
        fails.add(~ok, lambda i: ("the coast could not be propagated", None))
        dt = np.full(batch.size, step.duration)
        at = (f"for {_span_text(step.duration)}" if np.ndim(step.duration) == 0
              else "for a time")
    elif step.mode == "to":
        r, v, dt = goto(step.place, batch.r, batch.v, mu, fails, radius=ctx.radius,
                         drift=ctx.drift)
        at = step.place.label()
    else:
        el = elements_from_state(batch.r, batch.v, mu)
        fails.add(~el.closed, lambda i: (
            f"an open orbit (eccentricity {el.ecc[i]:.6f}) has no revolutions to coast",
            "coast `for` a time instead"))
        period = np.where(el.closed, el.period, 0.0)
        part = step.revs - np.floor(step.revs)  # whole revolutions come back here
        if ctx.drift is not None:  # anomalistic periods of the drifting orbit
            r, v, dt, ok = ctx.drift.whole_revs(batch.r, batch.v, step.revs)
            fails.add(~ok & el.closed, lambda i: ("the coast could not be propagated", None))
        elif part > 0:
            r, v, ok = kepler.propagate(batch.r, batch.v, mu, period * part)
            fails.add(~ok, lambda i: ("the coast could not be propagated", None))
        else:
            r, v = batch.r, batch.v
        if ctx.drift is None:
            dt = period * step.revs
        at = f"{step.revs:g} rev"
    if ctx.interface is not None:  # on the way down: the coast must end above the interface
        from .entry import before_interface

        before_interface(step, batch, dt, ctx, fails)
    ok = fails.ok
    new = replace(batch, r=np.where(ok[:, None], r, batch.r),
                  v=np.where(ok[:, None], v, batch.v), t=batch.t + dt)
    _check_surface(new.r, new.v, ctx, fails, step.name)
    return new, [Row(index, step.name, "coast", at, new, coast_time=dt, duration=dt)]


def _drop(step: Drop, index: int, batch: Batch, ctx: Context, fails: Failures):
    dry = batch.mass - batch.propellant
    fails.add(step.mass >= dry, lambda i: (
        (f"{step.name} drops {element(step.mass, i):.3f} kg but the craft holds only "
        f"{dry[i]:.3f} kg besides its propellant"),
        "drop less, or check the craft's dry mass"))
    new = replace(batch, mass=np.where(fails.ok, batch.mass - step.mass, batch.mass))
    return new, [Row(index, step.name, "drop", "here", new)]


def _allow(step: Allow, index: int, batch: Batch, ctx: Context, fails: Failures, scale=1.0):
    """A budget line: its delta-v (statistical lines scaled to their RSS share) is priced
    by the rocket equation here; the orbit does not move."""
    engine = _engine(step, ctx)
    dv = np.full(batch.size, step.dv * (scale if step.statistical else 1.0))
    dvm = dv * (1.0 + step.margin)
    need, covered, burn_time = _propellant(batch, dvm, engine)
    new = replace(batch, mass=batch.mass - need, propellant=batch.propellant - need,
                  dv=batch.dv + dv, dv_margin=batch.dv_margin + dvm)
    zero = np.zeros((batch.size, 3))
    return new, [Row(index, step.name, "allow", "here", new, zero, dv, dvm, need, burn_time,
                     np.zeros(batch.size), np.zeros(batch.size), engine, step.margin,
                     covered=covered)]


def measure(kind: str, batch: Batch, ctx: Context, el=None) -> np.ndarray:
    """The value an expectation of ``kind`` reads from the state (internal units);
    ``el``: the state's elements if already at hand."""
    if kind in ("mass", "propellant"):
        return batch.mass if kind == "mass" else batch.propellant
    if kind == "elapsed":
        return batch.t
    if kind == "raan drift":  # the secular J2 node rate (lowering asks for `gravity j2`)
        return ctx.drift.rates(batch.r, batch.v).raan
    el = elements_from_state(batch.r, batch.v, ctx.mu) if el is None else el
    if kind in ("vinf", "c3"):  # c3 = v^2 - 2 mu / r = 2 energy; vinf^2 = c3 (open orbits)
        c3 = 2.0 * el.energy
        return c3 if kind == "c3" else np.sqrt(np.maximum(c3, 0.0))
    return {
        "periapsis": el.periapsis,
        "apoapsis": el.apoapsis,
        "sma": el.sma,
        "ecc": el.ecc,
        "inclination": el.inclination,
        "raan": el.raan,
        "argp": el.argp,
        "period": el.period,
        "anomaly": el.anomaly,
    }[kind]


ANGLES = {"inclination", "raan", "argp", "anomaly"}


OPEN_UNDEFINED = {"apoapsis", "period", "circular", "raan drift"}  # no value on an open orbit
CLOSED_UNDEFINED = {"vinf"}  # no value on a closed orbit


def _expect(step: Expect, index: int, batch: Batch, ctx: Context, fails: Failures):
    results = []
    ok = np.ones(batch.size, dtype=bool)
    el = elements_from_state(batch.r, batch.v, ctx.mu)
    for check in step.checks:
        undefined = (~el.closed if check.kind in OPEN_UNDEFINED else
                     el.closed if check.kind in CLOSED_UNDEFINED else np.zeros(batch.size, bool))
        apsides = None
        if check.kind == "circular":
            pe, ap = el.periapsis, el.apoapsis
            apsides = (pe, ap)
            err = np.maximum(np.abs(pe - check.target), np.abs(ap - check.target))
            actual = np.where(np.abs(pe - check.target) >= np.abs(ap - check.target), pe, ap)
            passed = err <= check.tolerance
        else:
            actual = measure(check.kind, batch, ctx, el)
            if check.comparator == "at least":
                passed = actual >= check.target
            elif check.comparator == "at most":
                passed = actual <= check.target
            else:
                diff = actual - check.target
                if check.kind in ANGLES:
                    diff = np.mod(diff + np.pi, TWO_PI) - np.pi
                passed = np.abs(diff) <= check.tolerance
        passed = passed & ~undefined
        results.append(CheckResult(check.kind, check.comparator, check.target, check.tolerance,
                                   actual, passed, undefined, el.ecc, apsides))
        ok &= passed
    new = replace(batch, expect_ok=batch.expect_ok & ok)
    return new, [Row(index, step.name, "expect", "here", new, checks=results)]


def apply(step: Step, index: int, batch: Batch, ctx: Context) -> tuple[Batch, list[Row], Failures]:
    """Move the whole batch through one step."""
    fails = Failures(batch.size)
    ctx = descending(ctx, index)
    if ctx.phases:  # a plan of several bodies: this step's
        ctx = in_phase(ctx, index)
        for first, drift, j2 in ctx.phase_drifts:  # and its J2 drift (under gravity j2)
            if first <= index:
                ctx = replace(ctx, drift=drift, j2=j2)
    if step.kind == "leg":
        new, rows = leg_rows(step, index, batch, ctx, fails)
    elif isinstance(step, Entry):
        from .entry import entry_rows

        new, rows = entry_rows(step, index, batch, ctx, fails)
    elif isinstance(step, Burn):
        new, row = _burn_rows(step, index, step.name, batch, ctx, fails)
        rows = [row]
    elif isinstance(step, Transfer):
        new, rows = _transfer(step, index, batch, ctx, fails)
    elif isinstance(step, Coast):
        new, rows = _coast(step, index, batch, ctx, fails)
    elif isinstance(step, Drop):
        new, rows = _drop(step, index, batch, ctx, fails)
    elif isinstance(step, Expect):
        new, rows = _expect(step, index, batch, ctx, fails)
    elif isinstance(step, Allow):
        new, rows = _allow(step, index, batch, ctx, fails, ctx.statistical_scale)
    else:  # pragma: no cover - lowering makes only the kinds above
        raise TypeError(type(step))
    return new, rows, fails


@dataclass
class Result:
    program: Program
    rows: list[Row]
    final: Batch
    error: PlanError | None = None
    failed_step: int | None = None  # index of the step that could not be flown
    failure: str | None = None  # its kind ("infeasible": geometry), or None

    @property
    def ok(self) -> bool:
        return self.error is None

    @property
    def first_uncovered(self) -> Row | None:
        """The first burn or allowance the load does not cover (None when it covers all)."""
        return next((r for r in self.rows if r.covered is not None and not r.covered[0]), None)


def run(program: Program, strict: bool = False) -> Result:
    """Price one plan (a batch of one).  The first failure stops the chain.

    With ``strict`` the failure is raised as a PlanError; otherwise it is kept in the
    result next to the rows computed so far.
    """
    ctx = context_for(program)
    batch = start_batch(program)
    start_fails = Failures(1)
    _check_surface(batch.r, batch.v, descending(ctx, -1), start_fails, "the start")
    rows: list[Row] = []
    error = None
    failed = kind = None
    if not start_fails.ok[0]:
        message, hint = start_fails.reason(0)
        error = PlanError(message, program.start_span, program.source, hint)
        kind = start_fails.code(0)
    else:
        for index, step in enumerate(program.steps):
            new, step_rows, fails = apply(step, index, batch, ctx)
            if not fails.ok[0]:
                message, hint = fails.reason(0)
                if not message.startswith((f"{step.name}:", f"{step.name}/")):
                    message = f"{step.name}: {message}"
                error = PlanError(message, step.span, program.source, hint)
                failed = index
                kind = fails.code(0)
                break
            rows.extend(step_rows)
            batch = new
    if error is not None and strict:
        raise error
    return Result(program, rows, batch, error, failed, kind)
