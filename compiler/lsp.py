"""`apsidal lsp`: a language server for plan files (the Language Server Protocol over
standard input and output), built on pygls (docs/editors.md).

What an editor gets:

* diagnostics as the plan is typed: a parse or lowering error with its hint, a plan that
  cannot be flown at the step that fails, and the plan's own findings (expectations,
  reserve, load, burn length: what `apsidal run` reports); on save, the `check` findings
  too (searches for cheaper plans, with a time limit);
* hover on a step: its delta-v, propellant, mass and orbit after, as `apsidal run
  --format json` gives them (the numbers are the report's own);
* a quick fix for each `check` finding with a rewrite: the proven rewritten plan;
* formatting through `apsidal fmt`'s formatter (the whole document);
* completion of keywords, body names, the craft's engine names and units.

The analysis below is plain Python on text and positions (zero-based lines and columns
in code points); :func:`serve` wires it to pygls, which is imported only when the server
runs, and converts columns to and from the encoding the editor and server agreed on
(UTF-16 unless the editor offers another).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

from apsidal.lang.errors import PlanError

SEVERITY = {"error": 1, "warning": 2, "info": 3}  # the protocol's DiagnosticSeverity
CHECK_SECONDS = 10.0  # the time limit of the check run on save


@dataclass(frozen=True)
class Diagnostic:
    """One message at a range of the text: zero-based (line, code-point column) pairs."""

    start: tuple[int, int]
    end: tuple[int, int]
    severity: int
    message: str
    code: str
    fix: str | None = None  # the proven rewritten plan, for a quick fix
    fix_title: str = ""

    def as_lsp(self) -> dict:
        return {"range": {"start": {"line": self.start[0], "character": self.start[1]},
                          "end": {"line": self.end[0], "character": self.end[1]}},
                "severity": self.severity, "code": self.code, "source": "apsidal",
                "message": self.message}


def _range(text: str, span) -> tuple[tuple[int, int], tuple[int, int]]:
    lines = text.splitlines() or [""]

    def at(line: int, column: int) -> tuple[int, int]:
        k = min(max(line - 1, 0), len(lines) - 1)
        return k, max(column - 1, 0)

    if span is None:
        return (0, 0), (0, len(lines[0]))
    start = at(span.line, span.column)
    end = at(span.end_line, span.end_column) if span.end_line >= span.line else start
    if end <= start:  # a point: underline to the end of the line
        end = (start[0], max(start[1] + 1, len(lines[start[0]])))
    return start, end


def _error(text: str, err: PlanError) -> Diagnostic:
    start, end = _range(text, err.span)
    message = err.message + "".join(f"\nnote: {n}" for n in err.notes)
    if err.hint:
        message += f"\nhint: {err.hint}"
    return Diagnostic(start, end, SEVERITY["error"], message, "plan-error")


def _findings(text: str, program, findings) -> list[Diagnostic]:
    from .sarif import span_of, step_spans

    spans = step_spans(program)
    out = []
    for f in findings:
        span = next((s for s in (span_of(n, spans) for n in f.steps) if s is not None), None)
        start, end = _range(text, span)
        message = f.message + "".join(f"\nnote: {n}" for n in f.notes)
        title = ""
        if f.suggestion:
            title = f"Apply the {f.rule} rewrite"
            if f.saves_m_s is not None:
                title += f" (saves {f.saves_m_s:.4g} m/s, {f.saves_kg:.4g} kg)"
        out.append(Diagnostic(start, end, SEVERITY[f.severity], message, f.rule,
                              f.suggestion or None, title))
    return out


@lru_cache(maxsize=4)
def _priced(text: str, path: str):
    """The plan lowered and priced, with its report; or the PlanError that stops it.
    Kept for the last few texts: a hover right after the diagnostics prices nothing."""
    from .budget import budget
    from .evaluate import run
    from .load import load_text

    try:
        program = load_text(text.removeprefix("\ufeff"), path)
    except PlanError as err:
        return err
    result = run(program)
    return program, result, budget(result)


def diagnose(text: str, path: str = "<plan>", full: bool = False) -> list[Diagnostic]:
    """The diagnostics of a plan's text: errors, the plan's own findings and, with
    ``full`` (on save), the `check` findings."""
    priced = _priced(text, path)
    if isinstance(priced, PlanError):
        return [_error(text, priced)]
    program, result, _ = priced
    out = [_error(text, result.error)] if result.error is not None else []
    if full:
        from .check import Budget, check_program

        try:
            findings = check_program(program, None, result, Budget(CHECK_SECONDS))
        except PlanError as err:
            return out + [_error(text, err)]
    else:
        from .cli import self_consistency

        findings = self_consistency(program, result, priced[2])
    found = out + _findings(text, program, findings)
    if full:
        _CHECKED[text] = found
        while len(_CHECKED) > 4:
            _CHECKED.pop(next(iter(_CHECKED)))
    return found


_CHECKED: dict[str, list[Diagnostic]] = {}  # the last texts checked on save


def quick_fixes(text: str, start: tuple[int, int], end: tuple[int, int]) -> list[Diagnostic]:
    """The findings of the last check of exactly this text that carry a rewrite and
    touch the lines from ``start`` to ``end``: each is offered as a quick fix that
    replaces the document with the proven rewritten plan.  None once the text changed
    (the rewrite was proven for the text as saved)."""
    return [d for d in _CHECKED.get(text, ()) if d.fix is not None
            and d.start[0] <= end[0] and d.end[0] >= start[0]]


# --- hover -------------------------------------------------------------------------------


def _offset(text: str, line: int, character: int) -> int:
    """A zero-based (line, code-point column) position as a character offset."""
    lines = text.splitlines(keepends=True)
    if line >= len(lines):
        return len(text)
    row = lines[line]
    return sum(map(len, lines[:line])) + min(character, len(row.rstrip("\r\n")))


def hover(text: str, line: int, character: int, path: str = "<plan>") -> str | None:
    """Markdown for the step under the position: each burn it flies (a transfer flies
    several) with its delta-v, propellant, mass and orbit after, as the `run` report
    gives them; None off a step or where the plan does not parse."""
    priced = _priced(text, path)
    if isinstance(priced, PlanError):
        return None
    program, _, report = priced
    where = _offset(text, line, character)
    index = next((k for k, st in enumerate(program.steps)
                  if st.span is not None and st.span.start <= where <= st.span.end), None)
    if index is None:
        return _setting_text(program, where)
    name = program.steps[index].name
    steps = [s for s in report["steps"] if s["name"] == name
             or s["name"].startswith(name + "/")]
    if not steps:
        return f"**{name}**: not flown (the plan stops before it)"
    return "\n\n".join(_step_text(s) for s in steps)


def _setting_text(program, where: int) -> str | None:
    """Markdown for a statement that is no step under the offset ``where``: a model
    setting (what its choice means), the epoch, a trade study; None elsewhere."""
    from apsidal.lang import syntax as ast
    from apsidal.lang.parse import MODEL_CHOICES, MODEL_HINTS

    st = next((s for s in program.plan.statements if getattr(s, "span", None) is not None
               and s.span.start <= where <= s.span.end), None)
    if isinstance(st, ast.Setting) and st.word is not None and st.key in MODEL_HINTS:
        choices = " or ".join(f"`{c}`" for c in MODEL_CHOICES[st.key])
        return f"**{st.key} {st.word.text}**: {choices}: {MODEL_HINTS[st.key].strip()[1:-1]}"
    if isinstance(st, ast.Epoch):
        return (f"**epoch** {st.timestamp} {st.scale}: the date of the start orbit; "
                "`apsidal export` dates the state and every burn from it")
    if isinstance(st, ast.Trade):
        return (f"**trade {st.name.text}**: priced by `apsidal sweep PLAN --trade "
                f"{st.name.text}` (`run`, `check` and `size` leave it out)")
    return None


def _step_text(s: dict) -> str:
    o = s["orbit_after"]
    apo = "open" if o["apoapsis_alt_km"] is None else f"{o['apoapsis_alt_km']} km"
    lines = [f"**{s['kind']} {s['name']}** ({s['at']})"]
    if s["kind"] in ("burn", "allow"):
        lines.append(f"delta-v {s['dv_m_s']} m/s ({s['dv_with_margin_m_s']} m/s with margin)")
        lines.append(f"propellant {s['propellant_kg']} kg, burn time {s['duration_s']} s")
    if s.get("finite"):  # flown finite (`burns finite`): the arc and its loss
        f = s["finite"]
        lines.append(f"finite burn: gravity loss {f['gravity_loss_m_s']} m/s over a "
                     f"{f['thrust_time_s']} s thrust arc of {f['arc_deg']} deg "
                     f"(meets its {f['meets']})")
    lines.append(f"mass after {s['mass_after_kg']} kg, elapsed {s['elapsed_s']} s")
    lines.append(f"orbit after: periapsis {o['periapsis_alt_km']} km, apoapsis {apo}, "
                 f"inclination {o['inclination_deg']} deg, raan {o['raan_deg']} deg")
    return "  \n".join(lines)


# --- completion -------------------------------------------------------------------------


def completions(text: str, line: int, character: int) -> list[tuple[str, str]]:
    """(label, kind) pairs for the position: engines after `using`, bodies after
    `around`, units after a number, else keywords, engines and bodies."""
    from apsidal.lang.parse import keywords
    from apsidal.lang.units import UNITS

    from .bodies import names

    lines = text.splitlines()
    before = lines[line][:character] if line < len(lines) else ""
    head = re.sub(r"[A-Za-z_%/][\w\-/%]*$", "", before)  # less the word being typed
    code = re.sub(r"#[^\n]*", "", text)  # engines named in comments are not engines
    engines = sorted(set(re.findall(r"\bengine\s+([A-Za-z_][\w\-]*)", code)))
    if re.search(r"\busing\s+$", head):
        return [(e, "engine") for e in engines]
    if re.search(r"\baround\s+$", head):
        return [(b, "body") for b in names()]
    from apsidal.lang.parse import MODEL_CHOICES

    model = re.search(r"^\s*(\w+)\s+$", head)  # `burns `, `steering `, `gravity `
    if model and model.group(1) in MODEL_CHOICES:
        return [(c, "keyword") for c in MODEL_CHOICES[model.group(1)]]
    if re.search(r"\d\s*$", head):
        return [(u, "unit") for u in sorted(UNITS) if u]
    return ([(k, "keyword") for k in sorted(keywords())] + [(e, "engine") for e in engines]
            + [(b, "body") for b in names()])


def formatted(text: str, path: str = "<plan>") -> str | None:
    """The whole text in canonical layout, or None where it does not parse."""
    from apsidal.lang.format import FormatError, format_text

    try:
        return format_text(text.removeprefix("\ufeff"), path)
    except (PlanError, FormatError):
        return None


# --- the server --------------------------------------------------------------------------


def serve() -> None:  # pragma: no cover - run in a subprocess by tests/test_lsp.py
    from lsprotocol import types
    from pygls.lsp.server import LanguageServer

    from .cli import version

    server = LanguageServer("apsidal", version())

    def client(doc, point: tuple[int, int]):
        """A code-point position in the units the editor counts."""
        return doc.position_codec.position_to_client_units(doc.lines, types.Position(*point))

    def ours(doc, position) -> tuple[int, int]:
        if position.line >= len(doc.lines):  # past the last line: an empty one
            return position.line, 0
        p = doc.position_codec.position_from_client_units(doc.lines, position)
        return p.line, p.character

    def publish(uri: str, full: bool) -> None:
        doc = server.workspace.get_text_document(uri)
        diagnostics = [types.Diagnostic(
            range=types.Range(start=client(doc, d.start), end=client(doc, d.end)),
            message=d.message, severity=types.DiagnosticSeverity(d.severity), code=d.code,
            source="apsidal") for d in diagnose(doc.source, doc.path or uri, full)]
        server.text_document_publish_diagnostics(
            types.PublishDiagnosticsParams(uri=uri, diagnostics=diagnostics,
                                           version=doc.version))

    @server.feature(types.TEXT_DOCUMENT_DID_OPEN)
    def did_open(ls, params: types.DidOpenTextDocumentParams):
        publish(params.text_document.uri, full=False)

    @server.feature(types.TEXT_DOCUMENT_DID_CHANGE)
    def did_change(ls, params: types.DidChangeTextDocumentParams):
        publish(params.text_document.uri, full=False)

    @server.feature(types.TEXT_DOCUMENT_DID_SAVE)
    def did_save(ls, params: types.DidSaveTextDocumentParams):
        publish(params.text_document.uri, full=True)

    @server.feature(types.TEXT_DOCUMENT_DID_CLOSE)
    def did_close(ls, params: types.DidCloseTextDocumentParams):
        server.text_document_publish_diagnostics(
            types.PublishDiagnosticsParams(uri=params.text_document.uri, diagnostics=[]))

    @server.feature(types.TEXT_DOCUMENT_HOVER)
    def on_hover(ls, params: types.HoverParams):
        doc = server.workspace.get_text_document(params.text_document.uri)
        text = hover(doc.source, *ours(doc, params.position),
                     doc.path or params.text_document.uri)
        if text is None:
            return None
        return types.Hover(contents=types.MarkupContent(kind=types.MarkupKind.Markdown,
                                                        value=text))

    @server.feature(types.TEXT_DOCUMENT_FORMATTING)
    def on_format(ls, params: types.DocumentFormattingParams):
        doc = server.workspace.get_text_document(params.text_document.uri)
        new = formatted(doc.source, doc.path or params.text_document.uri)
        if new is None or new == doc.source:
            return []
        lines = doc.source.splitlines()
        end = types.Position(line=len(lines), character=0)
        return [types.TextEdit(range=types.Range(start=types.Position(line=0, character=0),
                                                 end=end), new_text=new)]

    @server.feature(types.TEXT_DOCUMENT_CODE_ACTION,
                    types.CodeActionOptions(code_action_kinds=[types.CodeActionKind.QuickFix]))
    def on_code_action(ls, params: types.CodeActionParams):
        uri = params.text_document.uri
        doc = server.workspace.get_text_document(uri)
        lines = doc.source.splitlines()
        whole = types.Range(start=types.Position(line=0, character=0),
                            end=types.Position(line=len(lines), character=0))
        return [types.CodeAction(
            title=d.fix_title, kind=types.CodeActionKind.QuickFix,
            edit=types.WorkspaceEdit(changes={uri: [types.TextEdit(range=whole,
                                                                   new_text=d.fix)]}))
            for d in quick_fixes(doc.source, ours(doc, params.range.start),
                                 ours(doc, params.range.end))]

    kinds = {"keyword": types.CompletionItemKind.Keyword,
             "engine": types.CompletionItemKind.Variable,
             "body": types.CompletionItemKind.Constant, "unit": types.CompletionItemKind.Unit}

    @server.feature(types.TEXT_DOCUMENT_COMPLETION,
                    types.CompletionOptions(trigger_characters=[" "]))
    def on_complete(ls, params: types.CompletionParams):
        doc = server.workspace.get_text_document(params.text_document.uri)
        items = [types.CompletionItem(label=label, kind=kinds[kind], detail=kind)
                 for label, kind in completions(doc.source, *ours(doc, params.position))]
        return types.CompletionList(is_incomplete=False, items=items)

    server.start_io()
