"""Rules that weigh one transfer geometry against another."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
from apsidal.lang import syntax as ast
from apsidal.lang.errors import Span

from ..bodies import moons_within
from ..check import Checker, Finding, Proof, rule, saving_text, with_goals
from ..state import elements_from_state, norm
from ..steps import Burn, Transfer
from ..textfmt import duration
from .bounds import (
    BI_ELLIPTIC_RATIO,
    bi_elliptic_lower_bound,
    detour_lower_bound,
    plane_angle,
)

GRID = 10  # apoapsis candidates tried across the allowed range, before refining
REFINE = 5  # finer grids across the bracket of the best (each shrinks it 4 times)
REFINE_POINTS = 9  # points of each finer grid, ends included


def _distance(alt_km: float, span: Span) -> ast.Distance:
    q = ast.Quantity(f"{alt_km:.0f}", "km", span)
    return ast.Distance(q, False, span)


def apoapsis_bound(c: Checker, i: int = 0) -> tuple[float, str]:
    """Highest apoapsis radius (km) a detour from step ``i`` may use, and why."""
    body = c.body_at(i)
    if body.soi is not None:
        bound, why = 0.95 * body.soi, f"95 % of {body.name}'s sphere of influence"
    else:
        bound, why = (100.0 * body.radius,
                      f"100 body radii ({body.name} has no sphere of influence set)")
    ceiling = c.program.ceiling  # a radius around the plan's first body
    if ceiling is not None and body is c.program.body and ceiling < bound:
        bound, why = ceiling, f"the plan's ceiling of {ceiling - body.radius:g} km altitude"
    return bound, why


def best_apoapsis(c: Checker, build, low: float, high: float,
                  rule_name: str = "", i: int = 0) -> Proof | None:
    """The cheapest proven plan over apoapsis radii in [low, high] (km).

    ``build(alt_km)`` gives the rewrite for an apoapsis altitude (whole km).  A
    geometric grid brackets the optimum and finer grids across the bracket refine it,
    each grid priced as one batch (``Checker.prove_all``) until the bracket is under a
    kilometre; every candidate is priced as a whole plan.
    """
    if not high > low:
        return None
    radius = c.body_at(i).radius
    cache: dict[int, Proof | None] = {}
    alt_of = lambda log_r: round(math.exp(log_r) - radius)

    def price(grid) -> bool:
        new = sorted({alt_of(g) for g in grid} - cache.keys())
        if new and c.budget.expired():
            c.budget.cut(rule_name)
            return False
        cache.update(zip(new, c.prove_all([build(alt) for alt in new])))
        return bool(new)

    def score(log_r: float) -> float:
        p = cache[alt_of(log_r)]
        return -p.saves_kg if p else math.inf

    grid = np.linspace(math.log(low), math.log(high), GRID)
    more = price(grid)
    for _ in range(REFINE):
        if not more:  # the time limit, or the bracket is within a kilometre
            break
        scores = [score(g) for g in grid]
        k = int(np.argmin(scores))
        if not math.isfinite(scores[k]):
            break
        grid = np.linspace(grid[max(k - 1, 0)], grid[min(k + 1, len(grid) - 1)], REFINE_POINTS)
        more = price(grid)
    proofs = [p for p in cache.values() if p is not None]
    return max(proofs, key=lambda p: p.saves_kg, default=None)


def _bi_elliptic_room(c: Checker, i: int, step: Transfer, bound: float) -> float:
    """The most (m/s, with margin) a bi-elliptic transfer in place of Hohmann transfer
    ``i`` could save: its own delta-v less the least any bi-elliptic one can cost."""
    rows = c.rows_of(i)
    first = rows[0]
    r0 = float(np.linalg.norm(first.after.r[0]))
    v0 = float(np.linalg.norm(first.v_before[0]))
    h0 = np.cross(first.after.r[0], first.v_before[0])
    h1 = np.cross(rows[-1].after.r[0], rows[-1].after.v[0])
    theta = float(np.arctan2(np.linalg.norm(np.cross(h0, h1)), np.dot(h0, h1)))
    least = bi_elliptic_lower_bound(c.body_at(i).gm, r0, v0, step.radius, theta,
                                    1.05 * step.radius, bound)
    own = sum(float(r.dv[0]) for r in rows)
    return (own - least) * (1.0 + step.margin) * 1000.0


def _never_pays(c: Checker, i: int, target: float) -> bool:
    """From a circular orbit to a circular one in the same plane, a bi-elliptic transfer
    never beats Hohmann's below a radius ratio of 11.94, whatever its apoapsis."""
    before = c.state_before(i)
    el = elements_from_state(before.r, before.v, c.body_at(i).gm)
    if not el.ecc[0] < 1e-6:
        return False
    r0 = float(np.linalg.norm(before.r[0]))
    return max(r0, target) / min(r0, target) < BI_ELLIPTIC_RATIO


