"""`apsidal fmt` and lang/format.py: the canonical layout, its self-proof, and the
command's --check / --write behaviour, atomic writes included.

Layout cases are data files in tests/format_cases/: the input, a marker line
``# --- formatted ---`` and the expected output; a file without the marker must already
be canonical.  Property tests run on every sample and on plans drawn by tests/plangen.py.
"""

from __future__ import annotations

import os
import stat
from collections import Counter
from dataclasses import replace
from pathlib import Path

import pytest
from apsidal.compiler import cliutil, review_cli
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.lower import lower
from apsidal.lang import format as fmt
from apsidal.lang.errors import PlanError
from apsidal.lang.format import FormatError, format_plan, format_statement, format_text
from apsidal.lang.parse import parse
from hypothesis import HealthCheck, given, settings

HERE = Path(__file__).resolve().parent
from plangen import plan_texts

CASES = sorted((HERE / "format_cases").glob("*.aps"))
SAMPLES = sorted((HERE.parent / "samples").glob("*.aps"))
MARKER = "# --- formatted ---\n"
PROPERTY = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def case(path: Path) -> tuple[str, str]:
    text = path.read_text(encoding="utf-8")
    source, marker, expected = text.partition(MARKER)
    return source, expected if marker else source


def comments(text: str) -> Counter:
    return Counter(c.text.rstrip() for c in parse(text).comments)


def priced(text: str) -> dict:
    """The budget of a plan, or its error, as data to compare."""
    try:
        report = budget(run(lower(parse(text, "plan.aps"))))
    except PlanError as err:
        return {"error": err.message}
    report.pop("source")
    return report


def assert_same_plan(text: str) -> str:
    once = format_text(text)
    assert format_text(once) == once, "formatting is not idempotent"
    assert comments(once) == comments(text), "a comment was lost or changed"
    assert priced(once) == priced(text)
    return once


# --- the layout ----------------------------------------------------------------------


@pytest.mark.parametrize("path", CASES, ids=lambda p: p.stem)
def test_layout_case(path):
    source, expected = case(path)
    assert format_text(source, path.name) == expected
    assert format_text(expected, path.name) == expected


def test_cases_have_titles():
    assert CASES, "no layout cases found"
    for path in CASES:
        assert path.read_text(encoding="utf-8").startswith("# case: "), path.name


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_samples_format_stably_and_price_the_same(path):
    assert_same_plan(path.read_text(encoding="utf-8"))


@PROPERTY
@given(plan_texts())
def test_generated_plans_parse_and_fly_to_the_end(text):
    """The generator's promise, which the other property tests lean on."""
    result = run(lower(parse(text, "gen.aps")))
    assert result.error is None, result.error.render()
    assert result.rows or not parse(text).steps()


@PROPERTY
@given(plan_texts())
def test_generated_plans_format_stably_and_price_the_same(text):
    assert_same_plan(text)


@PROPERTY
@given(plan_texts(tidy=True))
def test_generated_tidy_plans_have_no_column_surprises(text):
    out = assert_same_plan(text)
    for line in out.splitlines():
        assert line == line.rstrip(), "trailing whitespace"
        assert "\t" not in line
    assert out.endswith("\n") and not out.endswith("\n\n")


def test_empty_and_comment_only_plans():
    assert format_text("") == ""
    assert format_text("\n\n") == ""
    assert format_text("# only a note   \n\n\n# and another\n") == "# only a note\n\n# and another\n"


def test_crlf_and_missing_final_newline():
    text = "around earth\r\nmargin 5%  # note\r\nreserve 1 m/s"
    assert format_text(text) == "around earth\n\nmargin 5 %  # note\nreserve 1 m/s\n"


# --- format_statement ----------------------------------------------------------------


def test_format_statement_is_one_unpadded_line_for_steps():
    plan = parse("burn  raise at periapsis:apoapsis to 900km margin 3% using e  # c\n"
                 "transfer geo: circular 35786 km, inclination to 0 deg via apoapsis 90000 km\n"
                 "expect x circular 400 km, mass at least 1 t\n"
                 "coast for 2 h\ncoast c to ascending node\ncoast 3 rev\ndrop d 1 kg\n")
    assert [format_statement(s) for s in plan.statements] == [
        "burn raise at periapsis: apoapsis to 900 km using e margin 3 %",
        "transfer geo: circular 35786 km, inclination to 0 deg via apoapsis 90000 km",
        "expect x circular 400 km, mass at least 1 t",
        "coast for 2 h", "coast c to ascending node", "coast 3 rev", "drop d 1 kg",
    ]


