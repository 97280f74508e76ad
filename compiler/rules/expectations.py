"""Rules that hold a plan to what it says of itself: expectations, reserve, propellant."""

from __future__ import annotations

from ..check import Checker, Finding, rule
from ..render import _check_text


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
                                   f"{s['name']}: expected {_check_text(chk)}"))
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

