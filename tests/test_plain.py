"""The plain writer of a run's screen writes what rich writes to a pipe, character for
character, or declines (None) and leaves the screen to rich.

Each check renders the same pieces both ways: rich on a console that is not a terminal
(as ``cliutil.console`` makes for a pipe) and ``plain.text``.
"""

from __future__ import annotations

import io
import os
import subprocess
import sys
from pathlib import Path

import pytest
from apsidal.compiler import plain, render
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main, self_consistency
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load, load_text
from hypothesis import given, settings
from hypothesis import strategies as st
from rich.console import Console
from test_screens import TINY, long_plan

SAMPLES = sorted((Path(__file__).parent.parent / "samples").glob("*.aps"))
WIDTHS = (40, 60, 79, 80, 81, 100, 120, 200)

# A plan whose expectation fails, whose burns are too long, and whose title wraps.
FAILING = """plan "Expectation that fails, with a long title to see the sentences wrap at any width"
around earth
craft c { dry 100 kg propellant 500 kg engine m isp 300 s thrust 1 N }
start circular 400 km inclination 28 deg
burn raise at periapsis: apoapsis to 35786 km
burn circ at apoapsis: circular, inclination to 0 deg
expect circular 35000 km within 1 km, inclination 0 deg within 0.01 deg
coast c1 for 30 d
"""


def rich_text(pieces_of, width: int) -> str:
    buf = io.StringIO()
    con = Console(file=buf, highlight=False, soft_wrap=False, width=width)
    pieces_of(con)
    return buf.getvalue()


def full_report(program) -> dict:
    result = run(program)
    rep = budget(result)
    rep["findings"] = [f.as_dict() for f in self_consistency(program, result)]
    return rep


def reports():
    out = [(p.stem, full_report(load(str(p)))) for p in SAMPLES]
    out += [(name, full_report(load_text(text, f"{name}.aps")))
            for name, text in (("200 steps", long_plan()), ("tiny", TINY),
                               ("failing", FAILING))]
    return out


@pytest.fixture(scope="module", params=reports(), ids=lambda r: r[0])
def report(request):
    return request.param[1]


@pytest.mark.parametrize("columns", [None, "all", "dv,orbit"])
@pytest.mark.parametrize("width", WIDTHS)
def test_the_plain_screen_is_rich_s_screen(report, width, columns):
    ours = plain.text(render.screen(report, columns), width)
    theirs = rich_text(lambda con: render.table(report, con, columns), width)
    if ours is not None:
        assert ours == theirs
    else:  # declined only where rich squeezes a table too wide for the line
        cols, keep_all = render.pick_columns(columns)
        *_, need = render.layout(cols, report["steps"], width, keep_all)
        assert need > width and not keep_all


@pytest.mark.parametrize("width", [80, 100, 120])
def test_every_sample_is_written_plain_at_the_screens_widths(width):
    for sample in SAMPLES:
        rep = full_report(load(str(sample)))
        assert plain.text(render.screen(rep), width) is not None, sample.name


# Text of every kind the writer meets or must decline: words, blanks, punctuation, the
# delta, markup brackets, colons (emoji codes), a wide character, a tab and a newline.
TEXT = st.lists(st.sampled_from([*"ab xyz  ,.-:[]/Δ月\t\n0123456789", "mm", "ok", "rocket"]),
                max_size=60).map("".join)


@settings(max_examples=300, deadline=None)
@given(kind=st.sampled_from(["line", "markup", "text", "mark", "indented"]), s=TEXT,
       width=st.integers(8, 90), passed=st.booleans())
def test_any_text_is_written_as_rich_writes_it_or_declined(kind, s, width, passed):
    piece = {"line": ("line", s, "bold", False), "markup": ("line", s, "bold", True),
             "text": ("text", s), "mark": ("mark", passed, s),
             "indented": ("indented", s)}[kind]
    ours = plain.text([piece], width)
    if ours is None:
        return
    from rich.padding import Padding
    from rich.text import Text

    def write(con):
        if kind in ("line", "markup"):
            con.print(s, style="bold", highlight=False, markup=kind == "markup")
        elif kind == "text":
            con.print(Text(s), highlight=False)
        elif kind == "mark":
            con.print(Text.assemble("  ", Text("pass" if passed else "FAIL"), s))
        else:
            con.print(Padding(Text(s), (0, 0, 0, 2)), highlight=False)
    assert ours == rich_text(write, width)


@settings(max_examples=200, deadline=None)
@given(words=st.lists(st.text(st.sampled_from(list("abc,.-/")), min_size=1, max_size=12),
                      max_size=30), width=st.integers(12, 90))
def test_plain_words_shorter_than_the_line_are_never_declined(words, width):
    assert plain.text([("text", " ".join(words))], width) is not None


def test_declined_where_rich_would_change_the_text():
    for piece in (("line", "Go :rocket:", None, False), ("line", "[bold]x", None, True),
                  ("text", "tab\there"), ("text", "two\nlines"), ("text", "月"),
                  ("text", "a" * 30)):
        assert plain.text([piece], 20) is None, piece
    assert plain.text([("line", "[bold]x", None, False)], 20) == "[bold]x\n"


def test_emoji_names_taken_for_plain_are_not_emoji():
    from rich._emoji_codes import EMOJI

    names = [str(n) for n in range(100)] + [f"{n:02d}" for n in range(10)] + ["mm"]
    assert all(plain._NOT_EMOJI.fullmatch(n) for n in names)
    assert not [n for n in names if n in EMOJI]


def test_only_a_stream_rich_would_write_plain(monkeypatch):
    class Terminal(io.StringIO):
        def isatty(self):
            return True

    monkeypatch.delenv("FORCE_COLOR", raising=False)
    monkeypatch.delenv("TTY_COMPATIBLE", raising=False)
    assert plain.applies(io.StringIO())
    assert not plain.applies(Terminal())
    monkeypatch.setenv("FORCE_COLOR", "1")
    assert not plain.applies(io.StringIO())
    monkeypatch.delenv("FORCE_COLOR")
    monkeypatch.setenv("TTY_COMPATIBLE", "1")
    assert not plain.applies(io.StringIO())


def test_run_writes_the_same_screen_either_way(capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "100")
    for sample in SAMPLES:
        assert main(["run", str(sample)]) == 0
        piped = capsys.readouterr().out
        rep = full_report(load(str(sample)))
        assert piped == rich_text(lambda con, rep=rep: render.table(rep, con), 100)


def test_run_to_a_pipe_loads_no_rich_console():
    code = ("import sys; from apsidal.compiler.cli import main; main(['run', sys.argv[1]]); "
            "print(sorted(m for m in sys.modules if m.startswith(('rich.console', "
            "'rich.table', 'rich.text'))), file=sys.stderr)")
    env = {k: v for k, v in os.environ.items() if k not in ("FORCE_COLOR", "TTY_COMPATIBLE")}
    done = subprocess.run([sys.executable, "-c", code, str(SAMPLES[0])], capture_output=True,
                          text=True, env={**env, "COLUMNS": "100"}, check=True)
    assert done.stderr.strip() == "[]"
    assert done.stdout.startswith("Delta-v budget: ")
