"""Rules that hold a plan to what it says of itself: expectations, reserve, propellant."""

from __future__ import annotations

from ..budget import shortfall_text
from ..check import Checker, Finding, rule
from ..evaluate import start_batch
from ..render import check_text
from ..state import elements_from_state, norm


@rule("expectation-not-met")
def expectation_not_met(c: Checker) -> list[Finding]:
    """An `expect` line is not met by the state the plan reaches at that point.

    Each `expect` checks the orbit (periapsis, apoapsis, circular, sma, ecc,
    inclination, raan, argp, period) or the craft (mass, propellant) at its place in the
    chain.  A miss means the burns before it do not do what the plan says they do: a
    goal altitude typed wrong, a burn at the wrong place, a plane change left out.  The
    finding gives the expected and the actual value.
    """
    out = []
    for s in c.report["steps"]:
        for chk in s.get("checks", []):
            if not chk["passed"]:
                out.append(Finding("expectation-not-met", "error", (s["name"],),
                                   f"{s['name']}: expected {check_text(chk)}"))
    return out


@rule("reserve-not-covered")
def reserve_not_covered(c: Checker) -> list[Finding]:
    """The delta-v left at the end is less than the plan's `reserve`.

    `reserve 25 m/s` holds delta-v back for what the plan does not list (dispersions,
    a missed burn, end-of-life disposal).  The capacity left is what the remaining
    propellant gives with the default engine at the final mass, by the rocket equation.
    """
    tot = c.report["totals"]
    if tot["reserve_met"] or tot["first_uncovered_step"] is not None:
        return []  # a load that runs out is the propellant finding's
    add = (f"; the load that covers it is {tot['propellant_needed_kg']:,.3f} kg: add "
           f"{tot['shortfall_kg']:,.3f} kg" if tot.get("propellant_needed_kg") else "")
    return [Finding("reserve-not-covered", "error", (),
                    f"the plan ends with {tot['dv_capacity_left_m_s']:.1f} m/s of delta-v "
                    f"capacity, less than its reserve of {tot['reserve_m_s']:.1f} m/s{add}")]


@rule("propellant-exhausted", needs_flyable=False)
def propellant_exhausted(c: Checker) -> list[Finding]:
    """The load does not fly the plan with its margins, residual and reserve.

    Propellant per burn follows the rocket equation with the engine's specific impulse
    and standard gravity, on the delta-v with margin.  The whole plan is priced anyway
    (in the impulsive model no delta-v depends on the mass); the finding names the first
    burn the load does not cover, the load the plan needs (the exact backward pass of
    `apsidal size`), the load it has and the difference to add.  `check` runs this rule
    whatever `--rule` selects: a plan that does not fit is never reported clean.
    """
    tot = c.report["totals"]
    if c.report["feasible"] or tot["first_uncovered_step"] is None:
        return []  # a reserve the load does not cover is reserve-not-covered's
    first = tot["first_uncovered_step"]
    return [Finding("propellant-exhausted", "error", (first,) if first else (),
                    f"the plan does not fit its load: {shortfall_text(c.report)}, or find "
                    "delta-v to cut")]


@rule("beyond-sphere-of-influence")
def beyond_sphere_of_influence(c: Checker) -> list[Finding]:
    """A state of the plan lies beyond the body's sphere of influence.

    apsidal prices every step with the central body alone.  Past the sphere of influence
    (Laplace's radius, from the catalogue or the body's `soi`) another body — the Sun, or
    the planet a moon circles — pulls harder than the central one, and the orbit is no
    longer the conic the numbers assume: the estimate there is not to be used for sizing.
    A step is flagged where the craft is past that radius (at its start or its end: an
    escape that coasts out, a burn flown out there), and where it leaves a bound orbit
    whose apoapsis passes it.
    """
    out = []
    before = start_batch(c.program).r
    for row in c.result.rows:
        body = c.body_at(row.step)  # after a leg: the arrival body, as its state is
        if row.kind == "leg":  # the state before it is around the body it leaves
            before = row.after.r
        if body.soi is None:
            before = row.after.r
            continue
        soi, mu = body.soi, body.gm
        far = float(max(norm(before)[0], norm(row.after.r)[0]))
        before = row.after.r
        el = elements_from_state(row.after.r, row.after.v, mu)
        apoapsis = float(el.apoapsis[0]) if bool(el.closed[0]) else None
        parts = []
        if far > soi:
            parts.append(f"the craft is {far:,.0f} km from {body.name}'s centre, "
                         f"{far - soi:,.0f} km past the sphere-of-influence radius of "
                         f"{soi:,.0f} km")
        if apoapsis is not None and apoapsis > soi:
            parts.append(f"the apoapsis after it ({apoapsis - body.radius:,.0f} km altitude, "
                         f"radius {apoapsis:,.0f} km) passes the sphere-of-influence radius "
                         f"of {soi:,.0f} km")
        if parts:
            out.append(Finding(
                "beyond-sphere-of-influence", "warning", (row.name,),
                f"{row.kind} {row.name}: " + "; ".join(parts)
                + ": the two-body approximation does not hold out there"))
    return out
