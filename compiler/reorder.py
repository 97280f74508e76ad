"""The reorder search: the cheapest ordering of each block of movable steps.

A plan splits into blocks at its barriers: ``drop``, ``expect``, explicit-vector burns,
timed coasts (``for``, ``rev``) and steps marked ``fixed`` stay where they are, unless
the plan marks them ``movable``.  Inside a block the goal burns,
transfers and coasts to a place may be flown in any order, and each ordering is priced by
the evaluator.  The orderings form a prefix tree: all orderings that start with the same
steps share those steps' state, so each level of the tree is one batched ``apply`` per
step.  Orderings that fail (an unreachable goal, propellant exhausted) are pruned where
they fail.  Up to ``EXHAUSTIVE_NODES`` tree nodes the search is exhaustive; beyond that
it keeps the cheapest ``beam`` prefixes at each level and says so.

An ordering counts only if, run to the end of the plan, it reaches the same final orbit
as the plan (size, shape and plane; also orientation when an expectation names raan or
argp) and meets every expectation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .evaluate import Batch, Context, apply, context_for, start_batch
from .state import dot, elements_from_state, frame, norm
from .steps import Allow, Burn, Coast, Drop, Expect, Program

EXHAUSTIVE_NODES = 200_000  # tree nodes priced before the search turns to a beam
BEAM = 4096


def is_barrier(step) -> bool:
    if getattr(step, "fixed", False):  # pinned by the plan with the `fixed` option
        return True
    if getattr(step, "movable", False):  # freed by the plan with `movable`
        return False
    if isinstance(step, (Drop, Expect, Allow)):
        return True
    if isinstance(step, Burn) and step.vector is not None:
        return True
    return bool(isinstance(step, Coast) and step.mode in ("for", "rev"))


def blocks(program: Program) -> list[list[int]]:
    """Runs of consecutive movable step indices with at least two steps."""
    out, run = [], []
    for i, step in enumerate(program.steps):
        if is_barrier(step):
            if len(run) > 1:
                out.append(run)
            run = []
        else:
            run.append(i)
    if len(run) > 1:
        out.append(run)
    return out


def tree_nodes(k: int) -> int:
    """Nodes of the full prefix tree of k steps: sum over levels of k!/(k-l)!."""
    return sum(math.perm(k, level) for level in range(1, k + 1))


def advance(program: Program, batch: Batch, ctx: Context, indices, ok=None):
    """Run the same steps on every element; returns (batch, ok)."""
    ok = np.ones(batch.size, dtype=bool) if ok is None else ok
    for i in indices:
        batch, _, fails = apply(program.steps[i], i, batch, ctx)
        ok &= fails.ok
    return batch, ok


def orientation_matters(program: Program) -> bool:
    return any(c.kind in ("raan", "argp") for s in program.steps if isinstance(s, Expect)
               for c in s.checks)


def same_orbit(a: Batch, ref: Batch, mu: float, orientation: bool) -> np.ndarray:
    """Where the orbits of ``a`` match the single reference orbit ``ref``."""
    ea = elements_from_state(a.r, a.v, mu)
    er = elements_from_state(ref.r, ref.v, mu)
    fa, fr = frame(a.r, a.v, mu), frame(ref.r, ref.v, mu)
    size = np.abs(ea.sma - er.sma) <= 1e-6 * np.abs(er.sma) + 1e-6
    shape = np.abs(ea.ecc - er.ecc) <= 1e-6
    plane = dot(fa.h, fr.h) >= np.cos(1e-6)
    match = size & shape & plane
    if orientation:
        both_round = (ea.ecc < 1e-6) & (er.ecc < 1e-6)
        apse = (norm(fa.e_vec - fr.e_vec) <= 1e-6) | both_round
        match &= apse
    return match


@dataclass
class Ordering:
    order: tuple[int, ...]  # step indices in the new order
    dv: float  # km/s with margin, whole plan
    propellant: float  # kg, whole plan


@dataclass
class BlockResult:
    block: list[int]
    original: Ordering
    best: Ordering
    priced: int  # tree nodes priced
    orderings: int  # complete orderings reached
    valid: int  # of them, those reaching the same orbit and meeting every expectation
    exhaustive: bool


def search_block(program: Program, block: list[int], limit: int = EXHAUSTIVE_NODES,
                 beam: int = BEAM) -> BlockResult | None:
    """Best ordering of one block, the rest of the plan as written."""
    ctx = context_for(program)
    head, tail = list(range(block[0])), list(range(block[-1] + 1, len(program.steps)))
    start, ok = advance(program, start_batch(program), ctx, head)
    if not ok[0]:
        return None
    k = len(block)
    exhaustive = tree_nodes(k) <= limit
    perms = np.zeros((1, 0), dtype=np.int64)
    used = np.zeros((1, k), dtype=bool)
    batch = start
    priced = 0
    for level in range(k):
        parent_idx, choice = np.nonzero(~used)
        if parent_idx.size == 0:
            return None
        child = batch.take(parent_idx)
        keep = np.zeros(parent_idx.size, dtype=bool)
        parts: list[Batch | None] = [None] * k
        for j in range(k):
            sel = np.nonzero(choice == j)[0]
            if sel.size == 0:
                continue
            sub, _, fails = apply(program.steps[block[j]], block[j], child.take(sel), ctx)
            priced += sel.size
            parts[j] = (sel, sub, fails.ok)
        child = _scatter(child, parts)
        for part in parts:
            if part is not None:
                keep[part[0]] = part[2]
        perms = np.concatenate([perms[parent_idx], choice[:, None]], axis=1)[keep]
        used = used[parent_idx]
        used[np.arange(used.shape[0]), choice] = True
        used = used[keep]
        batch = child.take(np.nonzero(keep)[0])
        if not exhaustive and batch.size > beam:
            cheapest = np.argsort(batch.propellant * -1.0, kind="stable")[:beam]
            perms, used, batch = perms[cheapest], used[cheapest], batch.take(cheapest)
    if batch.size == 0:
        return None
    final, ok = advance(program, batch, ctx, tail)
    reference, ref_ok = advance(program, start, ctx, block + tail)
    if not ref_ok[0]:
        return None
    valid = ok & final.expect_ok & same_orbit(final, reference, ctx.mu,
                                              orientation_matters(program))
    identity = np.all(perms == np.arange(k), axis=1)
    original = Ordering(tuple(block), float(reference.dv_margin[0]),
                        float(program.craft.propellant - reference.propellant[0]))
    if not valid.any():
        return BlockResult(block, original, original, priced, int(batch.size), 0, exhaustive)
    used_prop = program.craft.propellant - final.propellant
    cost = np.where(valid, used_prop, np.inf)
    # prefer the original order on ties, then fewer moved steps
    moved = np.sum(perms != np.arange(k), axis=1)
    order = np.lexsort((moved, ~identity, np.round(cost, 9)))
    best_i = order[0]
    best = Ordering(tuple(block[j] for j in perms[best_i]), float(final.dv_margin[best_i]),
                    float(used_prop[best_i]))
    return BlockResult(block, original, best, priced, int(batch.size), int(valid.sum()),
                       exhaustive)


def _scatter(template: Batch, parts) -> Batch:
    """Reassemble per-step results into one batch in the children's order."""
    fields = {}
    for name in ("r", "v", "mass", "propellant", "t", "dv", "dv_margin", "expect_ok"):
        arr = np.array(getattr(template, name), copy=True)
        for part in parts:
            if part is not None:
                arr[part[0]] = getattr(part[1], name)
        fields[name] = arr
    return Batch(**fields)


def price_orderings_one_by_one(program: Program, block: list[int], orders) -> np.ndarray:
    """Baseline for the benchmark: each full ordering run alone, batch of one, in a loop."""
    ctx = context_for(program)
    head = list(range(block[0]))
    out = np.empty(len(orders))
    for n, order in enumerate(orders):
        batch, ok = advance(program, start_batch(program), ctx, head + list(order))
        out[n] = batch.propellant[0] if ok[0] else np.nan
    return out
