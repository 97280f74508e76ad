"""Rules about where a plane change is flown."""

from __future__ import annotations

import math

import numpy as np
from apsidal.lang import syntax as ast

from ..check import Checker, Finding, rule, saving_text, with_goals, with_where
from ..reorder import blocks
from ..steps import Burn, Transfer
from .bounds import slowest_speed

PLANE_GOALS = ("inclination", "raan")
PLACES = ("apoapsis", "node", "periapsis")
POINTS = 4  # the slowest points of a block a plane change is tried at (and carriers)


def _plane_burns(c: Checker):
    """(step index, syntax node) of goal burns that turn the plane."""
    for i, step in enumerate(c.program.steps):
        if isinstance(step, Burn) and step.vector is None and step.changes_plane:
            yield i, c.statements[i]


def _block_of(c: Checker, index: int) -> list[int]:
    for b in blocks(c.program):
        if index in b:
            return b
    return [index]


def _speed_before(c: Checker, index: int) -> float:
    row = c.rows_of(index)[0]
    return float(np.linalg.norm(row.v_before[0])) * 1000.0


@rule("plane-change-at-speed")
def plane_change_at_speed(c: Checker) -> list[Finding]:
    """A plane change flown where the craft is fast, when the plan passes a slower point.

    Turning the velocity through an angle costs 2 v sin(di/2): in proportion to the
    speed.  The same turn at apoapsis, or at a higher orbit the plan reaches anyway, is
    cheaper.  The rule tries the plane change between the steps of its block where the
    orbit has a slower point (at apoapsis, at the cheaper node and at periapsis), and
    folded into another goal burn of the block that flies slower, and reports the
    cheapest rewrite that reaches the same orbit.  It tries the 4 slowest such points
    and the 4 slowest such burns; when the block has more, the finding says the search
    was bounded.
    """
    out = []
    burns = []  # (index, name, speed before, candidates: (rewrite, carrier name))
    bounded = []  # names of the burns with more slower points than were tried
    for i, node in _plane_burns(c):
        if c.budget.expired():
            c.budget.cut("plane-change-at-speed")
            break
        speed = _speed_before(c, i)
        cands, slower, tried = _candidates(c, i, node, speed)
        burns.append((i, c.program.steps[i].name, speed, cands))
        if tried < slower:
            bounded.append(c.program.steps[i].name)
    every = list(dict.fromkeys(rw for *_, cands in burns for rw, _ in cands))
    proven = dict(zip(every, c.prove_all(every, "plane-change-at-speed")))
    for i, name, speed, cands in burns:
        proofs = sorted(((proven[rw], carrier) for rw, carrier in cands
                         if proven[rw] is not None), key=lambda p: -p[0].saves_kg)
        for proof, carrier in proofs:  # the cheapest that is really slower, not the same
            row = next(r for r in proof.result.rows if r.name == carrier)  # point merged
            new_speed = float(np.linalg.norm(row.v_before[0])) * 1000.0
            if new_speed < speed * (1 - 1e-3):
                break
        else:
            continue
        out.append(c.finding(
            "plane-change-at-speed", "warning", (name,),
            f"{name} turns the plane at {speed:.0f} m/s; flown where the craft moves at "
            f"{new_speed:.0f} m/s it saves {saving_text(proof)}", proof,
            notes=_bounded_note() if name in bounded else ()))
    if bounded:
        shown = ", ".join(bounded[:4]) + (", ..." if len(bounded) > 4 else "")
        out.append(c.finding(
            "plane-change-at-speed", "info", tuple(bounded),
            f"bounded search: {len(bounded)} plane change(s) ({shown}) were tried only at "
            f"the {POINTS} slowest points of their block and folded only into its {POINTS} "
            "slowest burns; a place not tried may be cheaper", None))
    return out


def _bounded_note() -> tuple[str]:
    return ((f"tried at the {POINTS} slowest points of its block and folded into the "
            f"{POINTS} slowest burns there; a slower place may save more"),)


