"""The canonical text of a plan: one layout, comments in place, proven on every run.

>>> plan = parse('''plan "Demo"   # a title
... around   earth
... craft c { propellant 100 kg  dry 50kg
...   engine e thrust 10 N isp 300 s }
... start circular 400 km
... burn up at periapsis:apoapsis to 900 km using e
... burn circ at apoapsis:circular
... ''')
>>> print(format_plan(plan), end="")
plan "Demo"  # a title
<BLANKLINE>
around earth
<BLANKLINE>
craft c {
    dry 50 kg
    propellant 100 kg
    engine e isp 300 s thrust 10 N
}
<BLANKLINE>
start circular 400 km
<BLANKLINE>
burn up   at periapsis: apoapsis to 900 km  using e
burn circ at apoapsis:  circular

The layout is described in docs/formatting.md.  Like a good code formatter it checks
itself: the text it produces is parsed again and must give the same syntax tree as the
input (nothing but layout changed), and formatting that tree again must give the same
text.  Either failure raises :class:`FormatError` instead of returning a changed plan.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field, fields, is_dataclass, replace

from . import syntax as ast
from .parse import parse

__all__ = ["FormatError", "format_plan", "format_statement", "format_text"]

INDENT = "    "
OPTION_GAP = 2  # spaces before the aligned `using` / `margin` column
COMMENT_GAP = 2  # spaces before a trailing comment

# Canonical keyword order of the fields of each block and of the trailing step options.
FIELD_ORDER = {
    ast.BodyDef: ("gm", "radius", "soi", "j2"),
    ast.CraftDef: ("dry", "propellant", "fuel", "oxidiser", "residual"),
    ast.Engine: ("isp", "thrust", "mixture"),
    ast.Start: ("circular", "periapsis", "apoapsis", "sma", "ecc", "vinf",
                "inclination", "raan", "argp", "anomaly"),
}
OPTION_ORDER = ("frame", "using", "margin", "tangential", "statistical", "fixed", "movable")


class FormatError(Exception):
    """The formatter would have changed a plan's meaning or is not stable: a bug of ours."""


def format_text(text: str, path: str = "<plan>") -> str:
    """Parse plan text and return its canonical form (PlanError if it does not parse)."""
    return format_plan(parse(text, path))


def format_plan(plan: ast.Plan) -> str:
    """The canonical text of a whole plan, every comment kept in place.

    Raises FormatError when the result would not parse back to the same tree or would
    not be stable under a second formatting.
    """
    text = _render(plan)
    path = plan.source.path
    try:
        again = parse(text, path)
    except Exception as exc:  # noqa: BLE001 - any failure here is the formatter's bug
        raise FormatError(f"{path}: the formatted plan does not parse: {exc}") from None
    if _shape(again) != _shape(plan):
        raise FormatError(f"{path}: the formatted plan would not mean the same plan "
                          f"({_first_difference(plan, again)})")
    if _render(again) != text:
        raise FormatError(f"{path}: formatting is not stable on this plan")
    return text


def format_statement(stmt) -> str:
    """Canonical text of one statement on its own: no column padding, no comments.

    Blocks (``body``, ``craft``) come out on several lines joined by ``\\n``; everything
    else is one line.  There is no trailing newline.

    >>> plan = parse("burn   raise at periapsis : apoapsis to 35786km,inclination to 0 deg\\n")
    >>> format_statement(plan.statements[0])
    'burn raise at periapsis: apoapsis to 35786 km, inclination to 0 deg'
    """
    stmt = canonical(stmt)
    if isinstance(stmt, ast.BodyDef | ast.CraftDef):
        return "\n".join([_block_header(stmt), *(INDENT + _item(i) for i in _items(stmt)),
                          "}"])
    if isinstance(stmt, ast.STEP_TYPES):
        return _step_parts(stmt).plain()
    return _scene_line(stmt)


# --- canonical order -----------------------------------------------------------------


def _ordered(items, order):
    rank = {k: i for i, k in enumerate(order)}
    return tuple(sorted(items, key=lambda f: rank.get(f.key, len(order))))


def canonical(node):
    """``node`` with its fields and options in canonical keyword order (stable)."""
    if isinstance(node, ast.CraftDef):
        return replace(node, fields=_ordered(node.fields, FIELD_ORDER[ast.CraftDef]),
                       engines=tuple(canonical(e) for e in node.engines))
    if type(node) in FIELD_ORDER:
        return replace(node, fields=_ordered(node.fields, FIELD_ORDER[type(node)]))
    if isinstance(node, ast.Burn | ast.Transfer | ast.Allow):
        return replace(node, options=_ordered(node.options, OPTION_ORDER))
    return node


# --- the text of the parts -----------------------------------------------------------