def test_format_statement_blocks_are_multiline():
    plan = parse("craft c { engine e thrust 1 N isp 2 s  propellant 3 kg dry 4 kg }\n"
                 "body b { radius 5 km gm 6 km3/s2 }\nstart orbit apoapsis 9 km periapsis 8 km\n")
    craft, body, start = plan.statements
    assert format_statement(craft) == ("craft c {\n    dry 4 kg\n    propellant 3 kg\n"
                                       "    engine e isp 2 s thrust 1 N\n}")
    assert format_statement(body) == "body b {\n    gm 6 km3/s2\n    radius 5 km\n}"
    assert format_statement(start) == "start orbit periapsis 8 km apoapsis 9 km"


def test_format_statement_of_an_edited_node():
    """The check command rewrites nodes with dataclasses.replace and prints them."""
    burn = parse("burn b at periapsis: apoapsis to 900 km\n").statements[0]
    moved = replace(burn, where=replace(burn.where, kind="apoapsis"), name=None)
    assert format_statement(moved) == "burn at apoapsis: apoapsis to 900 km"


# --- the self-proof ------------------------------------------------------------------


def test_a_formatter_that_changes_meaning_is_refused(monkeypatch):
    plan = parse("around earth\nmargin 5 %\n")
    real = fmt._render
    monkeypatch.setattr(fmt, "_render", lambda p: real(p).replace("5 %", "6 %"))
    with pytest.raises(FormatError, match="same plan"):
        format_plan(plan)


def test_a_formatter_that_loses_a_comment_is_refused(monkeypatch):
    plan = parse("around earth  # keep me\n")
    monkeypatch.setattr(fmt, "_render", lambda p: "around earth\n")
    with pytest.raises(FormatError, match="comment"):
        format_plan(plan)


def test_an_unstable_formatter_is_refused(monkeypatch):
    plan = parse("around earth\n")
    calls = iter(["around earth\n", "around  earth\n"])
    monkeypatch.setattr(fmt, "_render", lambda p: next(calls))
    with pytest.raises(FormatError, match="not stable"):
        format_plan(plan)


# --- the command ---------------------------------------------------------------------

MESSY = "around   earth # where\ncraft c { dry 5 kg propellant 1 kg engine e isp 300 s thrust 1 N }\n"


def fmt_cli(capsys, *argv) -> tuple[int, str, str]:
    code = main(["fmt", *map(str, argv)])
    out, err = capsys.readouterr()
    return code, out, err


def test_fmt_prints_to_stdout_and_leaves_the_file(tmp_path, capsys):
    plan = tmp_path / "p.aps"
    plan.write_text(MESSY)
    code, out, _ = fmt_cli(capsys, plan)
    assert code == 0
    assert out == format_text(MESSY)
    assert plan.read_text() == MESSY


def test_fmt_reads_standard_input(monkeypatch, capsys):
    import io

    monkeypatch.setattr("sys.stdin", io.StringIO(MESSY))
    code, out, _ = fmt_cli(capsys, "-")
    assert (code, out) == (0, format_text(MESSY))


def test_check_exits_1_with_a_unified_diff(tmp_path, capsys):
    plan = tmp_path / "p.aps"
    plan.write_text(MESSY)
    code, out, err = fmt_cli(capsys, "--check", plan)
    assert code == 1
    assert out.startswith(f"--- {plan}\n+++ {plan} (formatted)\n@@")
    assert "-around   earth # where\n" in out and "+around earth  # where\n" in out
    assert "fmt: 1 plan not in canonical layout." in err
    assert plan.read_text() == MESSY


def test_check_passes_on_formatted_files(tmp_path, capsys):
    plan = tmp_path / "p.aps"
    plan.write_text(format_text(MESSY))
    code, out, err = fmt_cli(capsys, "--check", plan)
    assert (code, out) == (0, "")
    assert "fmt: 1 plan already canonical." in err


def test_write_rewrites_keeps_mode_and_then_checks_clean(tmp_path, capsys):
    plan = tmp_path / "p.aps"
    plan.write_text(MESSY)
    plan.chmod(0o640)
    code, _, err = fmt_cli(capsys, "--write", plan)
    assert code == 0 and f"rewrote {plan} in canonical layout" in err
    assert plan.read_text() == format_text(MESSY)
    assert stat.S_IMODE(plan.stat().st_mode) == 0o640
    assert fmt_cli(capsys, "--check", plan)[0] == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.aps"]  # no temporary left


def test_write_leaves_formatted_files_untouched(tmp_path, capsys, monkeypatch):
    plan = tmp_path / "p.aps"
    plan.write_text(format_text(MESSY))
    monkeypatch.setattr(review_cli, "write_atomic",
                        lambda *a: pytest.fail("wrote a file that was already formatted"))
    code, _, err = fmt_cli(capsys, "--write", plan)
    assert code == 0 and "fmt: 1 plan already canonical." in err


