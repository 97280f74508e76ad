"""Located errors: every message a user sees for bad input names ``file:line:col``.

>>> src = Source("plan.aps", "margin 5 kg\\n")
>>> err = PlanError("margin must be a ratio (%), not a mass", Span(1, 8, 1, 12, 7, 11), src,
...                 hint="write it as a percentage, e.g. `margin 5 %`")
>>> print(err.render())
plan.aps:1:8: error: margin must be a ratio (%), not a mass
    1 | margin 5 kg
      |        ^^^^
  hint: write it as a percentage, e.g. `margin 5 %`
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field


@dataclass(frozen=True)
class Span:
    """A stretch of source text: 1-based line and column, 0-based character offsets."""

    line: int
    column: int
    end_line: int
    end_column: int
    start: int
    end: int


@dataclass(frozen=True)
class Source:
    """The text of one plan file and the name it is reported under."""

    path: str
    text: str

    def line_text(self, line: int) -> str:
        lines = self.text.splitlines()
        if 1 <= line <= len(lines):
            return lines[line - 1]
        return ""


@dataclass
class PlanError(Exception):
    """Bad input or a plan that cannot be flown, located in its source.

    ``message`` says what is wrong (with the numbers), ``hint`` what would work.
    """

    message: str
    span: Span | None = None
    source: Source | None = None
    hint: str | None = None
    notes: list[str] = field(default_factory=list)

    def __str__(self) -> str:
        return self.render()

    def located(self, source: Source) -> PlanError:
        if self.source is None:
            self.source = source
        return self

    def render(self) -> str:
        path = self.source.path if self.source else "<plan>"
        if self.span is None:
            head = f"{path}: error: {self.message}"
            body: list[str] = []
        else:
            head = f"{path}:{self.span.line}:{self.span.column}: error: {self.message}"
            body = _excerpt(self.source, self.span) if self.source else []
        out = [head, *body]
        out += [f"  note: {n}" for n in self.notes]
        if self.hint:
            out.append(f"  hint: {self.hint}")
        return "\n".join(out)


def _excerpt(source: Source, span: Span) -> list[str]:
    text = source.line_text(span.line).expandtabs(1)
    number = str(span.line)
    gutter = " " * len(number)
    if span.end_line == span.line and span.end_column > span.column:
        width = span.end_column - span.column
    else:
        width = max(1, len(text) - span.column + 1) if text else 1
    width = max(1, min(width, max(1, len(text) - span.column + 1)))
    caret = " " * (span.column - 1) + "^" * width
    return [f"    {number} | {text}", f"    {gutter} | {caret}"]


def did_you_mean(word: str, choices: Iterable[str]) -> str | None:
    """The closest of ``choices`` to ``word``, or None when nothing is close.

    >>> did_you_mean("apoapsys", ["apoapsis", "periapsis"])
    'apoapsis'
    """
    pool = list(choices)
    lowered = {c.lower(): c for c in pool}
    if word.lower() in lowered:
        return lowered[word.lower()]
    import difflib  # on a mistake only: not at start-up

    match = difflib.get_close_matches(word.lower(), list(lowered), n=1, cutoff=0.6)
    return lowered[match[0]] if match else None