def _value(v) -> str:
    if isinstance(v, ast.Quantity | ast.SunSynchronous):
        return v.text()
    if isinstance(v, ast.Distance):
        return ("radius " if v.is_radius else "") + v.quantity.text()
    return v.text  # a Name


def _where(w: ast.Where) -> str:
    lead = "next " if w.next else ""
    if w.kind == "radius":
        return lead + _value(w.distance)
    return lead + (f"{w.kind} {w.angle.text()}" if w.angle is not None else w.kind)


def _goal(g: ast.Goal) -> str:
    if g.kind == "phase":
        return f"phase {_value(g.value)} in {g.revs.number} rev"
    if g.kind in ("apoapsis", "periapsis", "inclination", "raan", "sma", "ecc", "argp",
                  "period", "vinf", "c3"):
        return f"{g.kind} to {_value(g.value)}"
    return g.kind if g.value is None else f"{g.kind} {_value(g.value)}"


def _check(c: ast.Check) -> str:
    if c.comparator == "within":
        text = f"{c.kind} {_value(c.value)}"
        return text if c.tolerance is None else f"{text} within {c.tolerance.text()}"
    return f"{c.kind} {c.comparator} {_value(c.value)}"


def _field(f: ast.Field) -> str:
    return f"{f.key} {_value(f.value)}"


def _item(item) -> str:
    if isinstance(item, ast.Engine):
        return " ".join([f"engine {item.name.text}", *(_field(f) for f in item.fields)])
    return _field(item)


def _items(block) -> tuple:
    if isinstance(block, ast.CraftDef):
        return block.fields + block.engines
    return block.fields


def _block_header(block) -> str:
    word = "craft" if isinstance(block, ast.CraftDef) else "body"
    return f"{word} {block.name.text} {{"


def _scene_line(stmt) -> str:
    if isinstance(stmt, ast.PlanTitle):
        return f'plan "{stmt.title}"'
    if isinstance(stmt, ast.Around):
        return f"around {stmt.body.text}"
    if isinstance(stmt, ast.Setting) and stmt.word is not None:
        return f"{stmt.key} {stmt.word.text}"
    if isinstance(stmt, ast.Setting):
        if stmt.key == "drift":
            return f"drift at most {_value(stmt.value)}"
        return f"{stmt.key} {'radius ' if stmt.is_radius else ''}{stmt.value.text()}"
    if isinstance(stmt, ast.Epoch):
        return f"epoch {stmt.timestamp} {stmt.scale}"
    if isinstance(stmt, ast.Start):
        return " ".join(["start" if stmt.form == "circular" else "start orbit",
                         *(_field(f) for f in stmt.fields)])
    if isinstance(stmt, ast.Trade):
        items = (" ".join(w.text for w in (i.word, *i.args)) for i in stmt.items)
        return f"trade {stmt.name.text}: " + ", ".join(items)
    raise TypeError(f"not a statement: {type(stmt).__name__}")


@dataclass(frozen=True)
class _StepParts:
    """The columns of a step line: ``burn raise at periapsis: apoapsis to 1 km  using e``."""

    keyword: str
    name: str  # "" when unnamed
    where: str  # "" when the step happens here
    colon: bool  # burns and transfers put `:` before their goals
    body: str
    options: str  # "" when none

    @property
    def aligns(self) -> bool:
        """Burns and transfers with `at WHERE` align their `at` and their goals."""
        return self.colon and bool(self.where)

    def lead(self) -> str:
        return f"{self.keyword} {self.name}" if self.name else self.keyword

    def head(self, lead_width: int = 0) -> str:
        if self.where:
            return f"{self.lead().ljust(lead_width)} at {self.where}:"
        return self.lead() + (":" if self.colon else "")

    def main(self, lead_width: int = 0, head_width: int = 0) -> str:
        return f"{self.head(lead_width).ljust(head_width)} {self.body}"

    def plain(self) -> str:
        return self.main() + (f" {self.options}" if self.options else "")


