"""Highlighting: the Pygments lexer for plan files (lang/highlight.py), its entry point,
and the colours apsidal prints plan text in (a terminal only; pipes stay plain)."""

from __future__ import annotations

import re
import subprocess
import sys
from importlib.metadata import entry_points
from pathlib import Path

import pytest
from apsidal.compiler.cli import main
from apsidal.lang.highlight import PlanLexer, ansi_diff, grammar_keywords, rich_diff
from apsidal.lang.parse import keywords, statement_keywords
from pygments.token import Error, Keyword, Name, Number

SAMPLES = sorted((Path(__file__).resolve().parent.parent / "samples").glob("*.aps"))
ANSI = re.compile(r"\x1b\[[0-9;]*m")


def test_keywords_are_the_grammars():
    """The lexer reads its keywords from lang/grammar.lark; the parser's keyword set (from
    lark's terminals) is the same, so the two cannot drift apart."""
    assert grammar_keywords() == keywords()
    from apsidal.lang.highlight import STATEMENTS

    assert set(STATEMENTS) == set(statement_keywords())


def test_registered_under_the_pygments_entry_point():
    from pygments.lexers import get_lexer_by_name, get_lexer_for_filename

    found = [ep for ep in entry_points(group="pygments.lexers") if ep.name == "apsidal"]
    assert found and found[0].load() is PlanLexer
    assert isinstance(get_lexer_by_name("apsidal"), PlanLexer)
    assert isinstance(get_lexer_for_filename("relay.aps"), PlanLexer)


@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_every_sample_lexes_whole_and_without_errors(path):
    text = path.read_text()
    tokens = list(PlanLexer().get_tokens(text))
    assert "".join(v for _, v in tokens) == text
    assert not [v for t, v in tokens if t in Error]
    kinds = {t for t, _ in tokens}
    assert Keyword.Declaration in kinds and Keyword.Type in kinds and Name.Function in kinds


def test_token_kinds_of_one_line():
    line = 'burn raise at next apoapsis: periapsis to 35786 km, inclination to 0 deg using main\n'
    toks = [(t, v) for t, v in PlanLexer().get_tokens(line) if v.strip()]
    assert toks[:3] == [(Keyword.Declaration, "burn"), (Name.Function, "raise"),
                        (Keyword, "at")]
    assert (Number, "35786") in toks and (Keyword.Type, "km") in toks
    assert (Name, "main") in toks
    # a name with a keyword inside it is one name, not a keyword
    assert [v for t, v in PlanLexer().get_tokens("coast apoapsis-wait for 1 h\n")
            if t is Name.Function] == ["apoapsis-wait"]
    stamp = [t for t, v in PlanLexer().get_tokens("epoch 2027-03-01T00:00:00 UTC\n")
             if v == "2027-03-01T00:00:00"]
    assert stamp and "Date" in str(stamp[0])


def test_each_keyword_lexes_as_a_keyword():
    for word in sorted(keywords()):
        toks = [t for t, v in PlanLexer().get_tokens(f"x {word} y\n") if v == word]
        assert toks and toks[0] in Keyword, word


DIFF = """--- a.aps
+++ a.aps (formatted)
@@ -1,2 +1,2 @@
 around earth
-margin   5 %
+margin 5 %
"""


def test_coloured_diffs_keep_the_text():
    coloured = ansi_diff(DIFF)
    assert ANSI.search(coloured)
    assert ANSI.sub("", coloured) == DIFF
    assert rich_diff(DIFF).plain == DIFF.rstrip("\n")


def test_pipes_stay_plain(tmp_path, capsys):
    path = tmp_path / "p.aps"
    path.write_text("around earth\ncraft c { dry 5 kg propellant 2 kg engine e isp 300 s "
                    "thrust 4 N }\nstart circular   400 km\nburn a: along 1 m/s\n")
    assert main(["fmt", "--diff", str(path)]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"--- {path}") and "+start circular 400 km" in out
    assert not ANSI.search(out)
    assert main(["fmt", "--check", str(path)]) == 1
    assert not ANSI.search(capsys.readouterr().out)


def test_run_does_not_import_pygments():
    code = ("import sys; from apsidal.compiler.cli import main; "
            f"main(['run', {str(SAMPLES[0])!r}]); "
            "print('pygments' in sys.modules, 'apsidal.lang.highlight' in sys.modules, "
            "file=sys.stderr)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120, check=False)
    assert out.stderr.strip().splitlines()[-1] == "False False"


def test_check_colours_its_rewrites_in_a_terminal_only(capsys):
    """`check`'s screen: the rewrite's plan text coloured by the lexer on a terminal, the
    same characters without escapes elsewhere."""
    import io

    from apsidal.compiler.check import check_program
    from apsidal.compiler.check_cli import table
    from apsidal.compiler.load import load_text
    from rich.console import Console

    path = SAMPLES[0].parent / "relay-geo.aps"
    program = load_text(path.read_text(), str(path))
    reports = [(str(path), program, check_program(program), None)]
    screens = {}
    for terminal in (True, False):
        out = io.StringIO()
        table(reports, Console(file=out, force_terminal=terminal, width=120, highlight=False))
        screens[terminal] = out.getvalue()
    assert ANSI.search(screens[True]) and not ANSI.search(screens[False])
    assert ANSI.sub("", screens[True]) == screens[False]
    burn = next(ln for ln in screens[True].splitlines()
                if ANSI.sub("", ln).startswith("+transfer raise"))
    assert burn.count("\x1b[") >= 6  # marker, keyword, name, numbers and units each styled
