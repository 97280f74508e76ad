"""A node change bought with a burn that the differential J2 drift could make instead."""

from __future__ import annotations

import math

import numpy as np

from ..check import Checker, Finding, at_same_time, rule, saving_text
from ..evaluate import run
from ..j2 import Drift
from ..state import CIRCULAR_ECC, TWO_PI, elements_from_state
from ..steps import Burn
from ..textfmt import duration

DEFAULT_WAIT = 365.25 * 86400.0  # s: the longest drift offered when the plan sets none
FLOOR = 1.03  # the lowest drift orbit, in body radii (no drag is modelled)
FILL = 0.98  # the share of the allowed wait the drift orbit is sized for
SECANT = 6  # evaluator passes that tune the wait until the node comes out exact


def _node_burns(c: Checker):
    """(index, step) of goal burns that change only the node (`raan to`, alone or with
    the inclination the orbit already has) from a circular closed orbit."""
    mu = c.program.body.gm
    for i, step in enumerate(c.program.steps):
        if not (isinstance(step, Burn) and step.vector is None and step.raan is not None):
            continue
        if step.changes_shape or step.sun_synchronous or step.fixed:
            continue
        row = c.rows_of(i)[0]
        el = elements_from_state(row.after.r, row.v_before, mu)
        if not (el.closed[0] and el.ecc[0] < 1e-7):
            continue
        if step.inclination is not None and abs(step.inclination - el.inclination[0]) > 1e-9:
            continue
        yield i, step


def _raan_gap(program, final, ref) -> float:
    """The node of ``final`` less that of ``ref``, at the same moment, in (-pi, pi]."""
    a, b = at_same_time(program, final, ref)
    mu = program.body.gm
    ea, eb = elements_from_state(a.r, a.v, mu), elements_from_state(b.r, b.v, mu)
    return float(np.mod(ea.raan[0] - eb.raan[0] + np.pi, TWO_PI) - np.pi)


@rule("drift-node-change")
def drift_node_change(c: Checker) -> list[Finding]:
    """A node change flown by a burn, where waiting in a lower or higher orbit would let
    J2 turn the node for free (plans under `gravity j2`).

    J2 turns the node of an orbit at a rate that falls with its size (as a^-3.5) and
    with cos i, so two orbits of different altitude drift apart in node.  Constellations
    place their planes this way: one launch, then each craft waits in a drift orbit
    until the differential drift has opened its node, and climbs to the common
    altitude.  For a burn that changes only the node of a circular orbit, the rule
    prices the route down (or up) by a Hohmann transfer, a coast while the drift
    accumulates, and a Hohmann transfer back, sized so that the wait fills the plan's
    `drift at most` (a year when it sets none); the proof compares the two plans'
    final orbits at the same moment, since every node keeps drifting.  The finding
    gives the cost, the saving and the time the drift takes.
    """
    if c.program.gravity != "j2" or not c.program.body.j2:
        return []
    body = c.program.body
    drift = Drift(body.gm, body.radius, body.j2)
    limit = c.program.drift_limit or DEFAULT_WAIT
    out = []
    for i, step in _node_burns(c):
        if c.budget.expired():
            c.budget.cut("drift-node-change")
            break
        best = None
        for down in (True, False):
            proposal = _route(c, i, step, drift, limit, down)
            if proposal is None:
                continue
            text, wait, alt = proposal
            proof = c.prove(text)
            if proof is not None and (best is None or proof.saves_kg > best[0].saves_kg):
                best = (proof, wait, alt)
        if best is None:
            continue
        proof, wait, alt = best
        extra = float(proof.final.t[0] - c.result.final.t[0])
        given = c.program.drift_limit is not None
        note = () if given else (
            f"the plan sets no `drift at most`; this route waits {duration(wait)} (a year "
            "is the default); a longer wait costs less, a shorter one more",)
        cost = float(sum(r.dv_margin[0] for r in proof.result.rows if r.kind == "burn"
                         and r.name.startswith(f"{step.name}-drift"))) * 1000.0
        out.append(c.finding(
            "drift-node-change", "warning", (step.name,),
            f"{step.name} turns the node with a burn; drifting at {alt:.1f} km altitude "
            f"for {duration(wait)} lets J2 turn it instead ({cost:.1f} m/s for the two "
            f"transfers, the plan {duration(extra)} longer) and saves "
            f"{saving_text(proof)}", proof, notes=note))
    return out


