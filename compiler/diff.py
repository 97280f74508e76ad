"""What a revision did to a plan's budget: two budget reports in, plain data out.

The reports are the dicts of :func:`apsidal.compiler.budget.budget`, so the diff re-uses
the evaluator's numbers and never prices anything itself.  Steps are the report's rows:
a transfer appears as its burns ``NAME/1``, ``NAME/2``, ...  They are matched in three
passes:

1. by name, for steps the plan names;
2. by signature — the step's text without its name (kind, where, goals, options) when
   the caller passes the plans' signatures, otherwise its kind, where, engine and
   delta-v — which infers renames and finds unnamed steps that only shifted;
3. by position, for what is left when at least one side is unnamed: steps of the same
   kind between the same matched neighbours.

A matched step whose place in the order changed is ``moved`` (the fewest such steps:
the rest keep a longest common order); otherwise ``changed`` when a number it owns moved
by more than the tolerances below, else ``same``.

>>> def row(name, dv, at="periapsis"):
...     return {"name": name, "kind": "burn", "at": at, "dv_m_s": dv,
...             "dv_with_margin_m_s": dv * 1.05, "propellant_kg": dv / 10,
...             "duration_s": 1.0, "engine": "main", "margin_pct": 5.0}
>>> def report(*rows):
...     dv = sum(r["dv_m_s"] for r in rows)
...     return {"steps": list(rows), "totals": {"dv_m_s": dv}, "findings": []}
>>> d = diff_reports(report(row("raise", 100.0), row("circ", 50.0)),
...                  report(row("lift", 100.0), row("circ", 60.0), row("trim", 1.0)))
>>> [(s["name"], s["status"], s.get("renamed_from")) for s in d["steps"]]
[('lift', 'same', 'raise'), ('circ', 'changed', None), ('trim', 'added', None)]
>>> d["change"]["dv_m_s"]
11.0
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, replace

from .budget import caution

# A step's own numbers, compared with these tolerances to tell `changed` from `same`.
OWN_NUMBERS = {"dv_m_s": 1e-3, "dv_with_margin_m_s": 1e-3, "propellant_kg": 1e-4,
               "duration_s": 1e-3, "margin_pct": 1e-9}
OWN_WORDS = ("kind", "at", "engine", "body")
# The state at an `entry` step's interface, compared the same way.
ENTRY_NUMBERS = {"speed_m_s": 1e-3, "flight_path_angle_deg": 1e-6}
# A leg's hyperbolic excess speeds (km/s), the same way.
LEG_NUMBERS = {"vinf_depart_km_s": 1e-7, "vinf_arrive_km_s": 1e-7}
# The per-step change reported for every entry (new minus old, zero for a missing side).
STEP_CHANGE = ("dv_m_s", "dv_with_margin_m_s", "propellant_kg", "duration_s")

# The names lowering gives unnamed steps: `burn-2`, `transfer-1/2`.
DEFAULT_NAME = re.compile(r"(burn|transfer|coast|drop|expect|entry|leg)-\d+(/\d+)?")


@dataclass(frozen=True)
class StepInfo:
    """What the plan text says about one report row (see :func:`step_info`)."""

    signature: str  # the statement's canonical text without its name
    named: bool  # the plan gives the step a name


def is_default_name(name: str) -> bool:
    return DEFAULT_NAME.fullmatch(name) is not None


def step_info(program) -> dict[str, StepInfo]:
    """Signatures of a lowered plan's steps, keyed by step name (see :func:`_info`)."""
    from apsidal.lang.format import format_statement

    by_span = {s.span: s for s in program.plan.steps()}
    return {step.name: StepInfo(format_statement(replace(by_span[step.span], name=None)),
                                by_span[step.span].name is not None)
            for step in program.steps if step.span in by_span}


def _info(name: str, info: dict[str, StepInfo] | None) -> StepInfo | None:
    """The plan's word on a report row; a transfer's burn ``NAME/k`` shares its
    transfer's signature, suffixed ``/k``."""
    if info is None:
        return None
    if name in info:
        return info[name]
    head, _, k = name.rpartition("/")
    if head in info:
        return StepInfo(f"{info[head].signature} /{k}", info[head].named)
    return None


def _signature(step: dict, info: dict[str, StepInfo] | None) -> str:
    known = _info(step["name"], info)
    if known is not None:
        return known.signature
    checks = tuple((c["kind"], c["comparator"], c["expected"]) for c in step.get("checks", ()))
    number = step["dv_m_s"] if step["kind"] == "burn" else step["duration_s"]
    return repr((step["kind"], step["at"], step.get("engine"),
                 None if number is None else round(number, 3), checks))


