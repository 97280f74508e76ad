"""A node change bought with a burn that the differential J2 drift could make instead."""

from __future__ import annotations

import math

import numpy as np

from ..check import Checker, Finding, at_same_time, rule, saving_text
from ..legs import final_body
from ..state import TWO_PI, elements_from_state
from ..steps import Burn
from ..textfmt import duration

DEFAULT_WAIT = 365.25 * 86400.0  # s: the longest drift offered when the plan sets none
FLOOR = 1.03  # the lowest drift orbit, in body radii (no drag is modelled)
FILL = 0.98  # the share of the allowed wait the drift orbit is sized for
SECANT = 8  # evaluator passes that tune the wait until the node comes out exact
NODE_TOL = 1e-7  # rad: the rewritten plan's final node against the plan's own


class Route:
    """A drift route: the rewritten plan text, its wait (s), what it drifts in and what
    its burns are (a plain class: no dataclass to build when `run` imports the rules)."""

    __slots__ = ("legs", "text", "wait", "where")

    def __init__(self, text: str, wait: float, where: str, legs: str) -> None:
        self.text, self.wait, self.where, self.legs = text, wait, where, legs


def _node_burns(c: Checker):
    """(index, step, its priced row) of goal burns that change only the node (`raan
    to`, alone or with the inclination the orbit already has) of a circular, inclined
    orbit."""
    for i, step in enumerate(c.program.steps):
        if not (isinstance(step, Burn) and step.vector is None and step.raan is not None):
            continue
        mu = c.body_at(i).gm  # the body of the burn's phase (a plan with legs has several)
        if step.changes_shape or step.sun_synchronous is not None or step.fixed:
            continue
        row = c.rows_of(i)[0]
        el = elements_from_state(row.after.r, row.v_before, mu)
        if not (el.closed[0] and el.ecc[0] < 1e-7) or el.equatorial[0]:
            continue
        if step.inclination is not None and abs(step.inclination - el.inclination[0]) > 1e-9:
            continue
        yield i, step, row


@rule("drift-node-change")
def drift_node_change(c: Checker) -> list[Finding]:
    """A node change flown by a burn, where waiting in an orbit of another size or
    inclination would let J2 turn the node for free (plans under `gravity j2`).

    J2 turns the node of an orbit at a rate that falls with its size (as a^-3.5) and
    with cos i, so two orbits of different altitude or inclination drift apart in
    node.  Constellations place their planes this way: one launch, then each craft
    waits in a drift orbit until the differential drift has opened its node, and
    climbs to the common orbit.  For a burn that changes only the node of a circular
    orbit, the rule prices four routes: down or up by a Hohmann transfer, a coast while
    the drift accumulates, and a Hohmann transfer back; or a tilt of the inclination at
    a node, the coast, and the tilt back.  Each drift orbit is sized so the wait fills
    the plan's `drift at most` (a year when it sets none), and the wait (for a tilt,
    whose way back waits for a node, the drift inclination) is tuned on the evaluator
    until the plan ends in its own plane.  The proof compares the two plans'
    final orbits at the same moment, since every node keeps drifting.  The finding gives
    the cost, the saving and the time the drift takes.
    """
    if c.program.gravity != "j2":
        return []
    limit = c.program.drift_limit or DEFAULT_WAIT
    out = []
    for i, step, row in _node_burns(c):
        if c.budget.expired():
            c.budget.cut("drift-node-change")
            break
        routes = [r for r in (_altitude_route(c, i, step, row, limit, True),
                              _altitude_route(c, i, step, row, limit, False),
                              _tilt_route(c, i, step, row, limit, True),
                              _tilt_route(c, i, step, row, limit, False)) if r is not None]
        proofs = c.prove_all([r.text for r in routes], "drift-node-change")
        found = [(p, r) for p, r in zip(proofs, routes) if p is not None]
        if not found:
            continue
        proof, route = max(found, key=lambda pr: pr[0].saves_kg)
        extra = float(proof.final.t[0] - c.result.final.t[0])
        note = () if c.program.drift_limit is not None else (
            (f"the plan sets no `drift at most`; this route waits {duration(route.wait)} "
             "(a year is the default); a longer wait costs less, a shorter one more"),)
        cost = float(sum(r.dv_margin[0] for r in proof.result.rows if r.kind == "burn"
                         and r.name.startswith(f"{step.name}-drift"))) * 1000.0
        out.append(c.finding(
            "drift-node-change", "warning", (step.name,),
            f"{step.name} turns the node with a burn; drifting {route.where} for "
            f"{duration(route.wait)} lets J2 turn it instead ({cost:.1f} m/s for "
            f"{route.legs}, the plan {duration(extra)} longer) and saves "
            f"{saving_text(proof)}", proof, notes=note))
    return out


def _plain(x: float, places: int) -> str:
    """``x`` to ``places`` decimals without trailing zeros: `87`, `1377.782721`."""
    return f"{x:.{places}f}".rstrip("0").rstrip(".")


def _needed_turn(step: Burn, el, rising: bool) -> float:
    """The node turn the drift must make: the burn's, or it less or plus a whole turn,
    with the sign the differential rate has (``rising``: the drift orbit's node runs
    ahead of the plan's)."""
    want = float(np.mod(step.raan - el.raan[0] + np.pi, TWO_PI) - np.pi)
    if abs(want) < 1e-9:
        return 0.0
    return want if (want > 0) == rising else want + math.copysign(TWO_PI, 1.0 if rising
                                                                     else -1.0)


