"""The one-expression lexer (lang/lexer.py) gives what lark's own contextual lexer gives:
the same tree for every plan, the same exception (type, place, expected terminals, token)
and the same located message for every malformed one.

The reference is a second parser built from the same grammar with the same options and
lark's ``ContextualLexer``; texts are the samples, the formatter's cases, the syntax
error table and generated near-plans (a sample with one token replaced, inserted or
removed) and token soup.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from apsidal.lang import parse as parse_module
from apsidal.lang.errors import PlanError
from hypothesis import given, settings
from hypothesis import strategies as st
from lark import Lark, Token
from lark.exceptions import UnexpectedInput
from test_syntax_errors import ERRORS

ROOT = Path(__file__).parent.parent
PLANS = sorted(ROOT.glob("samples/*.aps")) + sorted(ROOT.glob("tests/format_cases/*.aps"))


@pytest.fixture(scope="module")
def reference() -> Lark:
    p = parse_module._parser()
    assert isinstance(p.parser.lexer.lexer, parse_module.OneScanLexer)  # through the postlex
    return Lark(parse_module.GRAMMAR.read_text(encoding="utf-8"), parser="lalr",
                lexer="contextual", propagate_positions=True, maybe_placeholders=True,
                postlex=parse_module._WordsEverywhere(),
                lexer_callbacks={"COMMENT": parse_module._keep_comment})


def where(token: Token) -> tuple:
    return (token.type, str(token), token.line, token.column, token.end_line,
            token.end_column, token.start_pos, token.end_pos)


def outcome(parser: Lark, text: str):
    """The tree and every token's place, or what the exception says and where (the
    expected terminals as a set: lark words them in the order of a set)."""
    try:
        tree = parser.parse(text)
    except UnexpectedInput as e:
        token = getattr(e, "token", None)
        interactive = getattr(e, "interactive_parser", None)
        return ("error", type(e).__name__, str(e).splitlines()[0], e.line, e.column,
                e.pos_in_stream,
                sorted(getattr(e, "expected", None) or getattr(e, "allowed", None) or ()),
                None if token is None else where(token),
                None if interactive is None else sorted(interactive.accepts()))
    return "tree", tree, [where(t) for t in tree.scan_values(lambda v: isinstance(v, Token))]


def located(text: str) -> str:
    try:
        parse_module.parse(text, "plan.aps")
    except PlanError as err:
        return err.render()
    return "parsed"


def same(reference: Lark, text: str) -> None:
    text = parse_module._terminated(text)
    assert outcome(parse_module._parser(), text) == outcome(reference, text), text
    ours = located(text)
    with pytest.MonkeyPatch.context() as m:  # the message, examples matched by lark's lexer
        m.setattr(parse_module, "_parser", lambda: reference)
        assert ours == located(text), text


@pytest.mark.parametrize("path", PLANS, ids=lambda p: p.name)
def test_every_plan_file_lexes_alike(reference, path):
    same(reference, path.read_text(encoding="utf-8"))


@pytest.mark.parametrize("row", ERRORS, ids=lambda r: r[0])
def test_every_syntax_error_is_worded_alike(reference, row):
    same(reference, row[1])


SAMPLE_LINES = [line for p in PLANS for line in p.read_text(encoding="utf-8").splitlines()]
TOKENS = ["burn", "coast", "at", "periapsis", "apoapsis", "to", "ascending", "node", "rev",
          "craft", "engine", "{", "}", ":", ",", "relay", "km", "m/s", "%", "apoapsisx",
          "35786", "-1.5", ".5", "1e3", '"a title"', '"open', "# note", "@", ")", ";",
          "\u2212", "\t", "  ", "\r", "\n", "\r\n", "via", "using", "within", "at least"]


@settings(max_examples=300, deadline=None)
@given(plan=st.sampled_from(PLANS), data=st.data())
def test_a_sample_with_one_token_changed_lexes_alike(reference, plan, data):
    text = plan.read_text(encoding="utf-8")
    spots = [m.span() for m in re.finditer(r"\S+|\n", text)]
    a, b = data.draw(st.sampled_from(spots))
    how = data.draw(st.sampled_from(["replace", "insert", "remove"]))
    new = data.draw(st.sampled_from(TOKENS))
    if how == "replace":
        text = text[:a] + new + text[b:]
    elif how == "insert":
        text = text[:a] + new + " " + text[a:]
    else:
        text = text[:a] + text[b:]
    same(reference, text)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(TOKENS + SAMPLE_LINES[:60]), max_size=25),
       st.lists(st.sampled_from([" ", "", "\n", "  "]), min_size=25, max_size=25))
def test_token_soup_lexes_alike(reference, words, gaps):
    same(reference, "".join(w + g for w, g in zip(words, gaps)))


def test_a_user_callback_on_a_word_terminal_is_refused():
    from apsidal.lang.lexer import OneScanLexer

    with pytest.raises(ValueError, match="keywords spell"):
        Lark('start: "go" WORD\nWORD: /[a-z]+/\n%ignore " "', parser="lalr",
             lexer_callbacks={"WORD": lambda t: t}, _plugins={"ContextualLexer": OneScanLexer})


def test_a_plan_that_parses_never_needs_lark_s_own_lexer():
    from apsidal.lang.lexer import OneScanLexer

    parser = Lark(parse_module.GRAMMAR.read_text(encoding="utf-8"), parser="lalr",
                  lexer="contextual", maybe_placeholders=True,
                  postlex=parse_module._WordsEverywhere(),
                  _plugins={"ContextualLexer": OneScanLexer})
    for path in PLANS:
        parser.parse(parse_module._terminated(path.read_text(encoding="utf-8")))
    assert parser.parser.lexer.lexer._contextual is None  # the per-state lexers: never built