def test_check_and_write_exclude_each_other(tmp_path, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["fmt", "--check", "--write", str(tmp_path / "p.aps")])
    assert stop.value.code == 2
    assert "not allowed with" in capsys.readouterr().err


def test_a_plan_that_does_not_parse_exits_2_and_is_not_written(tmp_path, capsys):
    bad, good = tmp_path / "bad.aps", tmp_path / "good.aps"
    bad.write_text("around earth\nburn: apoapsis 5 km\n")
    good.write_text(MESSY)
    code, _, err = fmt_cli(capsys, "--write", bad, good)
    assert code == 2
    assert "bad.aps:2:" in err and "needs `to`" in err
    assert bad.read_text() == "around earth\nburn: apoapsis 5 km\n"
    assert good.read_text() == format_text(MESSY)  # the other files are still done
    assert "fmt: 1 plan rewritten in canonical layout, 1 plan could not be read or parsed." in err


def test_missing_file_is_a_clear_error(tmp_path, capsys):
    code, _, err = fmt_cli(capsys, "--check", tmp_path / "nope.aps")
    assert code == 2 and "cannot read" in err


def test_write_refuses_standard_input(capsys):
    code, _, err = fmt_cli(capsys, "--write", "-")
    assert code == 2 and "standard input" in err


def test_an_internal_error_leaves_the_file_and_exits_70(tmp_path, capsys, monkeypatch):
    plan = tmp_path / "p.aps"
    plan.write_text(MESSY)

    def broken(p):
        raise FormatError("p.aps: the formatted plan would not mean the same plan")

    monkeypatch.setattr(fmt, "format_plan", broken)
    code, _, err = fmt_cli(capsys, "--write", plan)
    assert code == 70 and "internal error" in err and "left as it is" in err
    assert plan.read_text() == MESSY


# --- atomic writes -------------------------------------------------------------------


class _HalfWrite:
    """A file object that writes half of what it is given, then fails (a full disk)."""

    def __init__(self, fh):
        self.fh = fh

    def write(self, data):
        self.fh.write(data[: len(data) // 2])
        self.fh.flush()
        raise OSError(28, "No space left on device")

    def __getattr__(self, name):
        return getattr(self.fh, name)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.fh.close()


@pytest.mark.parametrize("failure", ["mid-write", "fsync", "rename"])
def test_an_interrupted_write_leaves_the_original_intact(tmp_path, capsys, monkeypatch,
                                                         failure):
    plan = tmp_path / "p.aps"
    plan.write_text(MESSY)
    if failure == "mid-write":
        real = os.fdopen
        monkeypatch.setattr(cliutil.os, "fdopen", lambda *a, **k: _HalfWrite(real(*a, **k)))
    else:
        def fail(*args):
            raise OSError(5, "Input/output error")
        monkeypatch.setattr(cliutil.os, "fsync" if failure == "fsync" else "replace", fail)
    code, _, err = fmt_cli(capsys, "--write", plan)
    assert code == 2 and "cannot write" in err and "left as it was" in err
    assert plan.read_text() == MESSY
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.aps"]


def test_write_atomic_replaces_through_a_symlink(tmp_path):
    target = tmp_path / "real.aps"
    target.write_text("old\n")
    link = tmp_path / "link.aps"
    link.symlink_to(target)
    review_cli.write_atomic(link, "new\n")
    assert link.is_symlink() and target.read_text() == "new\n"


def test_fixed_movable_and_ceiling_survive_formatting():
    text = ("around earth\nceiling 150000 km\ncraft c {\n dry 1 t\n propellant 1 t\n"
            " engine main isp 300 s thrust 1 kN\n}\nstart circular 400 km\n"
            "burn a at node: inclination to 3 deg fixed\n"
            "burn b: along 1 m/s movable\ncoast for 2 h movable\ndrop d 5 kg movable\n"
            "expect apoapsis 400 km movable\n")
    once = format_text(text)
    assert format_text(once) == once
    for words in ("ceiling 150000 km", "inclination to 3 deg  fixed", "along 1 m/s",
                  "for 2 h", "5 kg", "apoapsis 400 km"):
        assert words in once
    assert once.count("movable") == 4 and once.count("fixed") == 1


def test_summary_words_are_our_own():
    rep = review_cli.FmtReport(changed=["a", "b"], unchanged=["c"])
    assert rep.summary(check=True) == ("fmt: 2 plans not in canonical layout, "
                                       "1 plan already canonical.")
    assert rep.summary(check=False) == ("fmt: 2 plans rewritten in canonical layout, "
                                        "1 plan already canonical.")
