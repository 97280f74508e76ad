"""Patched-conic legs: a plan that leaves one central body for another.

A plan is a chain of phases, each around one body.  A ``leg`` step ends a phase: the
craft, on a hyperbola about the departure body, is switched at once onto the arrival
hyperbola about the next body (the plan's next ``start orbit``), the leg's time of flight
is added to the clock, and mass and budget run on.  The heliocentric (or, generally,
parent-centred) part is either the coplanar Hohmann transfer between the two bodies'
circular orbits of the catalogue, or given by the plan: the hyperbolic excess speed at
each end and the time of flight.

What the approximation leaves out is in docs/physics.md ("Patched-conic legs").
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
from apsidal.lang.errors import PlanError, Span

from .bodies import Body, lookup

VINF_TOL = 1e-4  # km/s: the departure hyperbola's vinf meets the leg's within 0.1 m/s
GIVEN_HINT = ("give the leg's hyperbolic excess speed at both ends and its time of flight "
              "instead: `leg NAME to BODY vinf 3 km/s to 2.6 km/s for 200 d`")


@dataclass(frozen=True)
class Leg:
    """A patched-conic leg: the switch from the departure body to the arrival body."""

    name: str
    body: Body  # the arrival body: the phase after the leg flies around it
    depart: Body  # the body the phase before the leg flies around
    vinf_depart: float  # km/s, what the departure hyperbola must have
    vinf_arrive: float  # km/s, what the arrival hyperbola has
    duration: float  # s, the time of flight between the two
    form: str  # hohmann | given
    arrival_r: tuple[float, float, float]  # km, the arrival start about ``body``
    arrival_v: tuple[float, float, float]  # km/s
    span: Span | None = None
    arrival_span: Span | None = None  # the arrival `start orbit`
    kind: str = field(default="leg", init=False)


@dataclass(frozen=True)
class Hohmann:
    """The coplanar circular-orbit Hohmann transfer between two radii about one parent."""

    vinf_depart: float  # km/s
    vinf_arrive: float  # km/s
    duration: float  # s: half the transfer orbit's period


def hohmann(mu: float, r1: float, r2: float) -> Hohmann:
    """Hyperbolic excess speeds and time of flight of the Hohmann transfer from a circular
    orbit of radius ``r1`` to one of ``r2`` about a parent of ``mu`` (vis-viva)."""
    a = 0.5 * (r1 + r2)
    v1, v2 = math.sqrt(mu / r1), math.sqrt(mu / r2)
    p1, p2 = math.sqrt(mu * (2.0 / r1 - 1.0 / a)), math.sqrt(mu * (2.0 / r2 - 1.0 / a))
    return Hohmann(abs(p1 - v1), abs(v2 - p2), math.pi * math.sqrt(a**3 / mu))


def catalogue_hohmann(depart: Body, arrive: Body) -> tuple[Hohmann | None, str, str]:
    """The Hohmann transfer between two catalogue bodies' orbits around their common
    parent; or None with (why, hint) when they have none."""
    for b in (depart, arrive):
        if b.parent is None or b.orbit_sma is None:
            return None, (f"{b.name} has no orbit in the catalogue (it is the root of the "
                          "catalogue, or defined in the plan), so the leg has no Hohmann "
                          "transfer to price"), GIVEN_HINT
    if depart.parent != arrive.parent:
        return None, (f"{depart.name} and {arrive.name} do not orbit a common parent "
                      f"({depart.name} orbits {depart.parent}, {arrive.name} orbits "
                      f"{arrive.parent}): a Hohmann leg runs between two orbits around one "
                      "body"), GIVEN_HINT
    parent = lookup(depart.parent)
    return hohmann(parent.gm, depart.orbit_sma, arrive.orbit_sma), "", ""


def is_leg(step) -> bool:
    return getattr(step, "kind", None) == "leg"


def phases_of(steps) -> tuple[tuple[int, float, float], ...]:
    """(first step index, mu, radius) of each phase after the first: where a leg has
    switched the body.  Empty for a plan around one body."""
    return tuple((i + 1, s.body.gm, s.body.radius) for i, s in enumerate(steps) if is_leg(s))


def in_phase(ctx, index: int):
    """The evaluator's context for step ``index``: the body of its phase.  A leg itself
    is flown in the phase it ends (it reads the departure hyperbola)."""
    mu, radius = ctx.mu, ctx.radius
    for first, gm, r in ctx.phases:
        if first > index:
            break
        mu, radius = gm, r
    if (mu, radius) == (ctx.mu, ctx.radius):
        return ctx
    return replace(ctx, mu=mu, radius=radius)


def step_bodies(program) -> list[Body]:
    """The body each step's state after it is reckoned around (a leg's is the arrival)."""
    body, out = program.body, []
    for s in program.steps:
        if is_leg(s):
            body = s.body
        out.append(body)
    return out


class PhaseBodies:
    """``body_at`` for what the rules read (a ``program`` attribute): the body the state
    after step ``step_index`` is reckoned around (for a leg, the arrival body; for any
    other step, the body it flies around), the last phase's past the end."""

    def body_at(self, step_index: int) -> Body:
        if getattr(self, "_bodies", None) is None:
            self._bodies = step_bodies(self.program) or [self.program.body]
        return self._bodies[min(step_index, len(self._bodies) - 1)]


