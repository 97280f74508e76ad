"""The reorder rule: a cheaper order for a block of movable steps."""

from __future__ import annotations

import math

from ..check import Checker, Finding, rule, saving_text, with_goals
from ..evaluate import Result
from ..reorder import blocks, search_block
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
                edits[i] = [with_goals(node, goals)]
    if not edits:
        return c
    rewrite = c.rewrite(edits)
    program = c.program_of(rewrite)
    if program is None:
        return c
    final, ok, rows = c.price(program, rewrite)
    if not ok:
        return c
    return Checker(program, Result(program=program, rows=rows, final=final), c.budget)


@rule("cheaper-order")
def cheaper_order(c: Checker) -> list[Finding]:
    """The same steps flown in another order reach the same orbit for less.

    Between barriers (`drop`, `expect`, explicit-vector burns, timed coasts) the goal
    burns, transfers and coasts to a place may be flown in any order.  Every order is
    priced by the evaluator, sharing the state of common prefixes; it counts only if it
    ends the block in the plan's own orbit and meets every expectation.  The search is
    a branch and bound: a partial order that has already used as much propellant as
    the plan's order uses for the whole block is dropped, and of partial orders in the
    same state the lighter is dropped.  Up to 12 steps and a work limit the result is a
    proven optimum; past the work limit, past 12 steps (searched in half-overlapping
    windows of 8) or past the time limit the finding says the search was bounded or cut
    short, and a bounded search that finds nothing says so too.  Typical catch: a plane
    change flown in a low
    orbit before the apoapsis is raised, where the craft is fastest.  In a plan with
    `burns finite` the search ranks orders in the impulsive model (a finite burn is too
    dear to price thousands of times) and the order it finds is proven with finite
    burns, like every finding.
    """
    out, proposals = [], []
    search = _impulsive(c)
    for block in blocks(c.program):
        if c.budget.expired():
            c.budget.cut("cheaper-order")
            break
        pinned = _pinned(search, block)
        res = search_block(pinned.program, block, start=pinned.state_before(block[0]),
                           end=pinned.state_after(block[-1]), budget=c.budget)
        if res is None:
            continue
        if res.status == "cut short":
            c.budget.cut("cheaper-order")
        names = [c.program.steps[i].name for i in block]
        scope = _scope(res)
        if res.best.order == tuple(block):
            if res.status != "proven":  # say that a better order was not ruled out
                out.append(c.finding(
                    "cheaper-order", "info", names,
                    f"no cheaper order of {', '.join(names[:4])}"
                    f"{', ...' if len(names) > 4 else ''} ({len(block)} steps) found", None,
                    notes=(scope,)))
            continue
        new = [c.program.steps[i].name for i in res.best.order]
        proposals.append((pinned.reorder(block, res.best.order),
                          lambda proof, names=names, new=new, scope=scope: c.finding(
                              "cheaper-order", "warning", names,
                              f"flying {', '.join(names)} as {', '.join(new)} saves "
                              f"{saving_text(proof)}", proof, notes=(scope,))))
    return out + c.findings_of("cheaper-order", proposals)


def _impulsive(c: Checker) -> Checker:
    """The checker the search runs on: with `burns finite` the plan priced impulsive.

    A finite burn costs several integrations of its thrust arc, too slow for the tens of
    thousands of partial orders a search prices, so the search ranks orders in the
    impulsive model and the order it finds is proven like every finding: the rewritten
    plan (still `burns finite`) priced by the evaluator, finite burns and all.
    """
    if c.program.burns != "finite":
        return c
    from dataclasses import replace

    from ..evaluate import run

    program = replace(c.program, burns="impulsive")
    result = run(program)
    return Checker(program, result, c.budget) if result.ok else c


def _scope(res) -> str:
    """How far the search went, in words."""
    k = len(res.block)
    counts = (f"{res.considered} partial orders considered, {res.pruned} pruned by the "
              f"bound or a cheaper equal state, {res.priced} step evaluations")
    if res.windows:
        return (f"bounded search: {k} steps searched in windows of {res.windows} "
                f"consecutive steps ({counts}); an order moving a step further may be "
                f"cheaper" + ("; cut short by the time limit" if res.status == "cut short"
                              else ""))
    if res.status == "cut short":
        return (f"cut short by the time limit after {counts}; a cheaper order may exist")
    if res.status == "bounded":
        return (f"bounded search: the work limit kept only the cheapest partial orders "
                f"({counts}); a cheaper order may exist")
    return (f"branch and bound over all {math.factorial(k)} orders of {k} steps: proven "
            f"cheapest ({counts}; {res.valid} complete orders end the block in the "
            f"plan's orbit)")
