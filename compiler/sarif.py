"""`apsidal check --format sarif`: findings as SARIF 2.1.0, for code-review tools.

SARIF (Static Analysis Results Interchange Format) Version 2.1.0 is the OASIS standard
that code-review and code-scanning services read to put a finding on the line it is
about (docs/review.md).  One run of the tool ``apsidal``:

* ``tool.driver.rules``: every rule `apsidal explain` knows (and ``plan-error`` for a
  plan that cannot be read or flown), with its one-line and full explanation and its
  default level;
* ``results``: one per finding: its rule, level (error, warning, note), message, the
  plan file and the region of the first step it names (the others as related
  locations), the saving in ``properties``, and the proven rewrite as a ``fix`` that
  replaces the changed lines of the plan;
* ``artifacts``: the plans checked.

Columns are counted in Unicode code points (``columnKind``), as `file:line:col` is.
"""

from __future__ import annotations

import difflib
import inspect
from pathlib import Path

SCHEMA = "https://json.schemastore.org/sarif-2.1.0.json"
LEVEL = {"error": "error", "warning": "warning", "info": "note"}
PLAN_ERROR = "plan-error"
PLAN_ERROR_HELP = (
    "The plan cannot be read or flown.\n\nA plan that does not parse, names something "
    "that does not exist, or asks for geometry that cannot be flown (a periapsis under the "
    "surface, a goal unreachable where the burn stands) is reported at its line and "
    "column with what would work, and nothing else is checked.")


def _rules() -> list[dict]:
    from .check_cli import SUMMARY_FINDINGS
    from .rules import RULES

    out = []
    docs = [(r.rule_name, inspect.getdoc(r) or "", getattr(r, "severity", None))
            for r in RULES]
    docs += [(name, text, None) for name, text in SUMMARY_FINDINGS.items()]
    docs.append((PLAN_ERROR, PLAN_ERROR_HELP, "error"))
    for name, doc, severity in docs:
        first = doc.partition("\n")[0]
        rule = {"id": name, "name": name,
                "shortDescription": {"text": first.strip()},
                "fullDescription": {"text": " ".join(doc.split())},
                "help": {"text": doc.strip() + f"\n\n`apsidal explain {name}` prints this."}}
        if severity in LEVEL:
            rule["defaultConfiguration"] = {"level": LEVEL[severity]}
        out.append(rule)
    return out


def _uri(path: str) -> dict:
    if path in ("-", "<stdin>"):
        return {"uri": "stdin"}
    p = Path(path)
    if p.is_absolute():
        return {"uri": p.as_uri()}
    return {"uri": p.as_posix(), "uriBaseId": "%SRCROOT%"}


def _region(span) -> dict:
    region = {"startLine": span.line, "startColumn": span.column}
    if span.end_line >= span.line:
        region["endLine"] = span.end_line
        region["endColumn"] = max(span.end_column, span.column + (span.end_line == span.line))
    return region


def step_spans(program) -> dict:
    """Each step's name (and the names a transfer expands into) -> its statement span."""
    out = {}
    for step in program.steps:
        span = getattr(step, "span", None)
        name = getattr(step, "name", None)
        if span is not None and name:
            out[name] = span
    return out


def span_of(name: str, spans: dict):
    return spans.get(name) or spans.get(name.split("/", 1)[0])


def _fix(text: str, suggestion: str, location: dict, message: str) -> dict | None:
    """The rewrite as SARIF replacements: each stretch of changed lines, by characters."""
    if not suggestion or suggestion == text:
        return None
    old, new = text.splitlines(keepends=True), suggestion.splitlines(keepends=True)
    starts = [0]
    for line in old:
        starts.append(starts[-1] + len(line))
    replacements = []
    for tag, i1, i2, j1, j2 in difflib.SequenceMatcher(None, old, new, autojunk=False
                                                       ).get_opcodes():
        if tag == "equal":
            continue
        replacements.append({
            "deletedRegion": {"charOffset": starts[i1], "charLength": starts[i2] - starts[i1]},
            "insertedContent": {"text": "".join(new[j1:j2])}})
    return {"description": {"text": message},
            "artifactChanges": [{"artifactLocation": location,
                                 "replacements": replacements}]}


def _result(rule: str, level: str, message: str, location: dict, region: dict | None,
            related=(), properties=None, fix=None) -> dict:
    physical = {"artifactLocation": location}
    if region is not None:
        physical["region"] = region
    out = {"ruleId": rule, "level": level, "message": {"text": message},
           "locations": [{"physicalLocation": physical}]}
    if related:
        out["relatedLocations"] = [
            {"id": k, "physicalLocation": {"artifactLocation": location, "region": r},
             "message": {"text": text}} for k, (text, r) in enumerate(related, 1)]
    if properties:
        out["properties"] = properties
    if fix is not None:
        out["fixes"] = [fix]
    return out


def to_sarif(reports, version: str = "unknown") -> dict:
    """The SARIF log of `check`'s reports: (path, program, findings, error) per plan."""
    from .budget import CAUTION

    rules = _rules()
    index = {r["id"]: k for k, r in enumerate(rules)}
    results, artifacts = [], []
    for path, program, findings, err in reports:
        location = _uri(path)
        artifacts.append({"location": location, "roles": ["analysisTarget"]})
        if err is not None:
            message = err.message + (f" (hint: {err.hint})" if err.hint else "")
            results.append(_result(PLAN_ERROR, "error", message, location,
                                   _region(err.span) if err.span else None))
            continue
        text = program.source.text
        spans = step_spans(program)
        for f in findings:
            named = [(s, span_of(s, spans)) for s in f.steps]
            named = [(s, sp) for s, sp in named if sp is not None]
            region = _region(named[0][1]) if named else {"startLine": 1, "startColumn": 1}
            related = [(f"step {s}", _region(sp)) for s, sp in named[1:]]
            props = {"steps": list(f.steps)}
            if f.saves_m_s is not None:
                props.update(saves_m_s=round(f.saves_m_s, 6), saves_kg=round(f.saves_kg, 6))
            if f.notes:
                props["notes"] = list(f.notes)
            message = f.message
            fix = _fix(text, f.suggestion, location,
                       f"the rewritten plan `apsidal check` priced and proved ({f.rule})")
            res = _result(f.rule, LEVEL[f.severity], message, location, region, related,
                          props, fix)
            if f.rule in index:
                res["ruleIndex"] = index[f.rule]
            results.append(res)
    for res in results:
        if res["ruleId"] == PLAN_ERROR:
            res["ruleIndex"] = index[PLAN_ERROR]
    run = {"tool": {"driver": {"name": "apsidal", "version": version, "rules": rules}},
           "columnKind": "unicodeCodePoints",
           "originalUriBaseIds": {"%SRCROOT%": {"uri": Path.cwd().as_uri() + "/"}},
           "artifacts": artifacts,
           "results": results,
           "properties": {"caution": CAUTION}}
    return {"$schema": SCHEMA, "version": "2.1.0", "runs": [run]}
