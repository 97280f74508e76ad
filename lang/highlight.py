"""Highlighting plan files: a Pygments lexer, and the colours apsidal prints plans in.

``PlanLexer`` is registered under the ``pygments.lexers`` entry point (pyproject.toml), so
any tool that highlights with Pygments (documentation builders, review tools, the
``pygmentize`` command) colours ``.aps`` files and code blocks marked ``apsidal``
(docs/editors.md).  Its keywords are read from the grammar itself (lang/grammar.lark),
so the two cannot drift apart; ``tests/test_highlight.py`` compares them with the
parser's.

The tool itself colours the plan text it prints in a terminal (the rewrites of `check`,
`fmt --check` and `fmt --diff`) with :func:`ansi_diff` and :func:`rich_diff`; to a pipe
or a file it prints plain text.  `apsidal run` never imports this module.

>>> [t for t in PlanLexer().get_tokens("burn raise at periapsis: apoapsis to 900 km\\n")
...  if not t[1].isspace()][:4]   # doctest: +NORMALIZE_WHITESPACE
[(Token.Keyword.Declaration, 'burn'), (Token.Name.Function, 'raise'),
 (Token.Keyword, 'at'), (Token.Keyword, 'periapsis')]
"""

from __future__ import annotations

import re
from functools import cache
from pathlib import Path
from typing import ClassVar

from pygments.lexer import RegexLexer, bygroups
from pygments.token import (
    Comment,
    Keyword,
    Literal,
    Name,
    Number,
    Punctuation,
    String,
    Text,
    Whitespace,
)

GRAMMAR = Path(__file__).with_name("grammar.lark")
# The statements: the words a line starts with (their order in the grammar).
STATEMENTS = ("plan", "around", "body", "craft", "burns", "steering", "gravity", "margin",
              "reserve", "ceiling", "drift", "epoch", "start", "burn", "transfer", "leg", "coast", "drop", "entry", "allow", "expect",
              "trade")
# Statements whose second word, when it is not a keyword, is the step's name.
NAMED = ("burn", "transfer", "coast", "drop", "entry", "allow", "expect", "engine", "craft",
         "body", "trade", "leg")


@cache
def grammar_keywords() -> frozenset[str]:
    """Every keyword of the language: the quoted words of lang/grammar.lark."""
    text = GRAMMAR.read_text(encoding="utf-8")
    text = "\n".join(line.split("//", 1)[0] for line in text.splitlines())
    return frozenset(re.findall(r'"([A-Za-z][A-Za-z0-9-]*)"', text))


def _units() -> list[str]:
    from .units import UNITS

    return sorted((u for u in UNITS if u), key=len, reverse=True)


_EDGE_BEFORE = r"(?<![\w\-/%])"
_EDGE_AFTER = r"(?![\w\-/%])"
_NAME = r"[A-Za-z_][\w\-/]*"
_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"


def _keyword_alternation(exclude=()) -> str:
    kws = sorted(grammar_keywords() - set(exclude), key=len, reverse=True)
    return "(?:" + "|".join(map(re.escape, kws)) + ")"


class PlanLexer(RegexLexer):
    """apsidal manoeuvre plans (``.aps``): statements, keywords, names, quantities with
    their units, dates, titles and comments."""

    name = "apsidal plan"
    aliases: ClassVar[list[str]] = ["apsidal", "aps"]
    filenames: ClassVar[list[str]] = ["*.aps"]
    mimetypes: ClassVar[list[str]] = ["text/x-apsidal"]
    url = "https://pypi.org/project/apsidal/"

    _kw = _keyword_alternation()
    tokens: ClassVar[dict] = {
        "root": [
            # a statement that names something: the keyword, then the name
            (r"(?<![\w\-/])(" + "|".join(NAMED) + r")(\s+)(?!" + _kw + _EDGE_AFTER + r")("
             + _NAME + ")", bygroups(Keyword.Declaration, Whitespace, Name.Function)),
            # a statement's keyword opens its line (`margin` is an option elsewhere)
            (r"^([ \t]*)(" + "|".join(STATEMENTS) + ")" + _EDGE_AFTER,
             bygroups(Whitespace, Keyword.Declaration)),
            (r"\s+", Whitespace),
            (r"#.*?$", Comment.Single),
            (r'"[^"\n]*"', String.Double),
            (r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(?:\.\d+)?", Literal.Date),
            # a trade's LOW..HIGH range and NAME.FIELD target
            (r"[A-Za-z_][\w\-]*\.[A-Za-z_][\w\-]*", Name.Variable),
            (_EDGE_BEFORE + "(" + _NUMBER + r"\.\." + _NUMBER + r")(\s*)("
             + "|".join(map(re.escape, _units())) + ")" + _EDGE_AFTER,
             bygroups(Number, Whitespace, Keyword.Type)),
            (_EDGE_BEFORE + "(" + _NUMBER + r")(\s*)(" + "|".join(map(re.escape, _units()))
             + ")" + _EDGE_AFTER, bygroups(Number, Whitespace, Keyword.Type)),
            (_EDGE_BEFORE + _NUMBER + r"\.\." + _NUMBER, Number),
            (_EDGE_BEFORE + _NUMBER, Number),
            (_EDGE_BEFORE + _kw + _EDGE_AFTER, Keyword),
            (r"[{}:,]", Punctuation),
            (_NAME, Name),
            (r".", Text),
        ],
    }


# --- the colours apsidal prints plan text in ---------------------------------------------


def _diff_lines(diff: str):
    """(marker style, marker, plan text) for each line of a unified diff; file headers
    and hunk headers have no plan text."""
    for line in diff.splitlines():
        if line.startswith(("+++", "---")):
            yield "bold", line, ""
        elif line.startswith("@@"):
            yield "cyan", line, ""
        elif line[:1] in ("+", "-", " "):
            yield {"+": "green", "-": "red", " ": ""}[line[0]], line[0], line[1:]
        else:
            yield "", line, ""


def ansi_diff(diff: str) -> str:
    """A unified diff of plan text coloured for a terminal: the markers in green and red,
    the plan text highlighted with :class:`PlanLexer`."""
    from pygments import highlight
    from pygments.formatters import TerminalFormatter

    codes = {"bold": "\x1b[1m", "cyan": "\x1b[36m", "green": "\x1b[32m", "red": "\x1b[31m",
             "": ""}
    lexer, formatter = PlanLexer(), TerminalFormatter()
    out = []
    for style, marker, text in _diff_lines(diff):
        head = f"{codes[style]}{marker}\x1b[0m" if style else marker
        body = highlight(text, lexer, formatter).rstrip("\n") if text else ""
        out.append(head + body)
    return "\n".join(out) + "\n"


def rich_diff(diff: str):
    """The same diff as a rich ``Text`` (for the screens `check` prints through rich,
    which drops the colours where the output is not a terminal)."""
    from rich.syntax import Syntax
    from rich.text import Text

    syntax = Syntax("", lexer=PlanLexer(), theme="ansi_dark", background_color="default")
    out = Text()
    for style, marker, text in _diff_lines(diff):
        out.append(marker, style=style or None)
        if text:
            line = syntax.highlight(text)
            line.rstrip()
            out.append_text(line)
        out.append("\n")
    out.rstrip()
    return out
