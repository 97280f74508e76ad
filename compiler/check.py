"""`apsidal check`: expectations, lint rules and the proof behind every claimed saving.

A rule proposes rewritten plans (``Rewrite``: statements replaced by statements); it
never states a saving of its own.  ``Checker.prove_all`` lowers the rewrites, prices them
with the same evaluator as the original (in one walk, ``proofs.Walk``), and keeps a
proposal only if it flies, meets every expectation, reaches the same final orbit (size,
shape, plane; orientation too when an expectation names raan or argp) and costs less.
The saving in the finding is the difference of the two priced plans; the text of a
reported rewrite is written then and read back (``Checker.confirm``).
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, fields, is_dataclass, replace
from functools import cached_property

import numpy as np
from apsidal.lang import syntax as ast
from apsidal.lang.errors import PlanError

from .budget import budget
from .evaluate import Batch, Result, apply, carry, context_for, run, start_batch
from .legs import PhaseBodies, final_body, is_leg
from .load import load_text
from .lower import Lowerer, lower
from .proofs import Node, Walk, add
from .state import elements_from_state
from .steps import Expect, Program

SEVERITIES = ("info", "warning", "error")


@dataclass(frozen=True)
class Finding:
    rule: str
    severity: str
    steps: tuple[str, ...]
    message: str
    saves_m_s: float | None = None
    saves_kg: float | None = None
    suggestion: str | None = None  # the whole rewritten plan
    diff: str | None = None  # unified diff of the rewrite against the original lines
    notes: tuple[str, ...] = ()

    def as_dict(self) -> dict:
        return {
            "rule": self.rule,
            "severity": self.severity,
            "steps": list(self.steps),
            "message": self.message,
            "saves_m_s": None if self.saves_m_s is None else round(self.saves_m_s, 6),
            "saves_kg": None if self.saves_kg is None else round(self.saves_kg, 6),
            "suggestion": self.suggestion,
            "diff": self.diff,
            "notes": list(self.notes),
        }


DEFAULT_TIME_LIMIT = 20.0  # s: `check`'s budget for one plan unless --time-limit says


class Budget:
    """The time `check` may spend on one plan, and what it has spent it on.

    Rules ask ``expired()`` before each search or candidate; a rule that stops early
    adds its name to ``cut_short`` so the report can say what was left unproven.
    ``progress`` (optional) is called with (rule name, fraction of the rules done).
    """

    def __init__(self, seconds: float | None = DEFAULT_TIME_LIMIT, progress=None):
        import time

        self._clock = time.monotonic
        self.seconds = seconds
        self.deadline = None if seconds is None else self._clock() + seconds
        self.cut_short: set[str] = set()
        self.proofs = 0
        self.silenced: list = []  # findings left out by --ignore or a marker comment
        self.pruned = 0  # candidates a bound showed could not pay, never priced
        self.progress = progress

    def expired(self) -> bool:
        return self.deadline is not None and self._clock() > self.deadline

    def remaining(self) -> float | None:
        return None if self.deadline is None else max(self.deadline - self._clock(), 0.0)

    def cut(self, rule: str) -> None:
        self.cut_short.add(rule)


@dataclass
class Proof:
    text: str | None  # None until reported (``Checker.finding`` writes it)
    program: Program
    final: Batch
    rows: Callable[[], list]  # the priced rows, put together when first asked for
    saves_m_s: float
    saves_kg: float
    rewrite: Rewrite | None = None

    @cached_property
    def result(self) -> Result:
        return Result(program=self.program, rows=self.rows(), final=self.final)


@dataclass(frozen=True)
class Rewrite:
    """A rule's proposal: step statements replaced by zero or more statements.

    ``edits`` maps a step index of the plan to what stands in its place, in order:
    syntax nodes (a statement of the plan itself keeps its own line, comments and all)
    or lines of text.  A rewrite of nodes is lowered and priced without a pass through
    the parser; its text is written, and parsed back, only when it is reported
    (``Checker.finding``).
    """

    edits: tuple[tuple[int, tuple], ...]

    @property
    def first(self) -> int:
        return self.edits[0][0]

    @property
    def last(self) -> int:
        return self.edits[-1][0]

    @property
    def textual(self) -> bool:
        return any(isinstance(x, str) for _, lines in self.edits for x in lines)


@dataclass
class Checker(PhaseBodies):
    """What every rule reads: the plan, its syntax tree, its priced chain."""

    program: Program
    result: Result
    budget: Budget | None = None
    min_saving_m_s: float = 0.0  # savings below this are not reported (--min-saving)
    report: dict = field(init=False)
    statements: list = field(init=False)  # the step statements, in plan order

    def __post_init__(self):
        self.report = budget(self.result)
        self.statements = self.program.plan.steps()
        self.budget = Budget() if self.budget is None else self.budget
        # the state before each step, from the priced chain (None past a failure)
        self._before: list[Batch | None] = [None] * (len(self.program.steps) + 1)
        last, rows = start_batch(self.program), iter(self.result.rows)
        row = next(rows, None)
        for k in range(len(self._before)):
            while row is not None and row.step < k:
                last, row = row.after, next(rows, None)
            self._before[k] = last
        self._skeleton = _skeleton(self.text, self.statements)
        # past the last expectation on mass, propellant or elapsed time a re-converged chain
        # is carried (those depend on more than the orbit state)
        self._mass_checked = max((i for i, st in enumerate(self.program.steps)
                                  if isinstance(st, Expect) and any(
                                      ch.kind in ("mass", "propellant", "elapsed")
                                      for ch in st.checks)),
                                 default=-1)
        self._lines = [self.statement_text(k) for k in range(len(self.statements))]
        self._own = {id(node): k for k, node in enumerate(self.statements)}
        # the plan without its steps: what a rewritten statement is read back after
        self._settings = self.text_of(self.rewrite({k: [] for k in range(len(self.statements))}))
        self._lowerer = Lowerer(self.program.plan)  # to lower rewritten steps in place
        self._lowerer.lower()

    @property
    def text(self) -> str:
        return self.program.source.text

    @property
    def dv_with_margin(self) -> float:
        return float(self.result.final.dv_margin[0]) * 1000.0

    @property
    def propellant_used(self) -> float:
        return self.program.craft.propellant - float(self.result.final.propellant[0])

    def rows_of(self, step_index: int):
        return [r for r in self.result.rows if r.step == step_index]

    def state_before(self, step_index: int) -> Batch:
        """The state the plan is in just before a step (the start for the first)."""
        return self._before[min(step_index, len(self._before) - 1)]

    def state_after(self, step_index: int) -> Batch:
        rows = self.rows_of(step_index)
        return rows[-1].after if rows else self.state_before(step_index)

    def pin_plane(self, goals, given_at: int | tuple[int, ...],
                  reached_at: int | None = None) -> list:
        """``goals`` with the plan's own node line added where it was left to chance.

        From an equatorial orbit `inclination to I` alone leaves the node line to the
        point of the burn: every position is on the equator, so every point is a node,
        and a rewrite that turns the plane elsewhere reaches another plane.  Where the
        plane goals are given by inclination without raan and the plan is in an
        equatorial orbit just before step ``given_at`` (or any of several: the steps a
        rewrite folds into one), the rewrite is pinned to the plane the plan flew: the
        raan of the orbit after step ``reached_at`` (default: the last of ``given_at``),
        to 10 significant digits, goes in beside the inclination.  Otherwise the goals
        are returned as they are.  A pin never makes a wrong claim: the proof still
        prices the rewrite and compares its final orbit.
        """
        goals = list(goals)
        kinds = {g.kind for g in goals}
        if "inclination" not in kinds or "raan" in kinds:
            return goals
        mu = self.body_at(given_at if isinstance(given_at, int) else given_at[0]).gm
        given = (given_at,) if isinstance(given_at, int) else tuple(given_at)
        states = [self.state_before(k) for k in given]
        if not any(bool(elements_from_state(b.r, b.v, mu).equatorial[0]) for b in states):
            return goals
        after = self.state_after(max(given) if reached_at is None else reached_at)
        el = elements_from_state(after.r, after.v, mu)
        if bool(el.equatorial[0]):
            return goals  # the equator (or its retrograde twin) has no node line to pin
        span = next(g for g in goals if g.kind == "inclination").span
        raan = ast.Quantity(angle_text(float(np.degrees(el.raan[0]))), "deg", span)
        return goals + [ast.Goal("raan", raan, span)]

    def can_pay(self, rule: str, bound_m_s: float) -> bool:
        """Whether a candidate whose saving is at most ``bound_m_s`` (with margin) could
        be reported; counts the ones that could not as pruned."""
        if bound_m_s > max(self.min_saving_m_s, 1e-9):
            return True
        self.budget.pruned += 1
        return False

    # --- rewriting ---------------------------------------------------------------------

    def _line_range(self, node) -> tuple[int, int]:
        """Character range of the whole source lines a statement stands on."""
        text = self.text
        start = text.rfind("\n", 0, node.span.start) + 1
        end = text.find("\n", node.span.end)
        return start, (len(text) if end < 0 else end)

    def rewrite(self, edits: dict[int, list]) -> Rewrite:
        """Step statements replaced by zero or more statements (nodes or text lines);
        an empty list deletes the statement with its line."""
        return Rewrite(tuple((k, tuple(edits[k])) for k in sorted(edits)))

    def text_of(self, rewrite: Rewrite | str) -> str:
        """The plan text of a rewrite (a text is its own)."""
        if isinstance(rewrite, str):
            return rewrite
        text = self.text
        pieces = []
        cut = 0
        for index, lines in rewrite.edits:
            start, end = self._line_range(self.statements[index])
            pieces.append(text[cut:start])
            if not lines:
                end = end + 1 if end < len(text) else end  # take the newline with it
            else:
                pieces.append("\n".join(self._line_of(x) for x in lines))
            cut = end
        pieces.append(text[cut:])
        return "".join(pieces)

    def _line_of(self, item) -> str:
        if isinstance(item, str):
            return item
        own = self._own.get(id(item))
        return self.statement_text(own) if own is not None else self.unparse(item)

    def program_of(self, rewrite: Rewrite | str) -> Program | None:
        """The lowered plan of a rewrite, or None if it does not lower (a proposal that
        is not a valid plan proves nothing).  Nodes are lowered as they stand, only the
        edited stretch of the plan where default names allow (``Lowerer.splice``); text
        is parsed."""
        try:
            if isinstance(rewrite, str) or rewrite.textual:
                return load_text(self.text_of(rewrite), self.program.source.path)
            edits = dict(rewrite.edits)
            statements, k = [], 0
            for st in self.program.plan.statements:
                if not isinstance(st, ast.STEP_TYPES):
                    statements.append(st)
                    continue
                statements.extend(edits.get(k, (st,)))
                k += 1
            plan = replace(self.program.plan, statements=tuple(statements))
            window = [x for k in range(rewrite.first, rewrite.last + 1)
                      for x in edits.get(k, (self.statements[k],))]
            spliced = self._lowerer.splice(self.program, rewrite.first, rewrite.last, window,
                                           plan)
            return spliced if spliced is not None else lower(plan)
        except PlanError:
            return None

    def statement_text(self, index: int) -> str:
        start, end = self._line_range(self.statements[index])
        return self.text[start:end]

    def reorder(self, block: list[int], order: Iterable[int]) -> Rewrite:
        """The plan with the statements of ``block`` flown in ``order``."""
        return self.rewrite({slot: [self.statements[src]] for slot, src in zip(block, order)})

    @staticmethod
    def unparse(node) -> str:
        from apsidal.lang.format import format_statement

        return format_statement(node)

    # --- proof -------------------------------------------------------------------------

    def first_change(self, program: Program) -> int | None:
        """Index of the first step a rewritten plan flies differently, or None when
        something besides the step statements changed (then it is priced whole)."""
        statements = program.plan.steps()
        text = program.source.text
        if _skeleton(text, statements) != self._skeleton:
            return None
        n = min(len(statements), len(self._lines))
        for k in range(n):
            if _statement_text(text, statements[k]) != self._lines[k]:
                return k
        return n

    def price(self, program: Program, rewrite: Rewrite | None = None
              ) -> tuple[Batch, bool, list]:
        """Price a rewritten plan from the stored state before its first changed step
        (the first of ``rewrite``'s edits, or found by comparing the texts).

        The steps before it are the plan's own, so their priced rows are reused; only the
        rest goes through the evaluator (``apply``, the one chain code).  Returns the
        final state, whether every step flew, and the rows of the whole rewritten plan.
        """
        k = rewrite.first if rewrite is not None else self.first_change(program)
        if k is None or not self.result.ok:
            result = run(program)
            return result.final, result.ok, result.rows
        batch = self._before[k]
        rows = [r for r in self.result.rows if r.step < k]
        ctx = context_for(program)
        n_new, n_old = len(program.steps), len(self.program.steps)
        suffix = (self._same_suffix(program, k) if rewrite is None
                  else n_old - 1 - rewrite.last)
        for i in range(k, n_new):
            batch, step_rows, fails = apply(program.steps[i], i, batch, ctx)
            if not fails.ok[0]:
                return batch, False, rows
            rows.extend(step_rows)
            j = i + n_old - n_new  # the same point of the plan as written
            if i >= n_new - suffix - 1 and j > self._mass_checked and j < n_old - 1 \
                    and not ctx.finite and self._converged(batch, j + 1):
                # (finite burns depend on the mass: a state back on the plan's orbit at
                # another mass flies the rest differently, so it is priced in full)
                tail = [r for r in self.result.rows if r.step > j]
                final, ok = carry(batch, tail, float(self._before[j + 1].mass[0]))
                return final, bool(ok[0]), rows + tail
        return batch, True, rows

    def _same_suffix(self, program: Program, k: int) -> int:
        """How many trailing step statements a rewrite shares with the plan (after k)."""
        new = program.plan.steps()
        text = program.source.text
        n = 0
        while n < len(new) - k and n < len(self._lines) - k and \
                _statement_text(text, new[-1 - n]) == self._lines[-1 - n]:
            n += 1
        return n

    def _converged(self, batch: Batch, k: int) -> bool:
        """Whether a rewritten chain is back in the plan's own orbit state before step k."""
        ref = self._before[k]
        return bool(np.allclose(batch.r, ref.r, rtol=1e-10, atol=1e-9)
                    and np.allclose(batch.v, ref.v, rtol=1e-10, atol=1e-12))

    def prove(self, rewrite: Rewrite | str) -> Proof | None:
        """Price a rewritten plan; a Proof only if it is a valid, cheaper equivalent."""
        return self.prove_all([rewrite])[0]

    def best(self, rewrites: Iterable[Rewrite | str]) -> Proof | None:
        proofs = [p for p in self.prove_all(list(dict.fromkeys(rewrites))) if p]
        return max(proofs, key=lambda p: p.saves_kg, default=None)

    def prove_all(self, rewrites: list[Rewrite | str], rule: str = "") -> list[Proof | None]:
        """Price many rewritten plans (``price_all``); a Proof (or None) for each."""
        return [None if p is None else self._judge(rw, *p)
                for rw, p in zip(rewrites, self.price_all(rewrites, rule))]

    def price_all(self, rewrites: list[Rewrite | str], rule: str = "") -> list[tuple | None]:
        """Each rewritten plan priced: (program, final state, flew, rows()) for each,
        None for a rewrite that is not a valid plan (or when the plan itself fails).

        Rewrites of nodes go through one walk of the plan (``proofs.Walk``): those whose
        edits agree so far share their states, and every state that differs from the
        plan's is stacked into one batch for each of the plan's own steps.  A rewrite in
        text is parsed and priced alone (``price``), as is one that renames the plan's
        own steps (a default name moved).  Past the time limit the walk stops; the
        candidates it had not finished are None and ``rule`` is marked cut short.
        """
        out: list[tuple | None] = [None] * len(rewrites)
        if not self.result.ok:
            return out
        ctx = context_for(self.program)
        root = Node()
        own_key = lambda x: ("own", self._own[id(x)]) if id(x) in self._own else x
        names = [st.name for st in self.program.steps]
        programs = {}
        for j, rw in enumerate(rewrites):
            program = self.program_of(rw)
            if program is None:
                continue
            self.budget.proofs += 1
            programs[j] = program
            if isinstance(rw, str) or rw.textual or context_for(program) != ctx \
                    or not self._same_names(rw, program, names):
                final, ok, rows = self.price(program, None if isinstance(rw, str) or
                                             rw.textual else rw)
                out[j] = (program, final, ok, lambda rows=rows: rows)
                continue
            add(root, j, rw.edits, program, own_key)
        walk = Walk(self._before, self.result.rows, self.program.steps, ctx, self._mass_checked)
        for j, (final, ok, rows) in walk.run(root, self.budget, rule).items():
            out[j] = (programs[j], final, ok, rows)
        return out

    @staticmethod
    def _same_names(rewrite: Rewrite, program: Program, names: list[str]) -> bool:
        """Whether the plan's own steps keep their names in the rewritten plan."""
        new, k, at = [], 0, 0
        for index, lines in rewrite.edits:
            new += names[at:index]
            new += [st.name for st in program.steps[index + k:index + k + len(lines)]]
            k += len(lines) - 1
            at = index + 1
        new += names[at:]
        return new == [st.name for st in program.steps]

    def _judge(self, rewrite, program: Program, final: Batch, ok: bool, rows) -> Proof | None:
        """A Proof if the priced rewrite flies, meets every expectation, reaches the same
        final orbit and costs less; ``rows`` gives its rows when it does."""
        if not ok or not bool(final.expect_ok[0]):
            return None
        from .reorder import orientation_matters, same_orbit  # proofs only, not `run`

        final_, ref = at_same_time(program, final, self.result.final)
        same = same_orbit(final_, ref, final_body(program).gm,
                          orientation_matters(self.program))
        if not bool(same[0]):
            return None
        saves_dv = self.dv_with_margin - float(final.dv_margin[0]) * 1000.0
        saves_kg = self.propellant_used - (program.craft.propellant
                                           - float(final.propellant[0]))
        if saves_kg <= 1e-6 or saves_dv < -1e-6:
            return None
        text = rewrite if isinstance(rewrite, str) else None
        return Proof(text, program, final, rows, saves_dv, saves_kg,
                     None if text is not None else rewrite)

    def confirm(self, proof: Proof) -> None:
        """Write a proof's text, and check that its new statements read back as what was
        priced: their lines, parsed after the plan's own settings, lower to the same
        steps (names aside where a default name is given); a rewrite that does not read
        back as itself is a bug in apsidal, never a finding."""
        if proof.text is not None:
            return
        rewrite = proof.rewrite
        new, offset = [], 0
        for index, lines in rewrite.edits:
            new += [(x, index + offset + m) for m, x in enumerate(lines)
                    if id(x) not in self._own]
            offset += len(lines) - 1
        proof.text = self.text_of(rewrite)
        if not new:
            return
        # each new statement is read back in its phase (after the legs before it)
        legs_before = [sum(1 for s in proof.program.steps[:index] if is_leg(s))
                       for _, index in new]
        for phase in sorted(set(legs_before)):
            self._read_back([n for n, p in zip(new, legs_before) if p == phase], proof, phase)

    def _read_back(self, new, proof: Proof, phase: int) -> None:
        lines = "\n".join(self.unparse(x) for x, _ in new)
        # read back before the plan's `entry`, if it ends with one: only there may a last
        # burn put the periapsis under the surface
        last = self.statements[-1] if self.statements else None
        tail = self.unparse(last) + "\n" if isinstance(last, ast.Entry) else ""
        tail = self._next_leg(phase) or tail  # a `vinf to leg` goal reads the leg after it
        try:
            program = load_text(self._phase_settings(phase) + "\n" + lines + "\n" + tail,
                                self.program.source.path)
        except PlanError as exc:
            raise RuntimeError(f"a rewritten statement does not parse back: {exc.message}\n"
                               f"{lines}") from exc
        for (node, index), read in zip(new, program.steps[phase:]):
            priced = proof.program.steps[index]
            if node.name is None:
                read, priced = replace(read, name=""), replace(priced, name="")
            if _plain(read) != _plain(priced):
                raise RuntimeError(f"a rewritten statement does not read back as the step "
                                   f"priced:\n{self.unparse(node)}")

    def _next_leg(self, phase: int) -> str:
        """The lines of the leg that ends phase ``phase`` and of its arrival start ("" in
        the last phase)."""
        nodes = [st for st in self.program.plan.statements if isinstance(st, ast.Leg)]
        if phase >= len(nodes):
            return ""
        at = self.program.plan.statements.index(nodes[phase])
        start = self.program.plan.statements[at + 1]
        return "".join(self.text[slice(*self._line_range(x))] + "\n" for x in (nodes[phase], start))

    def _phase_settings(self, phase: int) -> str:
        """The plan without its steps, up to its ``phase``-th leg and that leg's arrival
        start (the plan's settings alone for the first phase)."""
        if phase == 0 and not any(is_leg(s) for s in self.program.steps):
            return self._settings
        cuts, legs = [], 0
        for st in self.program.plan.statements:
            if isinstance(st, ast.Leg):
                legs += 1
            if (isinstance(st, ast.STEP_TYPES) and not (isinstance(st, ast.Leg)
                                                        and legs <= phase)) \
                    or (isinstance(st, ast.Start) and legs > phase):
                cuts.append(self._line_range(st))
        pieces, at = [], 0
        for start, end in cuts:
            pieces.append(self.text[at:start])
            at = end
        pieces.append(self.text[at:])
        return "".join(pieces)

    def findings_of(self, rule: str, proposals: list) -> list[Finding]:
        """Findings from (rewrite, report) proposals, all priced in one walk
        (``prove_all``); ``report(proof)`` gives the finding of a proven one (or None)."""
        proofs = self.prove_all([rw for rw, _ in proposals], rule)
        found = (report(p) for (_, report), p in zip(proposals, proofs) if p is not None)
        return [f for f in found if f is not None]

    def finding(self, rule: str, severity: str, steps, message: str, proof: Proof | None,
                notes: Iterable[str] = ()) -> Finding:
        if proof is None:
            return Finding(rule, severity, tuple(steps), message, notes=tuple(notes))
        self.confirm(proof)
        if not self.report["feasible"] and budget(run(proof.program))["feasible"]:
            # (priced in full again: a proof carries the plan's own rows past the rewrite)
            notes = (*notes, "with this rewrite the plan fits its load")
        diff = "".join(difflib.unified_diff(
            self.text.splitlines(keepends=True), proof.text.splitlines(keepends=True),
            fromfile=self.program.source.path, tofile=self.program.source.path + " (rewritten)",
            n=1))
        return Finding(rule, severity, tuple(steps), message, proof.saves_m_s, proof.saves_kg,
                       proof.text, diff, tuple(notes))


def at_same_time(program: Program, a: Batch, ref: Batch) -> tuple[Batch, Batch]:
    """Two final states compared at the same moment: under `gravity j2` every orbit's
    node and apse line keep drifting, so the one that ends sooner coasts on (as its
    plan left it) to the other's end before the two orbits are compared; in the
    point-mass model the orbit does not change while coasting, and both are as given."""
    if program.gravity != "j2":
        return a, ref
    from .j2 import Drift

    body = final_body(program)  # the body of the plan's last phase
    drift = Drift(body.gm, body.radius, body.j2)
    gap = a.t - ref.t  # (B,) against the single reference

    def coasted(b: Batch, dt) -> Batch:
        r, v, ok = drift.propagate(b.r, b.v, np.maximum(dt, 0.0))
        return replace(b, r=np.where(ok[:, None], r, b.r), v=np.where(ok[:, None], v, b.v),
                       t=b.t + np.maximum(dt, 0.0))

    size = a.size
    ref_b = Batch(*(np.repeat(getattr(ref, f), size, axis=0) for f in
                    ("r", "v", "mass", "propellant", "t", "dv", "dv_margin", "expect_ok")))
    return coasted(a, -gap), coasted(ref_b, gap)


def _plain(x):
    """``x`` with every source span left out, for comparing what two plans say."""
    if is_dataclass(x) and not isinstance(x, type):
        return (type(x).__name__, *(_plain(getattr(x, f.name)) for f in fields(x)
                                    if not f.name.endswith("span")))
    if isinstance(x, (tuple, list)):
        return tuple(_plain(y) for y in x)
    if isinstance(x, np.ndarray):
        return tuple(x.ravel().tolist())
    return x


def _statement_text(text: str, node) -> str:
    start = text.rfind("\n", 0, node.span.start) + 1
    end = text.find("\n", node.span.end)
    return text[start:(len(text) if end < 0 else end)]


def _skeleton(text: str, statements) -> str:
    """The plan text with its step statements' lines cut out: what a rewrite keeps."""
    pieces, cut = [], 0
    for node in statements:
        start = text.rfind("\n", 0, node.span.start) + 1
        end = text.find("\n", node.span.end)
        pieces.append(text[cut:start])
        cut = len(text) if end < 0 else end
    pieces.append(text[cut:])
    return " ".join("\n".join(pieces).split())


def with_goals(node, goals) -> object:
    return replace(node, goals=tuple(goals))


def with_where(node, kind: str | None, angle=None):
    if kind is None:
        return replace(node, where=None)
    return replace(node, where=ast.Where(kind, angle, node.span))


def angle_text(deg: float) -> str:
    """An angle in degrees to 10 significant digits, in plain positional notation; the
    rounding left of a zero angle (below 1e-9 deg, about 2e-11 rad) is written 0.

    >>> angle_text(123.456789012345), angle_text(0.0), angle_text(7.0)
    ('123.456789', '0', '7')
    >>> angle_text(2.804546752e-14), angle_text(-3e-12)
    ('0', '0')
    """
    if abs(deg) < 1e-9:
        deg = 0.0
    return np.format_float_positional(deg, precision=10, unique=False, fractional=False,
                                      trim="-")


def saving_text(proof: Proof) -> str:
    return f"{proof.saves_m_s:.1f} m/s ({proof.saves_kg:.2f} kg of propellant)"


Rule = Callable[[Checker], list[Finding]]


def findings_for(program: Program, rules: Iterable[Rule] | None = None) -> list[dict]:
    """Every finding for one plan, as JSON-ready dicts (the diff command uses this)."""
    return [f.as_dict() for f in check_program(program, rules)]


def check_program(program: Program, rules: Iterable[Rule] | None = None,
                  result: Result | None = None, budget: Budget | None = None,
                  min_saving_m_s: float = 0.0, ignore: Iterable[str] = ()) -> list[Finding]:
    """Every finding for one plan; ``result`` is its priced chain if already at hand.

    ``budget`` bounds the time spent (``Budget(None)``: no limit; by default
    ``DEFAULT_TIME_LIMIT``) and collects which rules were cut short; rules skip
    candidates whose bound says they cannot save ``min_saving_m_s`` (m/s, with margin).
    Findings of the rules in ``ignore``, and of a rule a step's line silences with
    ``# apsidal: waive RULE``, are left out and kept in ``budget.silenced``.
    """
    from .rules import RULES

    result = run(program) if result is None else result
    if result.error is not None:  # geometry that cannot be flown (the load never stops it)
        raise result.error
    budget = Budget() if budget is None else budget
    checker = Checker(program, result, budget, min_saving_m_s)
    out: list[Finding] = []
    seen: set[str] = set()
    chosen = list(RULES if rules is None else rules)
    from .rules.expectations import propellant_exhausted, reserve_not_covered
    for always in (reserve_not_covered, propellant_exhausted):  # never clean if it does not fit
        if always not in chosen:
            chosen.insert(0, always)
    for n, rule in enumerate(chosen):
        if not result.ok and getattr(rule, "needs_flyable", True):
            continue
        if budget.progress is not None:
            budget.progress(rule.rule_name, n / len(chosen))
        for f in rule(checker):
            if f.suggestion is not None:
                key = " ".join(f.suggestion.split())
                if key in seen:
                    continue  # another rule already proved the same rewrite
                seen.add(key)
            out.append(f)
    if not budget.expired():
        combined = combined_rewrites(checker, out)
        if combined is not None:
            out.append(combined)
    if budget.cut_short:
        limit = f"{budget.seconds:g} s" if budget.seconds is not None else "the"
        out.append(Finding(
            "time-limit", "info", (),
            f"the time limit of {limit} was reached: {', '.join(sorted(budget.cut_short))} "
            "reported only what was proven by then (raise --time-limit to search further)"))
    out = _apply_silencing(program, checker, out, ignore or (), budget)
    order = {s: i for i, s in enumerate(SEVERITIES)}
    out.sort(key=lambda f: (-order[f.severity], -(f.saves_kg or 0.0)))
    return out


def _edits(base: list[str], text: str) -> list[tuple[int, int, list[str]]]:
    """The line edits that turn ``base`` into ``text``: (first, end, new lines)."""
    new = text.splitlines(keepends=True)
    ops = difflib.SequenceMatcher(None, base, new, autojunk=False).get_opcodes()
    return [(i1, i2, new[j1:j2]) for tag, i1, i2, j1, j2 in ops if tag != "equal"]


def combined_rewrites(c: Checker, findings: list[Finding]) -> Finding | None:
    """The rewrites of ``findings`` that touch lines apart from each other, applied
    together and proven like any other (``Checker.prove``); None when fewer than two
    are compatible or the combined plan is not a valid, cheaper equivalent.

    Savings do not add in general (a step moved by one rewrite changes the mass another
    one flies at), so the combined plan is priced as a whole.
    """
    base = c.text.splitlines(keepends=True)
    taken: list[tuple[Finding, list]] = []
    spans: list[tuple[int, int]] = []
    for f in sorted((f for f in findings if f.suggestion), key=lambda f: -(f.saves_kg or 0)):
        edits = _edits(base, f.suggestion)
        mine = [(i1, max(i1, i2 - 1)) for i1, i2, _ in edits]
        # a line apart from every other rewrite's lines (touching lines may interact)
        if any(a0 <= b1 + 1 and b0 <= a1 + 1 for a0, a1 in mine for b0, b1 in spans):
            continue
        taken.append((f, edits))
        spans += mine
    if len(taken) < 2:
        return None
    lines = list(base)
    for i1, i2, new in sorted((e for _, es in taken for e in es), key=lambda e: -e[0]):
        lines[i1:i2] = new
    text = "".join(lines)
    proof = c.prove(text)
    best = max(f.saves_kg or 0.0 for f, _ in taken)
    if proof is None or proof.saves_kg <= best + 1e-9:
        return None
    steps = tuple(dict.fromkeys(s for f, _ in taken for s in f.steps))
    return c.finding(
        "combined-rewrites", "info", steps,
        f"all {len(taken)} compatible rewrites together save {saving_text(proof)}; the "
        "single savings above do not add up to this, each was priced alone", proof,
        notes=tuple(f"includes {f.rule} [{', '.join(f.steps)}]" for f, _ in taken))


WAIVER = re.compile(r"#\s*apsidal:\s*waive\s+([a-z0-9-]+(?:\s*,\s*[a-z0-9-]+)*)")


def waived_rules(line: str) -> set[str]:
    """Rules a plan line silences with our marker comment.

    >>> sorted(waived_rules("burn spiral: apoapsis to 900 km  # apsidal: waive long-burn"))
    ['long-burn']
    >>> sorted(waived_rules("burn b: along 1 m/s # apsidal: waive long-burn, merge-burns"))
    ['long-burn', 'merge-burns']
    >>> waived_rules("burn b: along 1 m/s  # waive long-burn")
    set()
    """
    return {name.strip() for m in WAIVER.finditer(line) for name in m.group(1).split(",")}


def _apply_silencing(program: Program, checker: Checker, findings: list[Finding],
                     ignore: Iterable[str], budget: Budget) -> list[Finding]:
    """Findings not silenced; the silenced ones go to ``budget.silenced``."""
    ignore = set(ignore)
    allow = {}
    for k, step in enumerate(program.steps):
        rules = waived_rules(checker.statement_text(k))
        if rules:
            allow[step.name] = rules
    kept = []
    for f in findings:
        names = {s.split("/")[0] for s in f.steps}
        if f.rule in ignore or any(f.rule in allow.get(n, ()) for n in names):
            budget.silenced.append(f)
        else:
            kept.append(f)
    return kept


def rule(name: str, needs_flyable: bool = True):
    """Name a rule; ``needs_flyable=False`` runs it on a plan that fails part-way too.

    The rule's docstring is its explanation (``apsidal explain NAME``).
    """
    def mark(fn):
        fn.rule_name = name
        fn.needs_flyable = needs_flyable
        return fn
    return mark