def _candidates(c: Checker, i: int, node, speed: float) -> tuple[list, int, int]:
    """The rewrites that fly burn ``i``'s plane change elsewhere in its block, each with
    the name of the burn that carries it there; and how many points of the block were
    slower than the burn and how many of them were tried (the ``POINTS`` slowest).

    A point is a place between two steps of the block (or after its last): the turn goes
    in there as a burn of its own at apoapsis, at the cheaper node or at periapsis
    (`at node` prices both nodes and flies the cheaper, so the nodes named one by one
    cannot beat it), or is folded into another goal burn of the block that flies slower.
    """
    plane = c.pin_plane([g for g in node.goals if g.kind in PLANE_GOALS], i)
    rest = [g for g in node.goals if g.kind not in PLANE_GOALS]
    remaining = [with_goals(node, rest)] if rest else []
    name = c.program.steps[i].name
    mu = c.body_at(i).gm
    block = _block_of(c, i)
    points = []  # (least speed on the orbit there, distance from i, slot, after it)
    for slot, after in [(k, False) for k in block] + [(block[-1], True)]:
        state = c.state_after(slot) if after else c.state_before(slot)
        # the carrier flies on this orbit: no point of it is slower than its apoapsis
        least = slowest_speed(mu, state.r[0], state.v[0])
        if least is not None and least * 1000.0 >= speed * (1 - 1e-3):
            c.budget.pruned += 1
            continue
        points.append((math.inf if least is None else least, abs(slot + after - i), slot,
                       after))
    points.sort()
    candidates = []
    for _, _, slot, after in points[:POINTS]:
        for kind in PLACES:
            line = with_where(with_goals(node, plane), kind)
            edits = {i: remaining if slot != i else []}
            base = [c.statements[slot]] if slot != i else remaining
            edits[slot] = (base + [line]) if after else ([line] + base)
            candidates.append((c.rewrite(edits), name))
    carriers = []
    for slot in block:
        step = c.program.steps[slot]
        if slot != i and isinstance(step, Burn) and step.vector is None \
                and not step.changes_plane:
            there = _speed_before(c, slot)
            if there < speed * (1 - 1e-3):
                carriers.append((there, abs(slot - i), slot))
    for _, _, slot in sorted(carriers)[:POINTS]:
        other = c.statements[slot]
        merged = with_goals(other, list(other.goals) + plane)
        candidates.append((c.rewrite({i: remaining, slot: [merged]}),
                           c.program.steps[slot].name))
    return (list(dict.fromkeys(candidates)), len(points) + len(carriers),
            min(len(points), POINTS) + min(len(carriers), POINTS))


@rule("costlier-node")
def costlier_node(c: Checker) -> list[Finding]:
    """A burn or transfer at one node when the other node is cheaper.

    An orbit crosses the equator twice; on an eccentric orbit the craft is slower at one
    node than at the other, and a plane change there costs less.  `at node` lets the
    compiler pick the cheaper one; this rule flags an explicit choice of the dearer.
    """
    proposals = []
    other = {"ascending node": "descending node", "descending node": "ascending node"}
    for i, step in enumerate(c.program.steps):
        if not isinstance(step, (Burn, Transfer)) or step.place.kind not in other:
            continue
        if getattr(step, "form", "") == "phasing":
            continue  # its angle is measured from where it burns: another node is another phasing
        node = c.statements[i]
        moved = with_where(with_goals(node, c.pin_plane(node.goals, i)), other[step.place.kind])
        proposals.append((c.rewrite({i: [moved]}), lambda proof, step=step: c.finding(
            "costlier-node", "warning", (step.name,),
            f"{step.name} flies at the {step.place.kind}; the {other[step.place.kind]} "
            f"saves {saving_text(proof)}", proof)))
    return c.findings_of("costlier-node", proposals)