def _nearest(rate, rate0: float, turn: float, far: float, near: float, limit: float):
    """The value of the drift orbit's parameter nearest ``near`` (the plan's own, the
    cheapest to reach) whose differential drift makes ``turn`` within ``FILL`` of the
    limit, searched towards ``far``; (value, wait) or None where even ``far`` is too
    slow."""
    def wait_at(x):
        d = rate(x) - rate0
        return turn / d if d * turn > 0 else math.inf

    if wait_at(far) > FILL * limit:
        return None
    for _ in range(80):
        mid = 0.5 * (far + near)
        if wait_at(mid) > FILL * limit:
            near = mid
        else:
            far = mid
    return far, wait_at(far)


def _altitude_route(c: Checker, i: int, step: Burn, row, limit: float, down: bool):
    """Hohmann down (or up) to a drift orbit, coast, Hohmann back."""
    body = c.body_at(i)
    mu = body.gm
    el = elements_from_state(row.after.r, row.v_before, mu)
    a0, inc = float(np.linalg.norm(row.after.r[0])), float(el.inclination[0])

    def rate(a):
        return -1.5 * body.j2 * (body.radius / a) ** 2 * math.sqrt(mu / a**3) * math.cos(inc)

    far = FLOOR * body.radius if down else (c.program.ceiling or 2.0 * a0)
    if abs(far - a0) < 1.0:
        return None
    # a lower orbit's node runs ahead where the node advances (retrograde), behind where
    # it regresses
    rising = (rate(far) - rate(a0)) > 0
    turn = _needed_turn(step, el, rising)
    found = _nearest(rate, rate(a0), turn, far, a0, limit) if turn else None
    if found is None:
        return None
    a1, wait = found
    alt1, alt0 = a1 - body.radius, a0 - body.radius
    name = step.name

    def text(w):
        return c.text_of(c.rewrite({i: [
            f"transfer {name}-drift-out: circular {_plain(alt1, 6)} km",
            f"coast {name}-drift for {_plain(w, 6)} s",
            f"transfer {name}-drift-back: circular {_plain(alt0, 6)} km"]}))

    tuned = _tuned(c, text, wait, lambda w: 0 < w <= limit)
    if tuned is None:
        return None
    wait, rewritten = tuned
    return Route(rewritten, wait, f"at {alt1:.1f} km altitude", "the two transfers")


def _tilt_route(c: Checker, i: int, step: Burn, row, limit: float, up: bool):
    """A tilt of the inclination at a node, coast, the tilt back at a node."""
    body = c.body_at(i)
    mu = body.gm
    el = elements_from_state(row.after.r, row.v_before, mu)
    a0, i0 = float(np.linalg.norm(row.after.r[0])), float(el.inclination[0])
    k = 1.5 * body.j2 * (body.radius / a0) ** 2 * math.sqrt(mu / a0**3)

    def rate(inc):
        return -k * math.cos(inc)

    # the node rate grows with the inclination: a tilt up drifts ahead
    far = math.pi - 1e-6 if up else 1e-6
    turn = _needed_turn(step, el, up)
    found = _nearest(rate, rate(i0), turn, far, i0, limit) if turn else None
    if found is None:
        return None
    i1, wait = found
    deg0 = math.degrees(i0)
    name = step.name

    def text(deg1):  # the wait is fixed (the tilt back waits for a node): tune the tilt
        return c.text_of(c.rewrite({i: [
            f"burn {name}-drift-tilt at node: inclination to {_plain(deg1, 12)} deg",
            f"coast {name}-drift for {_plain(wait, 6)} s",
            f"burn {name}-drift-back at node: inclination to {_plain(deg0, 12)} deg"]}))

    tilt = _tuned(c, text, math.degrees(i1), lambda deg: 0 < deg < 180)
    if tilt is None:
        return None
    deg1, rewritten = tilt
    return Route(rewritten, wait, f"at {deg1:.2f} deg inclination", "the two tilts")


def _tuned(c: Checker, text, x: float, allowed):
    """``x`` (the wait, or the drift orbit's inclination) tuned on the evaluator by
    secant steps on the node the rewritten plan ``text(x)`` ends with, against the
    plan's own at the same moment, until the two planes agree; (x, text) or None where
    it does not settle or leaves what is ``allowed``."""
    def gap(value):
        program = c.program_of(text(value))  # None: not a valid plan
        if program is None or c.budget.expired():
            return None
        final, ok, _ = c.price(program)  # the plan's own rows up to the rewrite reused
        if not ok:
            return None
        a, b = at_same_time(program, final, c.result.final)
        mu = final_body(program).gm  # the final state is around the last phase's body
        ea, eb = elements_from_state(a.r, a.v, mu), elements_from_state(b.r, b.v, mu)
        return float(np.mod(ea.raan[0] - eb.raan[0] + np.pi, TWO_PI) - np.pi)

    x0, g0 = x, gap(x)
    x1 = x * 0.999
    g1 = gap(x1)
    for _ in range(SECANT):
        if g0 is None or g1 is None or abs(g1) < 1e-11 or g1 == g0:
            break
        x0, x1, g0 = x1, x1 - g1 * (x1 - x0) / (g1 - g0), g1
        if not allowed(x1):
            return None
        g1 = gap(x1)
    if g1 is None or abs(g1) > NODE_TOL or not allowed(x1):
        return None
    return x1, text(x1)
