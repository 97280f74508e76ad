"""The reorder rule: a cheaper order for a block of movable steps."""

from __future__ import annotations

import math

from apsidal.lang.errors import PlanError

from ..check import Checker, Finding, rule, saving_text, with_goals
from ..evaluate import run
from ..load import load_text
from ..reorder import BEAM, blocks, search_block
from ..steps import Burn, Transfer


def _pinned(c: Checker, block: list[int]) -> Checker:
    """The plan with the block's plane changes from an equatorial orbit pinned to the
    plane they fly (``Checker.pin_plane``), so that an order turning the plane at
    another point of the equator is held to the same plane; ``c`` itself if none is.
    """
    edits = {}
    for i in block:
        step, node = c.program.steps[i], c.statements[i]
        if isinstance(step, (Burn, Transfer)) and step.changes_plane:
            goals = c.pin_plane(node.goals, i)
            if len(goals) != len(node.goals):
                edits[i] = [c.unparse(with_goals(node, goals))]
    if not edits:
        return c
    try:
        program = load_text(c.rewrite(edits), c.program.source.path)
    except PlanError:
        return c
    result = run(program)
    return Checker(program, result) if result.ok else c


@rule("cheaper-order")
def cheaper_order(c: Checker) -> list[Finding]:
    """The same steps flown in another order reach the same orbit for less.

    Between barriers (`drop`, `expect`, explicit-vector burns, timed coasts) the goal
    burns, transfers and coasts to a place may be flown in any order.  Every order is
    priced by the evaluator, sharing the state of common prefixes; it counts only if it
    reaches the same final orbit and meets every expectation.  Up to a work limit the
    search is exhaustive; beyond it a bounded (beam) search keeps the cheapest prefixes
    at each step and the finding says so.  Typical catch: a plane change flown in a low
    orbit before the apoapsis is raised, where the craft is fastest.
    """
    out = []
    for block in blocks(c.program):
        pinned = _pinned(c, block)
        res = search_block(pinned.program, block)
        if res is None or res.best.order == tuple(block):
            continue
        proof = c.prove(pinned.reorder(block, res.best.order))
        if proof is None:
            continue
        names = [c.program.steps[i].name for i in block]
        new = [c.program.steps[i].name for i in res.best.order]
        total = math.factorial(len(block))
        scope = (f"exhaustive: all {total} orderings of {len(block)} steps priced; "
                 f"{total - res.orderings} cannot be flown, {res.valid} reach the same orbit"
                 if res.exhaustive else
                 f"bounded search: the {BEAM} cheapest partial orders were kept at each "
                 f"step ({res.priced} step evaluations); a cheaper order may exist")
        out.append(c.finding(
            "cheaper-order", "warning", names,
            f"flying {', '.join(names)} as {', '.join(new)} saves {saving_text(proof)}",
            proof, notes=(scope,)))
    return out
