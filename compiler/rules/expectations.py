"""Rules that hold a plan to what it says of itself: expectations, reserve, propellant."""

from __future__ import annotations

from ..check import Checker, Finding, rule
from ..render import check_text


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
    if tot["reserve_met"]:
        return []
    return [Finding("reserve-not-covered", "error", (),
                    f"the plan ends with {tot['dv_capacity_left_m_s']:.1f} m/s of delta-v "
                    f"capacity, less than its reserve of {tot['reserve_m_s']:.1f} m/s")]


@rule("propellant-exhausted", needs_flyable=False)
def propellant_exhausted(c: Checker) -> list[Finding]:
    """A burn needs more propellant than the craft has left.

    Propellant per burn follows the rocket equation with the engine's specific impulse
    and standard gravity, on the delta-v with margin.  The finding names the burn, what
    it needs, what remains and the shortfall; nothing after it can be priced.
    """
    err = c.result.error
    if err is None or c.result.failure != "propellant":
        return []
    steps = (c.program.steps[c.result.failed_step].name,)
    return [Finding("propellant-exhausted", "error", steps,
                    err.message + (f" ({err.hint})" if err.hint else ""))]



@rule("beyond-sphere-of-influence")
def beyond_sphere_of_influence(c: Checker) -> list[Finding]:
    """An orbit of the plan reaches beyond the body's sphere of influence.

    apsidal prices every step with the central body alone.  Past the sphere of influence
    (Laplace's radius, from the catalogue or the body's `soi`) another body — the Sun, or
    the planet a moon circles — pulls harder than the central one, and the orbit is no
    longer the conic the numbers assume: the estimate there is not to be used for sizing.
    """
    body = c.program.body
    if body.soi is None:
        return []
    out = []
    for s in c.report["steps"]:
        ap = s["orbit_after"]["apoapsis_alt_km"]
        if ap is not None and ap + body.radius > body.soi:
            out.append(Finding(
                "beyond-sphere-of-influence", "warning", (s["name"],),
                f"after {s['name']} the apoapsis ({ap:,.0f} km altitude) lies beyond "
                f"{body.name}'s sphere of influence ({body.soi - body.radius:,.0f} km "
                "altitude): the two-body approximation does not hold out there"))
    return out
