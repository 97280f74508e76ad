"""The run's screen as plain text, for a pipe or a file, without loading rich.console.

Written to something that is not a terminal, rich lays the budget out in plain
characters: no colour, no bold.  This module writes those same characters from the
pieces of :func:`render.screen` (word wrapping, the table's columns and its heading
rule, the indented findings), so that `apsidal run PLAN > budget.txt` or `| less` costs
no import of rich's console, table and text machinery (about 20 ms of a 0.2 s run).

It reproduces rich only where the result is certain and says so by returning None
otherwise, and the caller then prints through rich: text outside printable ASCII and the
delta, a word longer than the line (rich folds it), a table that does not fit (rich
squeezes its columns), console markup (``[``) where rich would read it, and an emoji
code (``:name:``) other than the minutes of a duration (``05:17:28``, ``hh:mm:ss``).
``tests/test_plain.py`` compares the two writers on every sample, at many widths, and
on generated text.

>>> print(text([("line", "Caution: preliminary estimates only", None, False)], 20))
Caution: preliminary
estimates only
<BLANKLINE>
"""

from __future__ import annotations

import builtins
import os
import re
import sys

from .render import _NARROW, layout

_WORD = re.compile(r"\s*\S+\s*")  # rich's word: leading blanks only at the line's start
_EMOJI_CODE = re.compile(r"(:(\S*?)(?:(?:\-)(emoji|text))?:)")  # the codes rich replaces
# Between the colons of `05:17:28.6` and of the heading `hh:mm:ss`: no emoji has such a
# name (tests/test_plain.py checks them against rich's list).
_NOT_EMOJI = re.compile(r"\d{1,2}|mm")


def applies(stream) -> bool:
    """Whether rich would write plain characters to ``stream``: not a terminal, nothing
    in the environment making it act as one (``FORCE_COLOR``, ``TTY_COMPATIBLE``), not a
    notebook, not Windows, and an encoding that takes the table's rule (UTF-8)."""
    if sys.platform == "win32" or hasattr(builtins, "get_ipython"):
        return False
    if "FORCE_COLOR" in os.environ or "TTY_COMPATIBLE" in os.environ:
        return False
    try:
        if stream.isatty():
            return False
    except (AttributeError, ValueError, OSError):
        return False
    return (getattr(stream, "encoding", None) or "utf-8").lower().startswith("utf")


def text(pieces: list[tuple], width: int) -> str | None:
    """The characters rich writes for ``pieces`` at ``width`` columns, or None where this
    module cannot promise them."""
    if width < 8:
        return None
    out: list[str] = []
    for kind, *args in pieces:
        lines = _WRITERS[kind](width, *args)
        if lines is None:
            return None
        out += lines
    return "".join(line + "\n" for line in out)


def _plain(s: str, markup: bool = False, emoji: bool = False) -> bool:
    """Text rich prints as it stands, one cell a character."""
    if not _NARROW.fullmatch(s) or (markup and "[" in s):
        return False
    return not emoji or all(_NOT_EMOJI.fullmatch(m.group(2)) for m in _EMOJI_CODE.finditer(s))


def wrap(s: str, width: int, justify: str = "default") -> list[str] | None:
    """``s`` broken into lines of ``width`` cells as rich's word wrap breaks it, then
    justified (``left`` and ``right`` pad to the width; ``default`` leaves each line as
    it broke, a trailing blank included); None for a word longer than the line.

    >>> wrap("total delta-v 2,397 m/s", 10)
    ['total ', 'delta-v ', '2,397 m/s']
    >>> wrap("m/s", 5, "right"), wrap("kind", 6, "left")
    (['  m/s'], ['kind  '])
    """
    breaks, used = [], 0
    for m in _WORD.finditer(s):
        size = len(m.group().rstrip())
        if width - used >= size:
            used += len(m.group())
        elif size > width:
            return None
        elif used and m.start():
            breaks.append(m.start())
            used = len(m.group())
    lines = []
    for a, b in zip([0, *breaks], [*breaks, len(s)]):
        line = s[a:b]
        if len(line) > width:  # blanks past the edge go; what is left fits
            line = line[: max(width, len(line.rstrip()))]
        if justify == "right":
            line = line.rstrip().rjust(width)
        elif justify == "left":
            line = line.ljust(width)
        lines.append(line)
    return lines


def _line(width: int, s: str, style, markup: bool) -> list[str] | None:
    return wrap(s, width) if _plain(s, markup, emoji=True) else None


def _text(width: int, s: str) -> list[str] | None:
    return wrap(s, width) if _plain(s) else None


def _mark(width: int, passed: bool, s: str) -> list[str] | None:
    return _text(width, "  " + ("pass" if passed else "FAIL") + s)


def _indented(width: int, s: str) -> list[str] | None:
    lines = _text(width - 2, s)
    return None if lines is None else ["  " + line.ljust(width - 2) for line in lines]


def _blank(width: int) -> list[str]:
    return [""]


def _table(width: int, columns, records, keep_all: bool) -> list[str] | None:
    """The step table: headings wrapped in their columns and set on the bottom line, a
    rule, one line a step; each column one blank wider than its text but the last, and
    one blank between columns."""
    kept, rows, widths, need = layout(columns, records, width, keep_all)
    if need > width and not keep_all:
        return None  # rich would squeeze the columns
    texts = [c.heading for c in kept] + [cell for row in rows for cell in row]
    if not all(_plain(t, markup=True, emoji=True) for t in texts):
        return None
    heads = []
    for c, w in zip(kept, widths):
        lines = wrap(c.heading, w, "right" if c.right else "left")
        if lines is None:
            return None
        heads.append(lines)
    height = max(len(h) for h in heads)
    heads = [[" " * w] * (height - len(h)) + h for h, w in zip(heads, widths)]
    lines = [" ".join(_row(cells)) for cells in zip(*heads)]
    lines.append("─" * need)
    for row in rows:
        cells = [wrap(cell, w, "right" if c.right else "left")
                 for c, cell, w in zip(kept, row, widths)]
        if any(lines is None or len(lines) != 1 for lines in cells):
            return None
        lines.append(" ".join(_row(c[0] for c in cells)))
    return lines


def _row(cells):
    """Cells of one line, each but the last with its padding blank."""
    cells = list(cells)
    return [cell + " " for cell in cells[:-1]] + cells[-1:]


_WRITERS = {"line": _line, "table": _table, "text": _text, "mark": _mark,
            "indented": _indented, "blank": _blank}