def _step_parts(stmt) -> _StepParts:
    name = stmt.name.text if stmt.name is not None else ""
    if isinstance(stmt, ast.Burn | ast.Transfer):
        body = ", ".join(_goal(g) for g in stmt.goals)
        if isinstance(stmt, ast.Transfer) and stmt.via is not None:
            body += f" via apoapsis {_value(stmt.via)}"
        keyword = "burn" if isinstance(stmt, ast.Burn) else "transfer"
        return _StepParts(keyword, name, _where(stmt.where) if stmt.where else "", True, body,
                          " ".join(o.key if o.value is None else f"{o.key} {_value(o.value)}"
                                   for o in stmt.options))
    if isinstance(stmt, ast.Coast):
        if stmt.mode == "for":
            body = f"for {stmt.duration.text()}"
        elif stmt.mode == "to":
            body = f"to {_where(stmt.where)}"
        else:
            body = f"{stmt.duration.number} rev"
        return _StepParts("coast", name, "", False, body, _free(stmt))
    if isinstance(stmt, ast.Drop):
        return _StepParts("drop", name, "", False, stmt.mass.text(), _free(stmt))
    if isinstance(stmt, ast.Entry):
        return _StepParts("entry", name, "", False, f"at {_value(stmt.interface)}", "")
    if isinstance(stmt, ast.Leg):
        body = f"to {stmt.body.text}"
        if stmt.depart is not None:
            body += (f" vinf {stmt.depart.text()} to {stmt.arrive.text()} "
                     f"for {stmt.duration.text()}")
        return _StepParts("leg", name, "", False, body, "")
    if isinstance(stmt, ast.Allow):
        body = stmt.amount.text()
        if stmt.duration is not None:
            body += f" per year for {stmt.duration.text()}"
        return _StepParts("allow", name, "", False, body,
                          " ".join(o.key if o.value is None else f"{o.key} {_value(o.value)}"
                                   for o in _ordered(stmt.options, OPTION_ORDER)))
    return _StepParts("expect", name, "", False, ", ".join(_check(c) for c in stmt.checks),
                      _free(stmt))


def _free(stmt) -> str:
    return "movable" if stmt.movable else ""


def _align_steps(run: list[_StepParts]) -> list[str]:
    """The lines of a run of consecutive steps, columns aligned (docs/formatting.md)."""
    mains: list[str] = []
    i = 0
    while i < len(run):
        j = i
        while j < len(run) and run[j].aligns:
            j += 1
        if j == i:  # no `at WHERE`: no columns of its own
            mains.append(run[i].main())
            i += 1
            continue
        group = run[i:j]
        lead = max(len(s.lead()) for s in group)
        head = max(len(s.head(lead)) for s in group)
        mains += [s.main(lead, head) for s in group]
        i = j
    column = max((len(m) for m, s in zip(mains, run) if s.options), default=0) + OPTION_GAP
    return [m.ljust(column) + s.options if s.options else m for m, s in zip(mains, run)]


# --- the whole plan ------------------------------------------------------------------


@dataclass
class _Line:
    code: str  # "" for a comment on a line of its own
    comment: str | None = None
    blank_before: bool = False


@dataclass
class _Node:
    """A statement or a block item, with the comments that belong to it."""

    node: object
    leading: list = field(default_factory=list)  # own-line comments just above it
    trailing: ast.Comment | None = None


@dataclass
class _Block:
    header: _Node
    items: list[_Node]
    close_leading: list
    close_trailing: ast.Comment | None = None


SECTION = {ast.PlanTitle: "title", ast.Around: "around", ast.BodyDef: "body",
           ast.CraftDef: "craft", ast.Setting: "settings", ast.Start: "start",
           ast.Epoch: "start", ast.Trade: "trades"}


def _section(stmt) -> str:
    return SECTION.get(type(stmt), "steps")


def _is_block(stmt) -> bool:
    return isinstance(stmt, ast.BodyDef | ast.CraftDef)


def _comment_text(c: ast.Comment) -> str:
    return c.text.rstrip()


