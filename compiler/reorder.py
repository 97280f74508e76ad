"""The reorder search: the cheapest ordering of each block of movable steps.

A plan splits into blocks at its barriers: ``drop``, ``expect``, explicit-vector burns,
timed coasts (``for``, ``rev``), phasing transfers (their timing is their purpose),
``entry`` and the way down to it (from the last burn before it), and steps marked
``fixed`` stay where they are, unless the plan marks them ``movable``.  Inside a block the goal burns,
transfers and coasts to a place may be flown in any order, and each ordering is priced by
the evaluator.  The orderings form a prefix tree: all orderings that start with the same
steps share those steps' state, so each level of the tree is one batched ``apply`` per
step.  Orderings that fail (an unreachable goal, propellant exhausted) are pruned where
they fail, prefixes that cannot beat the plan's own order are pruned (branch and bound,
``_bnb``), and partial orders are stored as parent index and choice per level.  Past
``WORK_LIMIT`` steps priced, or past ``WINDOW`` steps in a block, the search is bounded
and says so.

An ordering counts only if it ends the block in the orbit the plan's own order ends it
in (size, shape, plane and apse line), so that the rest of the plan flies the same; the
rule then proves the best by pricing the whole rewritten plan.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .evaluate import Batch, Context, apply, context_for, start_batch
from .legs import in_phase, is_leg
from .state import dot, elements_from_state, frame, norm
from .steps import Allow, Burn, Coast, Drop, Entry, Expect, Program, Transfer

WORK_LIMIT = 500_000  # steps priced (one step on one partial order) per block
WINDOW = 12  # blocks up to this many steps are searched whole
LONG_WINDOW = 8  # a longer block is searched in windows of this many, half overlapping
CUT_WIDTH = 16  # partial orders kept per level once the time budget has run out
EXHAUSTIVE_NODES = WORK_LIMIT  # kept for the older benchmark


def is_barrier(step) -> bool:
    if is_leg(step):  # a reordering never crosses from one body to another
        return True
    if getattr(step, "fixed", False):  # pinned by the plan with the `fixed` option
        return True
    if getattr(step, "movable", False):  # freed by the plan with `movable`
        return False
    if isinstance(step, (Drop, Expect, Allow, Entry)):
        return True
    if isinstance(step, Burn) and step.vector is not None:
        return True
    if isinstance(step, Transfer) and step.form == "phasing":
        return True
    return bool(isinstance(step, Coast) and step.mode in ("for", "rev"))


def blocks(program: Program) -> list[list[int]]:
    """Runs of consecutive movable step indices with at least two steps."""
    out, run = [], []
    down = program.descent_from
    for i, step in enumerate(program.steps):
        if is_barrier(step) or (down is not None and i >= down):
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
    """An expectation names raan or argp, or a burn turns the apse line (`argp to`)."""
    return any(c.kind in ("raan", "argp") for s in program.steps if isinstance(s, Expect)
               for c in s.checks) or any(isinstance(s, Burn) and s.argp is not None
                                          for s in program.steps)


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
    dv: float  # km/s with margin, whole plan up to the end of the block
    propellant: float  # kg, whole plan up to the end of the block


@dataclass
class BlockResult:
    block: list[int]
    original: Ordering
    best: Ordering
    priced: int  # tree nodes priced (one step applied to one partial order)
    orderings: int  # complete orderings reached
    valid: int  # of them, those ending the block in the same orbit as the plan
    exhaustive: bool  # True: the best is a proven optimum (nothing cut by a work limit)
    considered: int = 0  # partial orders generated
    pruned: int = 0  # of them, dropped by the bound or by a cheaper equal state
    status: str = "proven"  # proven | bounded | cut short
    windows: int = 0  # > 0: a long block searched in windows of this many steps


def search_block(program: Program, block: list[int], limit: int | None = None,
                 start: Batch | None = None, end: Batch | None = None,
                 budget=None) -> BlockResult | None:
    """Cheapest order of one block by branch and bound, the rest of the plan as written.

    ``start`` is the state before the block and ``end`` the state after it as the plan
    flies it (both computed when not given).  A block longer than ``WINDOW`` steps is
    searched in windows of ``LONG_WINDOW`` steps, each overlapping the last by half (each
    window's best kept for the next), and the result says so: a step then moves at most
    a window's length.
    """
    ctx = context_for(program)
    limit = WORK_LIMIT if limit is None else limit
    if start is None:
        start, ok = advance(program, start_batch(program), ctx, range(block[0]))
        if not ok[0]:
            return None
    if end is None:
        end, ok = advance(program, start, ctx, block)
        if not ok[0]:
            return None
    if len(block) <= WINDOW:
        return _bnb(program, ctx, block, start, end, limit, budget)
    order = list(block)
    total = None
    state = start
    width = LONG_WINDOW
    for w0 in range(0, len(block), width // 2):
        if budget is not None and budget.expired() and total is not None:
            total = replace(total, status="cut short")
            break
        part = order[w0:w0 + width]
        if len(part) < 2:
            break
        sub = program.with_steps([program.steps[i] for i in order]) if order != block \
            else program
        slots = block[w0:w0 + len(part)]
        part_end, ok = advance(sub, state, ctx, slots)
        if not ok[0]:
            return None
        res = _bnb(sub, ctx, slots, state, part_end, max(limit // 8, 1000), budget)
        if res is None:
            return None
        chosen = [order[w0 + (j - slots[0])] for j in res.best.order]
        order[w0:w0 + len(part)] = chosen
        total = res if total is None else _add(total, res)
        # the state before the next window: this window's first half flown in its best order
        sub = program.with_steps([program.steps[i] for i in order])
        step_n = min(width // 2, len(part))
        state, ok = advance(sub, state, ctx, block[w0:w0 + step_n])
        if not ok[0]:
            return None
        if w0 + width >= len(block):
            break
    final = program.with_steps([program.steps[i] for i in order])
    fin, ok = advance(final, start, ctx, block)
    original = _ordering(program, tuple(block), end)
    if not ok[0] or not bool(same_orbit(fin, end, in_phase(ctx, block[0]).mu, True)[0]) or \
            not fin.propellant[0] > end.propellant[0] + 1e-9:
        best = original
    else:
        best = _ordering(program, tuple(order), fin)
    return BlockResult(block, original, best, total.priced, total.orderings, total.valid,
                       False, total.considered, total.pruned,
                       "cut short" if total.status == "cut short" else "bounded", width)


def _add(a: BlockResult, b: BlockResult) -> BlockResult:
    status = "cut short" if "cut short" in (a.status, b.status) else a.status
    return replace(a, priced=a.priced + b.priced, orderings=a.orderings + b.orderings,
                   valid=a.valid + b.valid, considered=a.considered + b.considered,
                   pruned=a.pruned + b.pruned, status=status)


def _ordering(program: Program, order, state: Batch, i: int = 0) -> Ordering:
    return Ordering(tuple(order), float(state.dv_margin[i]),
                    float(program.craft.propellant - state.propellant[i]))


def _bits(used: np.ndarray, k: int) -> np.ndarray:
    return ((used[:, None] >> np.arange(k, dtype=np.int64)) & 1).astype(bool)


def _bnb(program: Program, ctx: Context, block: list[int], start: Batch, end: Batch,
         limit: int, budget) -> BlockResult:
    """Branch and bound over the orders of one block (at most ``WINDOW`` steps).

    Level by level every partial order is extended by each step it has not flown, one
    batched ``apply`` per step.  A partial order is pruned when it has already used at
    least as much propellant as the plan's own order uses for the whole block (the
    steps left cost no less than nothing), or when another partial order of the same
    steps stands in the same state with more propellant left (whatever follows costs
    the same delta-v, so the heavier craft ends heavier).  Partial orders are stored as
    a parent index and the step chosen, per level; the frontier carries a bitmask of
    the steps flown.  When the work left (``limit`` steps priced) cannot extend the
    whole frontier, the cheapest partial orders that fit are kept and the result says
    the search was bounded; when the time budget runs out, the search narrows to the
    cheapest few and says it was cut short.
    """
    k = len(block)
    original = _ordering(program, tuple(block), end)
    incumbent = float(end.propellant[0])  # propellant left after the block, plan's order
    batch, used = start, np.zeros(1, dtype=np.int64)
    parents: list[np.ndarray] = []
    choices: list[np.ndarray] = []
    priced = considered = pruned = 0
    status = "proven"
    for level in range(k):
        left = k - level
        if budget is not None and budget.expired() and batch.size > CUT_WIDTH:
            keep = np.argsort(-batch.propellant, kind="stable")[:CUT_WIDTH]
            batch, used, status = batch.take(keep), used[keep], "cut short"
            parents[-1] = parents[-1][keep]
            choices[-1] = choices[-1][keep]
        allowance = (limit - priced) // max(sum(range(1, left + 1)), 1)
        if batch.size > max(allowance, 1):
            keep = np.argsort(-batch.propellant, kind="stable")[:max(allowance, 1)]
            batch, used = batch.take(keep), used[keep]
            parents[-1] = parents[-1][keep]
            choices[-1] = choices[-1][keep]
            status = "bounded" if status == "proven" else status
        parent_idx, choice = np.nonzero(~_bits(used, k))
        considered += parent_idx.size
        child = batch.take(parent_idx)
        parts: list = [None] * k
        for j in range(k):
            sel = np.nonzero(choice == j)[0]
            if sel.size == 0:
                continue
            sub, _, fails = apply(program.steps[block[j]], block[j], child.take(sel), ctx)
            priced += sel.size
            parts[j] = (sel, sub, fails.ok)
        child = _scatter(child, parts)
        keep = np.zeros(parent_idx.size, dtype=bool)
        for part in parts:
            if part is not None:
                keep[part[0]] = part[2]
        new_used = used[parent_idx] | (np.int64(1) << choice.astype(np.int64))
        # the bound: more propellant already used than the plan's order uses in all
        over = child.propellant < incumbent - 1e-9 * max(abs(incumbent), 1.0)
        dropped = keep & over
        keep &= ~over
        pruned += int(dropped.sum())
        idx = np.nonzero(keep)[0]
        idx, dup = _dominant(child, new_used, idx)
        pruned += dup
        parents.append(parent_idx[idx].astype(np.int32))
        choices.append(choice[idx].astype(np.int16))
        batch, used = child.take(idx), new_used[idx]
        if batch.size == 0:
            break
    complete = batch.size if len(parents) == k else 0
    valid = np.zeros(0, dtype=bool)
    best = original
    if complete:
        valid = same_orbit(batch, end, in_phase(ctx, block[0]).mu, True) & batch.expect_ok
        if valid.any():
            cand = np.nonzero(valid)[0]
            orders = _orders(parents, choices, cand)
            moved = np.sum(orders != np.arange(k), axis=1)
            rank = np.lexsort((moved, -np.round(batch.propellant[cand], 9)))
            top = cand[rank[0]]
            if batch.propellant[top] > incumbent + 1e-9:
                best = _ordering(program, tuple(block[j] for j in orders[rank[0]]), batch, top)
    return BlockResult(block, original, best, priced, int(complete), int(valid.sum()),
                       status == "proven", considered, pruned, status)


def _dominant(batch: Batch, used: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, int]:
    """Of partial orders with the same steps flown and the same state, the one with the
    most propellant left; returns (indices kept, how many dropped)."""
    if idx.size < 2:
        return idx, 0
    scale = np.maximum(np.abs(batch.r[idx]).max(), 1.0)
    key = np.concatenate([used[idx, None].astype(np.float64),
                          np.round(batch.r[idx] / scale, 12),
                          np.round(batch.v[idx], 12)], axis=1)
    order = np.lexsort((-batch.propellant[idx],) + tuple(key.T[::-1]))
    sk = key[order]
    first = np.ones(idx.size, dtype=bool)
    first[1:] = np.any(sk[1:] != sk[:-1], axis=1)
    kept = np.sort(idx[order[first]])
    return kept, int(idx.size - kept.size)


def _orders(parents, choices, leaves: np.ndarray) -> np.ndarray:
    """The full orders (as block positions) of the given leaves, walking parents back."""
    k = len(parents)
    out = np.empty((leaves.size, k), dtype=np.int64)
    at = leaves
    for level in range(k - 1, -1, -1):
        out[:, level] = choices[level][at]
        at = parents[level][at]
    return out


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
