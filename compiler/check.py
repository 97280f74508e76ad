"""`apsidal check`: expectations, lint rules and the proof behind every claimed saving.

A rule proposes rewritten plans; it never states a saving of its own.  ``Checker.prove``
parses the rewritten text, lowers it, prices it with the same evaluator as the original,
and keeps the proposal only if it flies, meets every expectation, reaches the same final
orbit (size, shape, plane; orientation too when an expectation names raan or argp) and
costs less.  The saving in the finding is the difference of the two priced plans.
"""

from __future__ import annotations

import difflib
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, replace

import numpy as np
from apsidal.lang import syntax as ast
from apsidal.lang.errors import PlanError

from .budget import budget
from .evaluate import Batch, Result, run, start_batch
from .load import load_text
from .state import elements_from_state
from .steps import Program

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


@dataclass
class Proof:
    text: str
    program: Program
    result: Result
    saves_m_s: float
    saves_kg: float


@dataclass
class Checker:
    """What every rule reads: the plan, its syntax tree, its priced chain."""

    program: Program
    result: Result
    report: dict = field(init=False)
    statements: list = field(init=False)  # the step statements, in plan order

    def __post_init__(self):
        self.report = budget(self.result)
        self.statements = self.program.plan.steps()

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
        rows = [r for r in self.result.rows if r.step < step_index]
        return rows[-1].after if rows else start_batch(self.program)

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
        mu = self.program.body.gm
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

    # --- rewriting ---------------------------------------------------------------------

    def _line_range(self, node) -> tuple[int, int]:
        """Character range of the whole source lines a statement stands on."""
        text = self.text
        start = text.rfind("\n", 0, node.span.start) + 1
        end = text.find("\n", node.span.end)
        return start, (len(text) if end < 0 else end)

    def rewrite(self, edits: dict[int, list[str]]) -> str:
        """Plan text with step statements replaced by zero or more statement lines.

        ``edits`` maps a step index to the lines that stand in its place (an empty list
        deletes the statement with its line).
        """
        text = self.text
        pieces = []
        cut = 0
        for index in sorted(edits):
            start, end = self._line_range(self.statements[index])
            pieces.append(text[cut:start])
            lines = edits[index]
            if not lines:
                end = end + 1 if end < len(text) else end  # take the newline with it
            else:
                pieces.append("\n".join(lines))
            cut = end
        pieces.append(text[cut:])
        return "".join(pieces)

    def statement_text(self, index: int) -> str:
        start, end = self._line_range(self.statements[index])
        return self.text[start:end]

    def reorder(self, block: list[int], order: Iterable[int]) -> str:
        """Plan text with the statements of ``block`` flown in ``order``."""
        return self.rewrite({slot: [self.statement_text(src)]
                             for slot, src in zip(block, order)})

    @staticmethod
    def unparse(node) -> str:
        from apsidal.lang.format import format_statement

        return format_statement(node)

    # --- proof -------------------------------------------------------------------------

    def prove(self, text: str) -> Proof | None:
        """Price a rewritten plan; a Proof only if it is a valid, cheaper equivalent."""
        try:
            program = load_text(text, self.program.source.path)
        except PlanError:
            return None
        result = run(program)
        if not result.ok or not bool(result.final.expect_ok[0]):
            return None
        if not self.result.ok:
            return None
        from .reorder import orientation_matters, same_orbit  # proofs only, not `run`

        same = same_orbit(result.final, self.result.final, program.body.gm,
                          orientation_matters(self.program))
        if not bool(same[0]):
            return None
        saves_dv = self.dv_with_margin - float(result.final.dv_margin[0]) * 1000.0
        saves_kg = self.propellant_used - (program.craft.propellant
                                           - float(result.final.propellant[0]))
        if saves_kg <= 1e-6 or saves_dv < -1e-6:
            return None
        return Proof(text, program, result, saves_dv, saves_kg)

    def best(self, texts: Iterable[str]) -> Proof | None:
        proofs = [p for p in (self.prove(t) for t in dict.fromkeys(texts)) if p]
        return max(proofs, key=lambda p: p.saves_kg, default=None)

    def finding(self, rule: str, severity: str, steps, message: str, proof: Proof | None,
                notes: Iterable[str] = ()) -> Finding:
        if proof is None:
            return Finding(rule, severity, tuple(steps), message, notes=tuple(notes))
        if not self.report["feasible"] and budget(proof.result)["feasible"]:
            notes = (*notes, "with this rewrite the plan fits its load")
        diff = "".join(difflib.unified_diff(
            self.text.splitlines(keepends=True), proof.text.splitlines(keepends=True),
            fromfile=self.program.source.path, tofile=self.program.source.path + " (rewritten)",
            n=1))
        return Finding(rule, severity, tuple(steps), message, proof.saves_m_s, proof.saves_kg,
                       proof.text, diff, tuple(notes))


def with_goals(node, goals) -> object:
    return replace(node, goals=tuple(goals))


def with_where(node, kind: str | None, angle=None):
    if kind is None:
        return replace(node, where=None)
    return replace(node, where=ast.Where(kind, angle, node.span))


def angle_text(deg: float) -> str:
    """An angle in degrees to 10 significant digits, in plain positional notation.

    >>> angle_text(123.456789012345), angle_text(0.0), angle_text(7.0)
    ('123.456789', '0', '7')
    """
    return np.format_float_positional(deg, precision=10, unique=False, fractional=False,
                                      trim="-")


def saving_text(proof: Proof) -> str:
    return f"{proof.saves_m_s:.1f} m/s ({proof.saves_kg:.2f} kg of propellant)"


Rule = Callable[[Checker], list[Finding]]


def findings_for(program: Program, rules: Iterable[Rule] | None = None) -> list[dict]:
    """Every finding for one plan, as JSON-ready dicts (the diff command uses this)."""
    return [f.as_dict() for f in check_program(program, rules)]


def check_program(program: Program, rules: Iterable[Rule] | None = None,
                  result: Result | None = None) -> list[Finding]:
    """Every finding for one plan; ``result`` is its priced chain if already at hand."""
    from .rules import RULES

    result = run(program) if result is None else result
    if result.error is not None and result.failure != "propellant":
        raise result.error
    checker = Checker(program, result)
    out: list[Finding] = []
    seen: set[str] = set()
    chosen = list(RULES if rules is None else rules)
    from .rules.expectations import propellant_exhausted, reserve_not_covered
    for always in (reserve_not_covered, propellant_exhausted):  # never clean if it does not fit
        if always not in chosen:
            chosen.insert(0, always)
    for rule in chosen:
        if not result.ok and getattr(rule, "needs_flyable", True):
            continue
        for f in rule(checker):
            if f.suggestion is not None:
                key = " ".join(f.suggestion.split())
                if key in seen:
                    continue  # another rule already proved the same rewrite
                seen.add(key)
            out.append(f)
    order = {s: i for i, s in enumerate(SEVERITIES)}
    out.sort(key=lambda f: (-order[f.severity], -(f.saves_kg or 0.0)))
    return out


def rule(name: str, needs_flyable: bool = True):
    """Name a rule; ``needs_flyable=False`` runs it on a plan that fails part-way too.

    The rule's docstring is its explanation (``apsidal explain NAME``).
    """
    def mark(fn):
        fn.rule_name = name
        fn.needs_flyable = needs_flyable
        return fn
    return mark