def final_body(program) -> Body:
    return next((s.body for s in reversed(program.steps) if is_leg(s)), program.body)


def leg_rows(step: Leg, index: int, batch, ctx, fails):
    """Fly a leg: the departure hyperbola's vinf checked against the leg's, then the
    whole batch switched to the arrival hyperbola, the time of flight on the clock."""
    from .evaluate import Row

    r, v = batch.r, batch.v
    energy = 0.5 * np.einsum("ij,ij->i", v, v) - ctx.mu / np.linalg.norm(r, axis=1)
    vinf = np.sqrt(np.maximum(2.0 * energy, 0.0))
    goal = f"`vinf to {step.vinf_depart:.5f} km/s`"
    closed = energy <= 0.0
    fails.add(closed, lambda i: (
        (f"a leg leaves on a hyperbola, but the craft is on a closed orbit about "
         f"{step.depart.name} (specific energy {energy[i]:.6f} km2/s2): the leg to "
         f"{step.body.name} needs a departure vinf of {step.vinf_depart:.5f} km/s"),
        (f"burn onto the departure hyperbola before the leg: a burn with the goal "
        f"`vinf to leg` (here {goal})")))
    off = ~closed & (np.abs(vinf - step.vinf_depart) > VINF_TOL)
    fails.add(off, lambda i: (
        (f"the departure hyperbola's vinf is {vinf[i]:.5f} km/s, but the leg to "
         f"{step.body.name} needs {step.vinf_depart:.5f} km/s"
         + (" (the Hohmann transfer between the two orbits)" if step.form == "hohmann"
            else "")),
        (f"give the departure burn the goal `vinf to leg` (here {goal}), or the leg the "
        "vinf the craft leaves with")))
    n = batch.size
    dt = np.full(n, step.duration)
    ok = fails.ok[:, None]
    new = replace(batch, r=np.where(ok, np.tile(step.arrival_r, (n, 1)), r),
                  v=np.where(ok, np.tile(step.arrival_v, (n, 1)), v), t=batch.t + dt)
    return new, [Row(index, step.name, "leg", f"to {step.body.name}", new, coast_time=dt,
                     duration=dt)]


# --- lowering ------------------------------------------------------------------------

ARRIVAL_HINT = ("after a leg, `start orbit periapsis 300 km` (with `inclination`, `raan`, "
                "`argp`, `anomaly` as needed) starts the arrival phase on the arrival "
                "hyperbola; its vinf comes from the leg")


def no_arrival(leg, after) -> PlanError:
    """A leg with no arrival start before the next step (or the end of the plan)."""
    where = (f"before the next step (line {after.span.line})" if after is not None
             else "after it")
    return PlanError(f"the leg to {leg.body.text} needs its arrival start {where}", leg.span,
                     None, ARRIVAL_HINT)


def after_leg(st, leg, arrival) -> None:
    """A plan-level statement after a leg: only the one arrival start belongs there."""
    from apsidal.lang import syntax as ast

    if isinstance(st, ast.Trade):  # a trade study may stand anywhere
        return
    if isinstance(st, ast.Start):
        raise PlanError(f"the leg on line {leg.span.line} already has its arrival start "
                        f"(line {arrival.span.line})", st.span, None,
                        "keep one `start` after each leg")
    if isinstance(st, ast.Around):
        raise PlanError(f"the leg on line {leg.span.line} already takes the plan around "
                        f"{leg.body.text}", st.span, None,
                        "drop this `around`: after a leg the steps fly around the body the "
                        "leg goes to")
    raise PlanError("the plan's settings, craft and bodies come before its first leg",
                    st.span, None, f"move this statement above line {leg.span.line}")


def leg_figures(depart: Body, arrive: Body, node) -> tuple[float, float, float, str]:
    """(departure vinf, arrival vinf, time of flight, form) of the leg ``node`` from
    ``depart`` to ``arrive``; PlanError where the leg has none."""
    if arrive is depart or arrive.name == depart.name:
        raise PlanError(f"the leg goes to {arrive.name}, the body the plan already flies "
                        "around", node.body.span, None,
                        "a leg goes to another body; to change the orbit around this one, "
                        "burn or transfer")
    if node.depart is not None:
        return node.depart.internal(), node.arrive.internal(), node.duration.internal(), "given"
    found, why, hint = catalogue_hohmann(depart, arrive)
    if found is None:
        raise PlanError(why, node.body.span, None, hint)
    return found.vinf_depart, found.vinf_arrive, found.duration, "hohmann"


