"""The proof walk: many rewritten plans priced together, sharing what they share.

A rule's candidates are rewrites of the plan's step statements (``check.Rewrite``).
Candidates whose edits agree so far fly the same states; past its last edit a candidate
flies the plan's own steps.  So the candidates form a tree of edits (a trie), and the
walk goes once through the plan's steps, in order, with every state that differs from
the plan's stacked into one batch: a state that reaches an edit spawns the states of
the candidates that edit there (flown alone through the edited statements), and each
of the plan's own steps is applied to the whole batch at once (``evaluate.apply``, the
one chain code).  A state back in the plan's own orbit before a step, with no edit
ahead, is carried from there (``evaluate.carry``) as ``Checker.price`` does.

The rows of a candidate are put together only when asked for: a rule needs them only
for the few candidates that prove a saving.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .evaluate import Batch, Context, apply, carry


@dataclass(eq=False)
class Node:
    """The state shared by the candidates whose edits so far are these."""

    parent: Node | None = None
    at: int = -1  # old step index of this node's edit
    steps: tuple = ()  # the lowered steps that stand in for that statement
    first_new: int = 0  # new step index of the first of them
    offset: int = 0  # new index minus old index past this edit
    done: list[int] = field(default_factory=list)  # candidates whose edits end here
    children: dict = field(default_factory=dict)  # edit key -> Node
    by_at: dict = field(default_factory=dict)  # old index -> [Node] of the children
    reach: int = -1  # the last old index a child's edit stands at
    alone: list = field(default_factory=list)  # rows of the edited statements
    segments: list = field(default_factory=list)  # (rows of one own step, position)
    spawned_after: int = 0  # how many of the parent's segments came before it


def add(root: Node, j: int, edits, program, key_of) -> None:
    """Put candidate ``j`` (``edits``: (old index, statements), lowered as ``program``)
    in the tree."""
    node, offset = root, 0
    for at, nodes in edits:
        key = (at, tuple(key_of(x) for x in nodes))
        child = node.children.get(key)
        if child is None:
            new = at + offset
            child = Node(node, at, tuple(program.steps[new:new + len(nodes)]), new,
                         offset + len(nodes) - 1)
            node.children[key] = child
            node.by_at.setdefault(at, []).append(child)
        node.reach = max(node.reach, at)
        offset = child.offset
        node = child
    node.done.append(j)


class Walk:
    """One pass through the plan's steps for every candidate in a tree."""

    def __init__(self, before: list[Batch], own_rows: list, own_steps, ctx: Context,
                 mass_checked: int):
        self.before = before  # the plan's state before each step
        self.own_rows = own_rows
        self.own_steps = own_steps
        self.ctx = ctx
        self.mass_checked = mass_checked  # past it a re-converged state may be carried
        self.results: dict[int, tuple] = {}  # candidate -> (final, flew, rows())

    def rows_for(self, node: Node, upto: int | None = None) -> list:
        parent = node.parent
        if parent.parent is None:
            rows = [r for r in self.own_rows if r.step < node.at]
        else:
            rows = self.rows_for(parent, node.spawned_after)
        rows += node.alone
        for step_rows, pos in node.segments[:upto]:
            rows += [r.take(slice(pos, pos + 1), r.step + node.offset) for r in step_rows]
        return rows

    def _fail(self, node: Node, after: int) -> None:
        """The candidates of ``node`` and of its children past ``after`` do not fly."""
        for j in node.done:
            self.results[j] = (None, False, list)
        for child in node.children.values():
            if child.at > after:
                self._fail(child, -1)

    def _finish(self, node: Node, final: Batch, flew: bool, carried=()) -> None:
        def rows(node=node):
            return self.rows_for(node) + [replace(r, step=r.step + node.offset)
                                          for r in carried]
        for j in node.done:
            self.results[j] = (final, flew, rows)

    def run(self, root: Node, budget=None, rule: str = "") -> dict[int, tuple]:
        """Candidate -> (final state, flew, rows()); a candidate left out was cut short
        by ``budget``'s time limit (and ``rule`` is marked so)."""
        n_old = len(self.own_steps)
        if not root.by_at:
            return self.results
        alive: list[Node] = []
        batch: Batch | None = None
        for s in range(min(root.by_at), n_old + 1):
            if budget is not None and budget.expired():
                budget.cut(rule)
                return self.results
            if alive and s - 1 > self.mass_checked and s < n_old:
                alive, batch = self._carry_back(s, alive, batch)
            born, states = [], []
            for pos, parent in [(None, root)] + list(enumerate(alive)):
                for child in parent.by_at.get(s, ()):
                    state = self.before[s] if pos is None else batch.take(slice(pos, pos + 1))
                    state = self._alone(child, state)
                    if state is None:
                        self._fail(child, -1)
                    else:
                        child.spawned_after = len(parent.segments)
                        born.append(child)
                        states.append(state)
            keep = [p for p, node in enumerate(alive) if node.done or node.reach > s]
            if len(keep) < len(alive):
                alive = [alive[p] for p in keep]
                batch = batch.take(np.asarray(keep, dtype=int)) if alive else None
            if s == n_old:
                break
            if alive:
                batch, step_rows, fails = apply(self.own_steps[s], s, batch, self.ctx)
                for pos, node in enumerate(alive):
                    node.segments.append((step_rows, pos))
                if not fails.ok.all():
                    for p in np.flatnonzero(~fails.ok):
                        self._fail(alive[p], s)
                    keep = np.flatnonzero(fails.ok)
                    alive = [alive[p] for p in keep]
                    batch = batch.take(keep) if alive else None
            if born:
                alive += born
                batch = Batch.concat(([batch] if batch is not None else []) + states)
        for pos, node in enumerate(alive):
            self._finish(node, batch.take(slice(pos, pos + 1)), True)
        return self.results

    def _alone(self, child: Node, state: Batch) -> Batch | None:
        """The edited statements of ``child`` flown from ``state`` (None if one fails)."""
        for m, step in enumerate(child.steps):
            state, step_rows, fails = apply(step, child.first_new + m, state, self.ctx)
            if not fails.ok[0]:
                return None
            child.alone.extend(step_rows)
        return state

    def _carry_back(self, s: int, alive: list[Node], batch: Batch):
        """Finish the states back in the plan's own orbit before step ``s`` with no edit
        ahead: the rest of the plan is the plan's own rows at their mass."""
        if self.ctx.finite:  # finite burns depend on the mass: nothing carries over
            return alive, batch
        ref = self.before[s]
        back = (np.all(np.isclose(batch.r, ref.r, rtol=1e-10, atol=1e-9), axis=1)
                & np.all(np.isclose(batch.v, ref.v, rtol=1e-10, atol=1e-12), axis=1))
        back &= np.array([node.reach < s for node in alive])
        if not back.any():
            return alive, batch
        carried = [r for r in self.own_rows if r.step >= s]
        for pos in np.flatnonzero(back):
            final, ok = carry(batch.take(slice(pos, pos + 1)), carried, float(ref.mass[0]))
            self._finish(alive[pos], final, bool(ok[0]), carried)
        keep = np.flatnonzero(~back)
        return [alive[p] for p in keep], (batch.take(keep) if len(keep) else None)