@rule("bi-elliptic-cheaper")
def bi_elliptic_cheaper(c: Checker) -> list[Finding]:
    """A Hohmann transfer that a bi-elliptic one beats.

    Going out past the target to a far apoapsis, raising the periapsis there where the
    craft is slow, and coming back in costs less than the two Hohmann burns once the
    target radius is more than about 11.9 times the start (always beyond 15.6 times).
    The rule searches the intermediate apoapsis up to the body's sphere of influence (or
    the plan's `ceiling`) and
    reports the best; it costs far more time in flight, which the finding shows.
    """
    out = []
    for i, step in enumerate(c.program.steps):
        if not (isinstance(step, Transfer) and step.form == "hohmann"):
            continue
        bound, why = apoapsis_bound(c, i)
        if not step.changes_plane and _never_pays(c, i, step.radius):
            c.budget.pruned += 1
            continue
        if not c.can_pay("bi-elliptic-cheaper", _bi_elliptic_room(c, i, step, bound)):
            continue
        if c.budget.expired():
            c.budget.cut("bi-elliptic-cheaper")
            break
        node = with_goals(c.statements[i], c.pin_plane(c.statements[i].goals, i))
        low = 1.05 * step.radius
        proof = best_apoapsis(
            c, lambda alt, i=i, node=node: c.rewrite({i: [_with_via(node, alt)]}),
            low, bound, "bi-elliptic-cheaper", i)
        if proof is None:
            continue
        extra = float(proof.result.final.t[0] - c.result.final.t[0])
        out.append(c.finding(
            "bi-elliptic-cheaper", "warning", (step.name,),
            f"{step.name} as a bi-elliptic transfer saves {saving_text(proof)}, "
            f"for {extra / 86400:.1f} more days in flight", proof,
            notes=(f"intermediate apoapsis searched up to {why}",
                   far_note(c, proof, step.name, i))))
    return out


def _extra_time(c: Checker, proof: Proof) -> str:
    return duration(max(float(proof.result.final.t[0] - c.result.final.t[0]), 0.0))


def far_note(c: Checker, proof: Proof, name: str, i: int = 0) -> str:
    """How far a rewritten transfer's burns reach, against the sphere of influence and
    the orbits of the body's moons (which the two-body estimate leaves out)."""
    far = max(float(norm(r.after.r)[0]) for r in proof.result.rows
              if r.name.startswith(f"{name}/"))
    body = c.body_at(i)
    text = f"the detour reaches {far:,.0f} km from {body.name}'s centre"
    if body.soi is not None:
        text += f", {100 * far / body.soi:.0f} % of its sphere of influence ({body.soi:,.0f} km)"
    moons = moons_within(body, far)
    if moons:
        text += ("; it passes the orbit of " + " and ".join(
            f"{'the ' if m.name == 'Moon' else ''}{m.name} ({m.orbit_sma:,.0f} km)"
            for m in moons)
            + ", whose pull the impulsive two-body estimate leaves out")
    return text


@rule("hohmann-cheaper")
def hohmann_cheaper(c: Checker) -> list[Finding]:
    """A bi-elliptic transfer that the plain Hohmann transfer beats.

    Below a target-to-start radius ratio of about 11.9 the bi-elliptic detour never pays;
    between 11.9 and 15.6 it pays only with a far enough intermediate apoapsis.  The rule
    prices the same transfer without `via` and reports the saving.
    """
    proposals = []
    for i, step in enumerate(c.program.steps):
        if not (isinstance(step, Transfer) and step.form == "bielliptic"):
            continue
        node = c.statements[i]
        hohmann = replace(node, via=None, goals=tuple(c.pin_plane(node.goals, i)))
        proposals.append((c.rewrite({i: [hohmann]}), lambda proof, step=step: c.finding(
            "hohmann-cheaper", "warning", (step.name,),
            f"{step.name} as a Hohmann transfer (without `via`) saves "
            f"{saving_text(proof)}", proof)))
    return c.findings_of("hohmann-cheaper", proposals)


def _with_via(node: ast.Transfer, alt_km: float):
    return replace(node, via=_distance(alt_km, node.span))


@rule("three-burn-plane-change")
def three_burn_plane_change(c: Checker) -> list[Finding]:
    """A large plane change that a three-burn detour through a raised apoapsis beats.

    Raising the apoapsis, turning the plane there at low speed and lowering it again
    costs less than a pure rotation 2 v sin(di/2) once the angle is large: above about
    48.9 deg even with an unbounded apoapsis, and from about 38.9 deg with the best
    apoapsis.  The rule searches the apoapsis up to the body's sphere of influence (or the
    plan's `ceiling`) and
    reports the cheapest detour as `transfer NAME: inclination to I via apoapsis A`.
    """
    out = []
    for i, step in enumerate(c.program.steps):
        if not (isinstance(step, Burn) and step.vector is None and step.changes_plane
                and not step.changes_shape):
            continue
        bound, why = apoapsis_bound(c, i)
        node = c.statements[i]
        row = c.rows_of(i)[0]
        r = float(np.linalg.norm(row.after.r[0]))
        theta = plane_angle(row.after.r[0], row.v_before[0], row.after.v[0])
        speed = float(np.linalg.norm(row.v_before[0]))
        least = detour_lower_bound(c.body_at(i).gm, r, speed, theta, 1.1 * r, bound)
        if not c.can_pay("three-burn-plane-change",
                         (float(row.dv[0]) - least) * (1.0 + row.margin) * 1000.0):
            continue  # below the break-even angle here: no apoapsis makes it pay
        if c.budget.expired():
            c.budget.cut("three-burn-plane-change")
            break
        plane = tuple(c.pin_plane([g for g in node.goals if g.kind in ("inclination", "raan")],
                                  i))

        def build(alt, i=i, node=node, plane=plane):
            t = ast.Transfer(node.name, node.where, plane, _distance(alt, node.span),
                             node.options, node.span)
            return c.rewrite({i: [t]})

        proof = best_apoapsis(c, build, 1.1 * r, bound, "three-burn-plane-change", i)
        if proof is None:
            continue
        out.append(c.finding(
            "three-burn-plane-change", "warning", (step.name,),
            f"{step.name} as a three-burn plane change through a raised apoapsis saves "
            f"{saving_text(proof)}, for {_extra_time(c, proof)} more in flight", proof,
            notes=(f"apoapsis searched up to {why}", far_note(c, proof, step.name, i),
                   f"the detour's burns are reported as {step.name}/1 to {step.name}/3")))
    return out