def departure_vinfs(lowerer, steps_ast) -> list:
    """The departure vinf of each leg of the plan, in order (km/s), for `vinf to leg`
    goals; a leg that has none gives the PlanError its own lowering will raise."""
    from apsidal.lang import syntax as ast

    out, body = [], lowerer.body
    for node in steps_ast:
        if not isinstance(node, ast.Leg):
            continue
        try:
            arrive = lowerer._find_body(node.body, node.span.line)
            out.append(leg_figures(body, arrive, node)[0])
            body = arrive
        except PlanError as err:
            out.append(err)
            break  # past a leg that cannot be lowered nothing is known
    return out


def vinf_to_leg(lowerer, goal):
    """A `vinf to leg` goal as `vinf to V km/s`, V the departure vinf of the next leg."""
    from apsidal.lang import syntax as ast

    found = lowerer.leg_vinfs[lowerer.phase] if lowerer.phase < len(lowerer.leg_vinfs) \
        else None
    if found is None:
        raise PlanError("`vinf to leg` takes the departure vinf of the plan's next leg, and "
                        "no leg follows this burn", goal.span, None,
                        "add `leg NAME to BODY` after the burn (and the arrival start after "
                        "it), or give the vinf: `vinf to 3 km/s`")
    if isinstance(found, PlanError):
        raise found
    return replace(goal, value=ast.Quantity(repr(found), "km/s", goal.value.span))


def lower_leg(lowerer, node, start) -> Leg:
    """The Leg step of ``leg NAME to BODY [vinf V1 to V2 for T]`` and its arrival start,
    lowered by ``lowerer`` (whose body is the departure body)."""
    from apsidal.lang import syntax as ast

    depart = lowerer.body
    arrive = lowerer._find_body(node.body, node.span.line)
    vinf_d, vinf_a, duration, form = leg_figures(depart, arrive, node)
    name = lowerer._name(node, "leg")
    if start.form != "orbit":
        raise PlanError("the arrival start is on the arrival hyperbola, not a circle",
                        start.span, None, ARRIVAL_HINT)
    allowed = ("periapsis", "vinf", "inclination", "raan", "argp", "anomaly")
    bad = next((f for f in start.fields if f.key not in allowed), None)
    if bad is not None:
        raise PlanError(f"the arrival start takes no `{bad.key}`: the arrival hyperbola's "
                        f"shape follows from its periapsis and the leg's vinf "
                        f"({vinf_a:.5f} km/s)", bad.span, None, ARRIVAL_HINT)
    fields = {f.key: f for f in start.fields}
    if "periapsis" not in fields:
        raise PlanError("the arrival start needs the arrival hyperbola's `periapsis`",
                        start.span, None, ARRIVAL_HINT)
    lowerer.body = arrive
    rp = lowerer._radius(fields["periapsis"].value)
    steps = lowerer.steps_ast[lowerer.steps_ast.index(node) + 1:]
    direct = lowerer._ends and not any(isinstance(s, ast.Burn | ast.Transfer | ast.Leg)
                                       for s in steps)
    if direct and rp > 0:
        pass  # a direct entry: the arrival hyperbola may be aimed under the surface
    elif rp <= arrive.radius:
        raise PlanError(f"the arrival periapsis ({rp - arrive.radius:.3f} km altitude, radius "
                        f"{rp:.3f} km) is under the surface of {arrive.name} (radius "
                        f"{arrive.radius:.3f} km)", fields["periapsis"].span, None,
                        "altitudes are above the arrival body's equatorial radius; aim the "
                        "arrival hyperbola's periapsis above it (or, for a direct entry, end "
                        "the plan with `entry at ALT` and no burn after the leg)")
    if "vinf" in fields:
        given = fields["vinf"].value.internal()
        if abs(given - vinf_a) > VINF_TOL:
            raise PlanError(f"the arrival start's vinf ({given:.5f} km/s) is not the "
                            f"leg's ({vinf_a:.5f} km/s)", fields["vinf"].span, None,
                            f"drop `vinf` (the leg sets it) or write `vinf {vinf_a:.5f} km/s`")
    else:
        q = ast.Quantity(repr(vinf_a), "km/s", start.span)
        start = replace(start, fields=(*start.fields, ast.Field("vinf", q, start.span)))
    r, v = lowerer._start_state(start, below_ok=direct)
    return Leg(name, arrive, depart, vinf_d, vinf_a, duration, form,
               tuple(float(x) for x in r), tuple(float(x) for x in v), node.span, start.span)
