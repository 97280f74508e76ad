"""The plan language's lexer: lark's contextual lexer, reading every token with one
regular expression.

lark's contextual lexer keeps one lexer per parser state, each matching only the
terminals that state accepts (plus WORD and the ignored ones, see parse.py), and builds
each state's regular expressions the first time the state is met: a plan of twenty lines
meets some thirty states and compiled some sixty expressions, about 5 ms of every run,
and creating the lexers of all the grammar's states at load cost about 3 ms more.

``OneScanLexer`` gives the same tokens from the one expression of all the terminals.
Where that expression reads a terminal the state accepts, the state's own expression
reads the same text as the same terminal: its alternatives are a subset of the whole,
in the same order, and none before it matched.  A keyword the state does not accept is
read as the word it is, as the state's lexer reads it.  Anything else (a terminal the
state does not accept, text no terminal matches) is where lark's contextual lexer words
its error, so the rest of the text is handed to one, built then, and lark says what it
always said.
"""

from __future__ import annotations

from copy import copy

from lark.exceptions import UnexpectedCharacters
from lark.lexer import BasicLexer, ContextualLexer, Lexer, PatternRE, PatternStr


class OneScanLexer(Lexer):
    """A drop-in for lark's ``ContextualLexer`` (same arguments, same tokens, same errors);
    installed with ``Lark(..., _plugins={"ContextualLexer": OneScanLexer})``."""

    def __init__(self, conf, states, always_accept=()) -> None:
        self._args = (conf, states, always_accept)
        self._states = states
        self._extra = frozenset(conf.ignore) | frozenset(always_accept)
        self._ignore = frozenset(conf.ignore)
        self._allowed: dict[int, frozenset[str]] = {}
        self._contextual: ContextualLexer | None = None
        # A keyword is read by the word terminal that spells it and retyped where the state
        # accepts it, as lark's own "unless" callback does, by a look-up instead of a second
        # expression of all keywords (about 1 ms to compile).
        self._spelled = _spellings(conf)
        if {word for word, _ in self._spelled} & set(conf.callbacks):
            raise ValueError("OneScanLexer: no lexer callback on a terminal keywords spell")
        keywords = set(self._spelled.values())
        scan = copy(conf)
        scan.terminals = [t for t in conf.terminals if t.name not in keywords]
        self.root = BasicLexer(scan)

    def _accepts(self, state: int) -> frozenset[str]:
        allowed = self._allowed.get(state)
        if allowed is None:
            allowed = self._allowed[state] = frozenset(self._states[state]) | self._extra
        return allowed

    def _next_kind(self, text, pos: int) -> str | None:
        """The terminal the next token after any ignored ones is read as, without
        consuming anything; None where no terminal matches (the end, or an error)."""
        while True:
            found = self.root.match(text, pos)
            if found is None:
                return None
            value, kind = found
            if kind not in self._ignore:
                return kind
            pos += len(value)

    def lex(self, lexer_state, parser_state):
        root = self.root
        while True:
            allowed = self._accepts(parser_state.position)
            kind = self._next_kind(lexer_state.text, lexer_state.line_ctr.char_pos)
            if kind is None:
                try:
                    root.next_token(lexer_state, parser_state)
                except EOFError:
                    return
                except UnexpectedCharacters:
                    break  # no terminal matches here: the contextual lexer says so
                raise AssertionError("the scanner matched a token it had not found")
            if kind not in allowed:
                break  # a terminal this state does not accept: the error is lark's
            token = root.next_token(lexer_state, parser_state)
            keyword = self._spelled.get((kind, token.value))
            if keyword in allowed:  # else a keyword this state does not take reads as a word
                token.type = keyword
            yield token
        if self._contextual is None:
            self._contextual = ContextualLexer(*self._args)
        yield from self._contextual.lex(lexer_state, parser_state)


def _spellings(conf) -> dict[tuple[str, str], str]:
    """The keywords a regular-expression terminal also reads, as lark's rule finds them
    (same priority, the keyword's text matched whole): ``{(terminal, text): keyword}``."""
    out = {}
    for word in conf.terminals:
        if not isinstance(word.pattern, PatternRE):
            continue
        match = conf.re_module.compile(word.pattern.to_regexp(), conf.g_regex_flags).match
        for t in conf.terminals:
            if isinstance(t.pattern, PatternStr) and t.priority == word.priority:
                text = t.pattern.value
                m = match(text)
                if m and m.group(0) == text:
                    if t.pattern.flags:
                        raise ValueError(f"OneScanLexer: keyword {text!r} has flags")
                    out[(word.name, text)] = t.name
    return out
