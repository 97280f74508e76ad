"""What a terminal shows: the budget table at 80, 100 and 120 columns, one step a line.

Rendered with rich's ``Console(width=...)`` as a terminal of that width would; a row that
wrapped would show as more table lines than steps, or a line past the width.
"""

from __future__ import annotations

import io
from pathlib import Path

import pytest
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load, load_text
from apsidal.compiler.render import STEP_COLUMNS, fit, table
from rich.console import Console

SAMPLES = sorted((Path(__file__).parent.parent / "samples").glob("*.aps"))


def long_plan(n: int = 200) -> str:
    """A plan of ``n`` steps with long names: raise the apoapsis in small steps from
    periapsis, a coast of one revolution after each."""
    lines = ['plan "Two hundred steps"', "around earth",
             "craft hauler {", "    dry 2000 kg", "    propellant 90000 kg",
             "    engine main isp 320 s thrust 22 kN", "}", "start circular 400 km"]
    for k in range(n // 2):
        lines.append(f"burn adjust-apoapsis-{k:03d} at periapsis: "
                     f"apoapsis to {450 + 10 * k} km")
        lines.append(f"coast settle-{k:03d} 1 rev")
    return "\n".join(lines) + "\n"


def screen(report: dict, width: int, columns: str | None = None) -> str:
    buf = io.StringIO()
    table(report, Console(file=buf, width=width, color_system=None, highlight=False),
          columns)
    return buf.getvalue()


def table_rows(text: str, report: dict) -> list[str]:
    """The table's body lines: from the rule under the headings to the first blank line."""
    lines = text.splitlines()
    start = next(i for i, ln in enumerate(lines) if set(ln.strip()) == {"─"}) + 1
    end = next(i for i in range(start, len(lines)) if not lines[i].strip()
               or lines[i].startswith("total delta-v"))
    return lines[start:end]


def reports():
    out = [(p.stem, budget(run(load(str(p))))) for p in SAMPLES]
    out.append(("200 steps", budget(run(load_text(long_plan(), "long.aps")))))
    for name, rep in out:
        assert "error" not in rep, name  # every plan here flies to its end
    return out


@pytest.fixture(scope="module", params=reports(), ids=lambda r: r[0])
def report(request):
    return request.param[1]


@pytest.mark.parametrize("width", [80, 100, 120])
def test_one_step_a_line_within_the_width(report, width):
    text = screen(report, width)
    rows = table_rows(text, report)
    assert len(rows) == len(report["steps"])
    for row, step in zip(rows, report["steps"]):
        assert len(row) <= width
        assert row.split()[0] == str(step["index"]) and step["name"] in row
        assert "…" not in row
    for line in text.splitlines():
        assert len(line) <= width, line


def test_at_100_columns_the_money_columns_stay(report):
    rows = table_rows(screen(report, 100), report)
    head = screen(report, 100)
    for heading in ("Δv", "propellant", "orbit after"):
        assert heading in head
    burn = next(s for s in report["steps"] if s["kind"] == "burn")
    row = rows[burn["index"] - 1]
    from apsidal.compiler.textfmt import sig

    assert sig(burn["dv_m_s"]) in row and sig(burn["propellant_kg"]) in row


def test_columns_give_way_by_priority(report):
    kept = {}
    for width in (80, 100, 120, 200):
        con = Console(file=io.StringIO(), width=width)
        t, need = fit(con, None, STEP_COLUMNS, report["steps"])
        kept[width] = [c.header for c in t.columns]
        assert need <= width or all(
            c.priority == 0 for c in STEP_COLUMNS if c.heading in kept[width])
    for narrow, wide in ((80, 100), (100, 120), (120, 200)):
        assert set(kept[narrow]) <= set(kept[wide])
    never = [c.heading for c in STEP_COLUMNS if c.priority == 0]
    assert all(h in kept[80] for h in never)


def test_columns_all_shows_every_column_unwrapped(report):
    text = screen(report, 80, "all")
    rows = table_rows(text, report)
    assert len(rows) == len(report["steps"])
    for c in STEP_COLUMNS:
        assert c.heading.split()[0] in text


def test_columns_by_name(capsys):
    assert main(["run", str(SAMPLES[0].parent / "lunar-polar.aps"), "--columns", "dv,propellant"]) == 0
    out = capsys.readouterr().out
    assert "Δv" in out and "propellant" in out and "mass after" not in out.replace("\n", " ") and "polar/1" in out
    assert main(["run", str(SAMPLES[0].parent / "lunar-polar.aps"), "--columns", "dv,fuel"]) == 2
    assert "no column `fuel`" in capsys.readouterr().err


# --- numbers to significant digits ------------------------------------------------------

TINY = """plan "Pebble survey"
body pebble {
    gm 2e-9 km3/s2
    radius 0.25 km
}
around pebble
craft mite {
    dry 1 kg
    propellant 2 kg
    engine puff isp 70 s thrust 50 mN
}
start circular 1 km
burn nudge at periapsis: apoapsis to 1.5 km
burn settle at apoapsis: periapsis to 1.5 km
"""


def test_tiny_body_and_huge_mass_read_to_significant_digits():
    # an invented rubble-pile-sized body; then a 1e30 kg craft that only coasts and drops
    import re

    from apsidal.compiler.render import markdown
    from apsidal.compiler.textfmt import sig

    rep = budget(run(load_text(TINY, "tiny.aps")))
    assert "error" not in rep
    text = screen(rep, 100)
    for s in rep["steps"]:
        assert 0 < s["dv_m_s"] < 0.01
        assert sig(s["dv_m_s"]) in text and sig(s["dv_m_s"]) not in ("0", "0.0")
    huge = budget(run(load_text(TINY.replace("dry 1 kg", "dry 1e30 kg").split("burn")[0]
                                + "coast wait 1 rev\ndrop probe 1 kg\n", "huge.aps")))
    assert "error" not in huge
    huge_text = screen(huge, 100)
    assert "1.000e30" in huge_text
    for out in (text, markdown(rep), huge_text, markdown(huge)):
        assert not re.search(r"\d{13,}", out.replace(",", ""))  # no 31-digit integers
        assert "0.0 m/s" not in out


def test_markdown_table_uses_one_number_style():
    import re

    from apsidal.compiler.render import markdown

    rep = budget(run(load(str(SAMPLES[1]))))
    rows = [ln for ln in markdown(rep).splitlines() if ln.startswith("| ") and "`" in ln]
    for row in rows:
        for number in re.findall(r"(?<![\w.])\d[\d,]*\.?\d*", row):
            digits = number.replace(",", "").replace(".", "").lstrip("0")
            if "." in number:
                assert len(digits) <= 4, (number, row)  # four significant digits


def test_json_has_no_negative_zero(capsys):
    import re

    for sample in SAMPLES:
        main(["run", str(sample), "--format", "json"])
        assert not re.search(r"-0\.0\b(?![\d])|-0(?=[,\n}])", capsys.readouterr().out)


def test_a_pipe_follows_columns_then_the_terminal_then_100(monkeypatch):
    from apsidal.compiler import cliutil

    pipe = io.StringIO()
    monkeypatch.setenv("COLUMNS", "83")
    assert cliutil.screen_width(pipe) == 83
    monkeypatch.delenv("COLUMNS")
    monkeypatch.setattr(cliutil.os, "get_terminal_size", lambda fd: (_ for _ in ()).throw(
        OSError("not a terminal")))
    assert cliutil.screen_width(pipe) == 100


def test_an_au_scale_expectation_reads_in_km_and_au():
    # 1 au = 149 597 870.7 km exactly (IAU 2012 Resolution B2)
    from apsidal.compiler.render import check_text

    c = {"kind": "apoapsis", "comparator": "within", "expected": 227_942_466.0,
         "tolerance": 149_598.0, "actual": 227_900_000.0, "unit": "km", "passed": True,
         "reason": None}
    text = check_text(c)
    assert text == ("apoapsis 227942466 km (1.5237 au) within 149598 km: "
                    "actual 227900000 km (1.52342 au)")
    assert "e+" not in text


def test_the_node_column_shows_under_j2_only(report):
    """A plan under `gravity j2` places planes by drift: its table shows the node after
    each step where the width allows; a point-mass plan's table does not."""
    text = screen(report, 120)
    head = "\n".join(text.splitlines()[:5])
    if report["gravity"] == "j2":
        assert "raan" in head
        from apsidal.compiler.textfmt import sig

        rows = table_rows(text, report)
        for row, step in zip(rows, report["steps"]):
            assert sig(step["orbit_after"]["raan_deg"]) in row.split()
    else:
        assert "raan" not in head
