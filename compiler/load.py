"""From plan text to a lowered Program: parse, then lower."""

from __future__ import annotations

from apsidal.lang.parse import parse, parse_file

from .lower import lower
from .steps import Program


def load_text(text: str, path: str = "<plan>") -> Program:
    return lower(parse(text, path))


def load(path: str) -> Program:
    """The lowered plan in ``path``; ``-`` reads standard input."""
    if path == "-":
        import sys

        return lower(parse(sys.stdin.read().removeprefix("\ufeff"), "<stdin>"))
    return lower(parse_file(path))