@rule("shared-plane-change")
def shared_plane_change(c: Checker) -> list[Finding]:
    """A transfer's plane change flown apart from it, or all in one of its burns.

    A plane change shared between the two burns of a Hohmann transfer costs less than
    the same change in either burn alone: a few degrees at the fast first burn, the rest
    at the slow second (`transfer NAME: circular R, inclination to I` finds the best
    split).  The rule folds a plane-change burn next to a transfer into it, and turns a
    raise-then-circularise pair of burns that carries a plane change into one transfer.
    """
    pairs = []  # (transfer, burn, the rewrites that fold the burn into it)
    steps = c.program.steps
    for i, step in enumerate(steps):
        if not (isinstance(step, Transfer) and step.form == "hohmann"):
            continue
        for j in (i - 1, i + 1):
            if not 0 <= j < len(steps):
                continue
            other = steps[j]
            if not (isinstance(other, Burn) and other.vector is None and other.changes_plane
                    and not other.changes_shape):
                continue
            tnode, pnode = c.statements[i], c.statements[j]
            goals = [g for g in tnode.goals if g.kind not in PLANE_GOALS]
            goals += c.pin_plane([g for g in pnode.goals if g.kind in PLANE_GOALS], (i, j))
            rewrites = []
            for where in ((tnode.where.kind if tnode.where else None),
                          (pnode.where.kind if pnode.where else None), "node"):
                merged = with_where(with_goals(tnode, goals), where,
                                    pnode.where.angle if pnode.where else None)
                rewrites.append(c.rewrite({i: [merged], j: []}))
            pairs.append((step, other, list(dict.fromkeys(rewrites))))
    every = list(dict.fromkeys(rw for *_, rws in pairs for rw in rws))
    proven = dict(zip(every, c.prove_all(every, "shared-plane-change")))
    out = []
    for step, other, rewrites in pairs:
        proof = max((proven[rw] for rw in rewrites if proven[rw] is not None),
                    key=lambda p: p.saves_kg, default=None)
        if proof is not None:
            out.append(c.finding(
                "shared-plane-change", "warning", (step.name, other.name),
                f"sharing {other.name}'s plane change between the burns of {step.name} "
                f"saves {saving_text(proof)}", proof))
    out += _burn_pairs(c)
    return out


def _burn_pairs(c: Checker) -> list[Finding]:
    """A raise (or lower) burn followed by a circularisation, one of them turning the plane."""
    proposals = []
    steps = c.program.steps
    for i in range(len(steps) - 1):
        a, b = steps[i], steps[i + 1]
        if not (isinstance(a, Burn) and isinstance(b, Burn)
                and a.vector is None and b.vector is None):
            continue
        target = a.apoapsis if a.apoapsis is not None else a.periapsis
        if target is None or not a.one_apsis:  # one apsis goal and nothing else on the shape
            continue
        far = "apoapsis" if a.apoapsis is not None else "periapsis"
        closes = b.circular or (b.periapsis if far == "apoapsis" else b.apoapsis) is not None
        if b.place.kind != far or not closes or not (a.changes_plane or b.changes_plane):
            continue
        na, nb = c.statements[i], c.statements[i + 1]
        plane = c.pin_plane([g for g in list(na.goals) + list(nb.goals)
                             if g.kind in PLANE_GOALS], (i, i + 1))
        shape_goal = next(g for g in na.goals if g.kind == far)
        circ = ast.Goal("circular", shape_goal.value, shape_goal.span)
        transfer = ast.Transfer(na.name, na.where, (circ, *plane), None, na.options, na.span)
        proposals.append((c.rewrite({i: [transfer], i + 1: []}), lambda proof, a=a, b=b: c.finding(
            "shared-plane-change", "warning", (a.name, b.name),
            f"{a.name} and {b.name} make a Hohmann transfer with the whole plane change "
            f"in one burn; one transfer sharing it between both burns saves "
            f"{saving_text(proof)}", proof,
            notes=(f"the transfer's burns are reported as {a.name}/1 and {a.name}/2",))))
    return c.findings_of("shared-plane-change", proposals)