def _route(c: Checker, i: int, step: Burn, drift: Drift, limit: float, down: bool):
    """The rewrite of burn ``i`` as transfer, drift, transfer back, its wait tuned on the
    evaluator until the plan's final node comes out as the plan's own; (text, wait s,
    drift altitude km) or None where no drift orbit in range does it in time."""
    body = c.program.body
    row = c.rows_of(i)[0]
    r0, v0 = row.after.r, row.v_before  # the orbit at the burn, before it
    mu = body.gm
    el = elements_from_state(r0, v0, mu)
    a0, inc = float(np.linalg.norm(r0[0])), float(el.inclination[0])
    # the node the burn buys, on the side the drift orbit can turn it to
    rate0 = float(drift.rates(r0, v0).raan[0])
    want = float(np.mod(step.raan - el.raan[0] + np.pi, TWO_PI) - np.pi)

    def rate(a):
        return -1.5 * body.j2 * (body.radius / a) ** 2 * math.sqrt(mu / a**3) * math.cos(inc)

    low, high = FLOOR * body.radius, a0
    if not down:
        ceiling = c.program.ceiling or 2.0 * a0
        low, high = a0, ceiling
    if high - low < 1.0:
        return None
    # the turn the drift must make: `want`, or it less or plus a whole turn, with the
    # sign the differential rate has on this side
    sample = rate(0.5 * (low + high)) - rate0
    turn = want if want * sample > 0 else want + math.copysign(TWO_PI, sample)
    if abs(turn) < 1e-9:
        return None

    def wait_at(a):  # the drift alone, transfers aside
        d = rate(a) - rate0
        return turn / d if d * turn > 0 else math.inf

    # the drift orbit nearest the start whose wait still fits (the cheapest transfers)
    far, near = (low, high) if down else (high, low)
    if wait_at(far) > FILL * limit:
        return None
    for _ in range(80):
        mid = 0.5 * (far + near)
        if wait_at(mid) > FILL * limit:
            near = mid
        else:
            far = mid
    a1 = far
    alt1, alt0 = a1 - body.radius, a0 - body.radius
    name = step.name
    wait = wait_at(a1)

    def text(w):
        lines = [f"transfer {name}-drift-out: circular {alt1:.6f} km",
                 f"coast {name}-drift for {w:.6f} s",
                 f"transfer {name}-drift-back: circular {alt0:.6f} km"]
        return c.text_of(c.rewrite({i: lines}))

    # tune the wait on the evaluator: the node gap falls linearly with it (secant steps)
    from ..load import load_text

    def gap(w):
        try:
            program = load_text(text(w), c.program.source.path)
        except Exception:  # noqa: BLE001 - a rewrite that does not read proves nothing
            return None
        result = run(program)
        if not result.ok:
            return None
        return _raan_gap(program, result.final, c.result.final)

    w0, g0 = wait, gap(wait)
    if g0 is None:
        return None
    w1 = w0 * 0.999
    g1 = gap(w1)
    for _ in range(SECANT):
        if g1 is None or g1 == g0:
            break
        w0, w1, g0 = w1, w1 - g1 * (w1 - w0) / (g1 - g0), g1
        if w1 <= 0:
            return None
        g1 = gap(w1)
        if g1 is not None and abs(g1) < 1e-10:
            break
    if g1 is None or abs(g1) > 1e-7 or w1 > limit:
        return None
    return text(w1), w1, alt1