def _named(step: dict, info: dict[str, StepInfo] | None) -> bool:
    known = _info(step["name"], info)
    if known is not None:
        return known.named
    return not is_default_name(step["name"])


def _close(a, b, tol: float) -> bool:
    if a is None or b is None:
        return a is b
    return abs(a - b) <= tol


def step_changed(old: dict, new: dict) -> bool:
    """Whether a step's own numbers, place, engine or expectations differ."""
    if any(old.get(k) != new.get(k) for k in OWN_WORDS):
        return True
    if any(not _close(old.get(k), new.get(k), tol) for k, tol in OWN_NUMBERS.items()):
        return True
    at_old, at_new = old.get("entry") or {}, new.get("entry") or {}
    if any(not _close(at_old.get(k), at_new.get(k), tol) for k, tol in ENTRY_NUMBERS.items()):
        return True
    leg_old, leg_new = old.get("leg") or {}, new.get("leg") or {}
    if any(not _close(leg_old.get(k), leg_new.get(k), tol) for k, tol in LEG_NUMBERS.items()):
        return True
    return _checks(old) != _checks(new)


def _checks(step: dict) -> list[tuple]:
    return [(c["kind"], c["comparator"], c["expected"], c["tolerance"], c["passed"])
            for c in step.get("checks", ())]


def _sub(a, b):
    if isinstance(a, bool) or isinstance(b, bool):
        return None if a == b else a
    if isinstance(a, dict) or isinstance(b, dict):  # a group of totals (allowances)
        a, b = a or {}, b or {}
        return {k: _sub(a.get(k, 0.0), b.get(k, 0.0)) for k in a.keys() | b.keys()}
    if isinstance(a, str) or isinstance(b, str):  # a name: the new one if it changed
        return None if a == b else a
    if a is None or b is None:
        return None
    return round(a - b, 6)


def step_change(old: dict | None, new: dict | None) -> dict:
    zero = dict.fromkeys(STEP_CHANGE, 0.0)
    a, b = new or zero, old or zero
    out = {k: _sub(a.get(k, 0.0), b.get(k, 0.0)) for k in STEP_CHANGE}
    if (old or {}).get("margin_pct") is not None or (new or {}).get("margin_pct") is not None:
        out["margin_pct"] = _sub((new or {}).get("margin_pct", 0.0),
                                 (old or {}).get("margin_pct", 0.0))
    return out


def totals_change(old: dict, new: dict) -> dict:
    """New minus old for every number of the totals; for a flag, the new value if it
    changed, else None."""
    return {k: _sub(new.get(k), old.get(k)) for k in new}


# --- matching ------------------------------------------------------------------------


class _Matcher:
    def __init__(self, old: list[dict], new: list[dict], old_info, new_info):
        self.old, self.new = old, new
        self.old_info, self.new_info = old_info, new_info
        self.pairs: dict[int, int] = {}  # old index -> new index
        self.how: dict[int, str] = {}  # old index -> name | signature | position

    def _free(self):
        taken = set(self.pairs.values())
        return ([i for i in range(len(self.old)) if i not in self.pairs],
                [j for j in range(len(self.new)) if j not in taken])

    def _pair(self, i: int, j: int, how: str) -> None:
        self.pairs[i], self.how[i] = j, how

    def by_name(self) -> None:
        index = {s["name"]: j for j, s in enumerate(self.new) if _named(s, self.new_info)}
        for i, s in enumerate(self.old):
            j = index.get(s["name"])
            if j is not None and _named(s, self.old_info):
                self._pair(i, j, "name")

    def by_signature(self) -> None:
        old_free, new_free = self._free()
        waiting: dict[str, list[int]] = {}
        for j in new_free:
            waiting.setdefault(_signature(self.new[j], self.new_info), []).append(j)
        for i in old_free:
            queue = waiting.get(_signature(self.old[i], self.old_info))
            if queue:
                self._pair(i, queue.pop(0), "signature")

    def _neighbours(self, index: int, matched: list[int]) -> tuple:
        """The matched steps on either side of ``index`` (as pair keys)."""
        before = max((m for m in matched if m < index), default=None)
        after = min((m for m in matched if m > index), default=None)
        return before, after

    def by_position(self) -> None:
        old_free, new_free = self._free()
        old_matched = sorted(self.pairs)
        new_to_old = {j: i for i, j in self.pairs.items()}
        new_matched = sorted(new_to_old)
        gaps: dict[tuple, tuple[list[int], list[int]]] = {}
        for i in old_free:
            gaps.setdefault(self._neighbours(i, old_matched), ([], []))[0].append(i)
        for j in new_free:
            b, a = self._neighbours(j, new_matched)
            key = (new_to_old.get(b), new_to_old.get(a))
            gaps.setdefault(key, ([], []))[1].append(j)
        for olds, news in gaps.values():
            kinds = difflib.SequenceMatcher(None, [self.old[i]["kind"] for i in olds],
                                            [self.new[j]["kind"] for j in news],
                                            autojunk=False)
            for block in kinds.get_matching_blocks():
                for k in range(block.size):
                    i, j = olds[block.a + k], news[block.b + k]
                    if not (_named(self.old[i], self.old_info)
                            and _named(self.new[j], self.new_info)):
                        self._pair(i, j, "position")

    def moved(self) -> set[int]:
        """Old indices of matched steps outside a longest common order."""
        seq = sorted(self.pairs, key=lambda i: self.pairs[i])  # old indices in new order
        keep = _longest_increasing(seq)
        return set(seq) - keep


