"""The reorder rule: a cheaper order for a block of movable steps."""

from __future__ import annotations

import math

from ..check import Checker, Finding, rule, saving_text
from ..reorder import BEAM, blocks, search_block


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
        res = search_block(c.program, block)
        if res is None or res.best.order == tuple(block):
            continue
        proof = c.prove(c.reorder(block, res.best.order))
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