class _Layout:
    """Comments attached to statements and block items, then the lines laid out."""

    def __init__(self, plan: ast.Plan):
        self.plan = plan
        self.lines_of_source = plan.source.text.splitlines()
        self.nodes = [_Node(canonical(s)) for s in plan.statements]
        self.blocks: dict[int, _Block] = {}
        for k, n in enumerate(self.nodes):
            if _is_block(n.node):
                self.blocks[k] = _Block(n, [_Node(i) for i in _items(n.node)], [])
        self.tail: list[ast.Comment] = []
        for c in plan.comments:
            self._attach(c)

    def _blank_between(self, after_line: int, before_line: int) -> bool:
        return any(not self.lines_of_source[k - 1].strip()
                   for k in range(after_line + 1, before_line)
                   if 0 < k <= len(self.lines_of_source))

    def _attach(self, c: ast.Comment) -> None:
        line = c.line
        for k, n in enumerate(self.nodes):
            span = n.node.span
            if not span.line <= line <= span.end_line:
                continue
            block = self.blocks.get(k)
            if block is None or (c.trailing and line == span.line):
                if c.trailing:
                    n.trailing = c
                    return
                break  # an own-line comment cannot sit inside a one-line statement
            self._attach_in_block(block, c)
            return
        if c.trailing:  # code before it but no statement on its line: cannot happen
            raise FormatError(f"line {line}: a trailing comment with no statement")
        after = next((n for n in self.nodes if n.node.span.line > line), None)
        (after.leading if after is not None else self.tail).append(c)

    @staticmethod
    def _attach_in_block(block: _Block, c: ast.Comment) -> None:
        line = c.line
        if c.trailing:
            on_line = [i for i in block.items if i.node.span.line == line]
            if on_line:
                on_line[-1].trailing = c
            elif line == block.header.node.span.end_line:
                block.close_trailing = c
            else:
                raise FormatError(f"line {line}: a trailing comment with no code")
            return
        after = [i for i in block.items if i.node.span.line > line]
        if after:
            min(after, key=lambda i: i.node.span.start).leading.append(c)
        else:
            block.close_leading.append(c)

    # --- laying out --------------------------------------------------------------------

    def lines(self) -> list[_Line]:
        out: list[_Line] = []
        prev_end = None  # last source line of the previous element
        prev_stmt = None
        run: list[tuple[_Line, _StepParts]] = []
        for k, n in enumerate(self.nodes):
            stmt = n.node
            boundary = prev_stmt is not None and (
                _section(stmt) != _section(prev_stmt) or _is_block(stmt)
                or _is_block(prev_stmt))
            group = [(c.line, _Line("", _comment_text(c))) for c in n.leading]
            first = True
            for line_no, line in group:
                line.blank_before = prev_end is not None and (
                    (first and boundary) or self._blank_between(prev_end, line_no))
                out.append(line)
                prev_end, first = line_no, False
            blank = prev_end is not None and ((first and boundary)
                                              or self._blank_between(prev_end, stmt.span.line))
            if isinstance(stmt, ast.STEP_TYPES):
                if blank or any(line.blank_before for _, line in group):
                    self._flush(run)
                parts = _step_parts(stmt)
                line = _Line(parts.plain(), self._trailing(n), blank)
                run.append((line, parts))
                out.append(line)
            else:
                self._flush(run)
                out += self._statement_lines(k, blank)
            prev_end, prev_stmt = stmt.span.end_line, stmt
        self._flush(run)
        for c in self.tail:
            out.append(_Line("", _comment_text(c), prev_end is not None
                             and self._blank_between(prev_end, c.line)))
            prev_end = c.line
        return out

    @staticmethod
    def _trailing(n: _Node) -> str | None:
        return _comment_text(n.trailing) if n.trailing is not None else None

    @staticmethod
    def _flush(run: list) -> None:
        for (line, _), text in zip(run, _align_steps([p for _, p in run])):
            line.code = text
        run.clear()

    def _statement_lines(self, k: int, blank: bool) -> list[_Line]:
        n = self.nodes[k]
        block = self.blocks.get(k)
        if block is None:
            return [_Line(_scene_line(n.node), self._trailing(n), blank)]
        out = [_Line(_block_header(n.node), self._trailing(n), blank)]
        for item in block.items:
            out += [_Line(INDENT + _comment_text(c)) for c in item.leading]
            out.append(_Line(INDENT + _item(item.node), self._trailing(item)))
        out += [_Line(INDENT + _comment_text(c)) for c in block.close_leading]
        out.append(_Line("}", _comment_text(block.close_trailing)
                         if block.close_trailing is not None else None))
        return out


def _with_comment_columns(lines: list[_Line]) -> list[str]:
    """Trailing comments of adjacent code lines share one column."""
    texts: list[str] = []
    i = 0
    while i < len(lines):
        line = lines[i]
        if not (line.code and line.comment):
            texts.append(line.code or line.comment or "")
            i += 1
            continue
        j = i + 1
        while (j < len(lines) and lines[j].code and lines[j].comment
               and not lines[j].blank_before):
            j += 1
        column = max(len(x.code) for x in lines[i:j]) + COMMENT_GAP
        texts += [x.code.ljust(column) + x.comment for x in lines[i:j]]
        i = j
    return texts


def _render(plan: ast.Plan) -> str:
    lines = _Layout(plan).lines()
    texts = _with_comment_columns(lines)
    out: list[str] = []
    for line, text in zip(lines, texts):
        if line.blank_before and out:
            out.append("")
        out.append(text)
    return "\n".join(out) + "\n" if out else ""


# --- the proof -----------------------------------------------------------------------


def _node_shape(node):
    """A node as nested tuples, spans left out, fields and options in canonical order."""
    if is_dataclass(node):
        node = canonical(node)
        return (type(node).__name__, *(_node_shape(getattr(node, f.name))
                                       for f in fields(node) if f.name != "span"))
    if isinstance(node, tuple):
        return tuple(_node_shape(x) for x in node)
    return node


def _shape(plan: ast.Plan):
    comments = Counter((_comment_text(c), c.trailing) for c in plan.comments)
    return tuple(_node_shape(s) for s in plan.statements), comments


def _first_difference(a: ast.Plan, b: ast.Plan) -> str:
    for x, y in zip(a.statements, b.statements):
        if _node_shape(x) != _node_shape(y):
            return f"the statement on line {x.span.line} changed"
    if len(a.statements) != len(b.statements):
        return f"{len(a.statements)} statements became {len(b.statements)}"
    return "a comment was lost or moved"