def _longest_increasing(seq: list[int]) -> set[int]:
    """The values of one longest strictly increasing subsequence of ``seq``."""
    best: list[list[int]] = []  # best[k]: a smallest-tail increasing run of length k+1
    for x in seq:
        lo, hi = 0, len(best)
        while lo < hi:
            mid = (lo + hi) // 2
            if best[mid][-1] < x:
                lo = mid + 1
            else:
                hi = mid
        run = (best[lo - 1] if lo else []) + [x]
        if lo == len(best):
            best.append(run)
        else:
            best[lo] = run
    return set(best[-1]) if best else set()


# --- the diff ------------------------------------------------------------------------


def _entry(status: str, old: dict | None, new: dict | None, how: str | None = None) -> dict:
    entry = {"name": (new or old)["name"], "status": status, "old": old, "new": new,
             "change": step_change(old, new)}
    if how is not None:
        entry["matched_by"] = how
    if old is not None and new is not None and old["name"] != new["name"] and (
            not is_default_name(old["name"]) or not is_default_name(new["name"])):
        entry["renamed_from"] = old["name"]
    return entry


def _finding_key(f: dict) -> tuple:
    return f["rule"], tuple(f["steps"])


def findings_change(old: list[dict], new: list[dict]) -> dict:
    """Findings that appeared and disappeared, matched by rule and steps."""
    old_keys = {_finding_key(f) for f in old}
    new_keys = {_finding_key(f) for f in new}
    return {"appeared": [f for f in new if _finding_key(f) not in old_keys],
            "disappeared": [f for f in old if _finding_key(f) not in new_keys]}


def diff_reports(old: dict, new: dict, old_info: dict[str, StepInfo] | None = None,
                 new_info: dict[str, StepInfo] | None = None,
                 findings: bool | None = None) -> dict:
    """The budget change from report ``old`` to report ``new``.

    ``old_info`` / ``new_info`` (from :func:`step_info`) let renames and unnamed steps be
    matched on their text; without them a step's numbers stand in for its text.
    ``findings`` adds the findings that appeared and disappeared (default: when either
    report carries any).
    """
    m = _Matcher(old["steps"], new["steps"], old_info, new_info)
    m.by_name()
    m.by_signature()
    m.by_position()
    moved = m.moved()
    new_to_old = {j: i for i, j in m.pairs.items()}
    removed = [i for i in range(len(m.old)) if i not in m.pairs]
    steps: list[dict] = []
    placed_removed: set[int] = set()

    def removed_before(limit: int) -> None:
        """Removed old steps that stood before old index ``limit``, in old order."""
        for i in removed:
            if i < limit and i not in placed_removed:
                placed_removed.add(i)
                steps.append(_entry("removed", m.old[i], None))

    for j, s in enumerate(m.new):
        i = new_to_old.get(j)
        if i is None:
            steps.append(_entry("added", None, s))
            continue
        if i not in moved:
            removed_before(i)
        o = m.old[i]
        status = "moved" if i in moved else ("changed" if step_changed(o, s) else "same")
        steps.append(_entry(status, o, s, m.how[i]))
    removed_before(len(m.old))
    out = {"old": old["totals"], "new": new["totals"],
           "change": totals_change(old["totals"], new["totals"]), "steps": steps,
           "feasible": {"old": old.get("feasible", True), "new": new.get("feasible", True)},
           # the model that priced each side (reports before it carried none: point-mass)
           "gravity": {"old": old.get("gravity", "point-mass"),
                       "new": new.get("gravity", "point-mass")},
           "burns": {"old": old.get("burns", "impulsive"), "new": new.get("burns", "impulsive")},
           "caution": caution(old, new)}
    if findings or (findings is None and (old.get("findings") or new.get("findings"))):
        out["findings"] = findings_change(old.get("findings", []), new.get("findings", []))
    return out


def grows_past(change: dict, key: str, threshold: float) -> bool:
    """Whether the total ``key`` grew by more than ``threshold``."""
    value = change.get(key)
    return value is not None and value > threshold
