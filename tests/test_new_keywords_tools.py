"""The editor, review and hand-off tools on a plan that uses every statement merged at
once (`gravity j2`, `drift at most`, `burns finite`, `steering`, `sun-synchronous`,
`epoch`, `leg`, `trade`): `fmt` keeps it stable and priced the same, the language server
diagnoses, hovers and completes it, `check --format sarif` writes valid SARIF 2.1.0 for
it (schema: OASIS, tests/test_sarif.py), and the mistakes of the new settings reach the
editor at their place.  A scenario of our own."""

from __future__ import annotations

import pytest
from apsidal.compiler import lsp
from test_format import assert_same_plan
from test_sarif import assert_valid, sarif, validator  # noqa: F401 (a fixture)

EVERYTHING = """\
# every statement merged today, in one plan
plan "All models"
around earth
gravity j2
drift at most 60 d
burns finite
steering inertial
craft kestrel {
    dry 1350 kg
    propellant 7000 kg
    engine main isp 324 s thrust 220 kN
    engine rcs isp 225 s thrust 90 N
}
margin 3 %
epoch 2027-03-01T00:00:00.5 TDB
start circular 700 km inclination sun-synchronous raan 22.5 deg
coast wait for 2 d
burn turn at crossing: raan to 20 deg
burn depart at periapsis: vinf to leg
coast outbound for 3 d
leg cruise to venus
start orbit periapsis 350 km inclination 88 deg anomaly -60 deg
coast approach to periapsis
burn capture at periapsis: period to 24 h
trade engine-size: vary main.thrust 150..250 kN points 3
trade spread: disperse main.isp 1 s, samples 50, seed 3
"""


def line_of(text: str, start: str) -> int:
    return next(i for i, ln in enumerate(text.splitlines()) if ln.startswith(start))


def test_fmt_of_every_new_statement_is_stable_and_prices_the_same():
    once = assert_same_plan(EVERYTHING)
    for word in ("gravity j2", "drift at most 60 d", "burns finite", "steering inertial",
                 "sun-synchronous", "epoch 2027-03-01T00:00:00.5 TDB", "leg cruise to venus",
                 "trade engine-size:", "trade spread:"):
        assert word in once


def test_the_language_server_reads_every_new_statement():
    assert lsp.diagnose(EVERYTHING) == []
    burn = lsp.hover(EVERYTHING, line_of(EVERYTHING, "burn depart"), 3)
    assert "**burn depart**" in burn and "gravity loss" in burn and "thrust arc" in burn
    leg = lsp.hover(EVERYTHING, line_of(EVERYTHING, "leg cruise"), 2)
    assert "**leg cruise** (to Venus)" in leg
    words = {label for label, _ in lsp.completions(EVERYTHING, 2, 0)}
    assert {"gravity", "burns", "steering", "drift", "sun-synchronous", "leg", "trade",
            "epoch"} <= words
    for setting, choices in (("burns", {"impulsive", "finite"}),
                             ("steering", {"velocity", "inertial"}),
                             ("gravity", {"point-mass", "j2"})):
        text = EVERYTHING + f"{setting} "
        got = lsp.completions(text, len(text.splitlines()) - 1, len(setting) + 1)
        assert {label for label, _ in got} == choices


@pytest.mark.parametrize(("old", "new", "line", "words"), [
    ("burns finite\n", "", "steering inertial", "prices its burns impulsive"),
    ("gravity j2\n", "", "drift at most", "point-mass model"),
    ("2027-03-01T00:00:00.5", "2027-02-30T00:00:00", "epoch", "is not a date"),
])
def test_a_mistake_in_a_new_setting_reaches_the_editor_at_its_place(old, new, line, words):
    text = EVERYTHING.replace(old, new, 1)
    (d,) = lsp.diagnose(text)
    assert d.severity == 1 and words in d.message
    assert d.start[0] == line_of(text, line)


def test_check_of_every_new_statement_is_valid_sarif(tmp_path, validator, capsys):  # noqa: F811
    path = tmp_path / "all.aps"
    path.write_text(EVERYTHING)
    code, log = sarif(capsys, path)
    assert code in (0, 1)
    assert_valid(validator, log)


def test_report_and_plot_of_every_new_statement(tmp_path):
    """The one-file report of a plan flown finite, under J2 and across a leg holds every
    step and the caution naming both models; each picture of it is written."""
    import html
    import json

    from test_report import cli, external_references, report_page, structure

    path = tmp_path / "all.aps"
    path.write_text(EVERYTHING)
    code, out, _ = cli("run", str(path), "--format", "json")
    run = json.loads(out)
    status, page = report_page(tmp_path, path)
    assert status == code == 0 and external_references(page) == []
    s = structure(page)
    assert s.errors == [] and s.stack == []
    text = html.unescape("".join(s.text))
    assert all(step["name"] in text for step in run["steps"])
    assert run["caution"] in text and "J2 drift" in run["caution"]
    assert "constant thrust" in run["caution"]
    for kind in ("chain", "waterfall", "mass"):
        picture = tmp_path / f"{kind}.svg"
        assert cli("plot", str(path), "--kind", kind, "-o", str(picture))[0] == 0
        assert picture.stat().st_size > 0


def test_the_new_rules_reach_the_editor_with_their_fix():
    """`finite-burn` as the plan is typed; `drift-node-change` on save, with its proven
    rewrite as a quick fix."""
    finite = EVERYTHING.replace("burn capture at periapsis: period to 24 h",
                                "burn capture at periapsis: circular")
    found = [d for d in lsp.diagnose(finite) if d.code == "finite-burn"]
    assert found and found[0].start[0] == line_of(finite, "burn capture")
    drift = """\
around earth
gravity j2
drift at most 120 d
craft c {
    dry 200 kg
    propellant 1000 kg
    engine main isp 228 s thrust 2200 N
}
start circular 600 km inclination 53 deg raan 120 deg
burn turn at crossing: raan to 110 deg
"""
    found = [d for d in lsp.diagnose(drift, full=True) if d.code == "drift-node-change"]
    assert found and found[0].start[0] == line_of(drift, "burn turn") and found[0].fix
    assert lsp.quick_fixes(drift, found[0].start, found[0].end)


def test_the_node_column_wraps_a_node_a_hair_below_360_deg(tmp_path, capsys, monkeypatch):
    """The arrival at Venus starts at raan 0; after the capture the node is 359.99998
    deg, which four figures round to 360: the table shows 0, as every report wraps it."""
    from apsidal.compiler.cli import main

    monkeypatch.setenv("COLUMNS", "120")
    path = tmp_path / "all.aps"
    path.write_text(EVERYTHING)
    assert main(["run", str(path), "--format", "json"]) == 0
    import json

    raan = json.loads(capsys.readouterr().out)["steps"][-1]["orbit_after"]["raan_deg"]
    assert 359.999 < raan < 360.0
    assert main(["run", str(path)]) == 0
    table = capsys.readouterr().out
    row = next(ln for ln in table.splitlines() if ln.lstrip().startswith("7 "))
    assert "raan" in table and "360.0" not in row and row.split()[-4] == "0"


def test_check_of_a_plan_that_cannot_be_flown_names_its_models(tmp_path, capsys):
    """A plan that reads but stops (a finite plane turn no length reaches) is not checked;
    the caution still names the models it says it is priced under."""
    import json

    from apsidal.compiler.cli import main

    text = EVERYTHING.replace("engine main isp 324 s thrust 220 kN",
                              "engine main isp 324 s thrust 2 N")
    path = tmp_path / "all.aps"
    path.write_text(text)
    assert main(["check", str(path), "--format", "json"]) == 2
    doc = json.loads(capsys.readouterr().out)
    assert doc["plans"][0]["error"]["line"] == line_of(text, "burn turn") + 1
    assert "J2 drift" in doc["caution"] and "constant thrust" in doc["caution"]


def test_hover_on_a_model_setting_an_epoch_and_a_trade_says_what_it_is():
    said = {start: lsp.hover(EVERYTHING, line_of(EVERYTHING, start), 1)
            for start in ("gravity", "burns", "steering", "epoch", "trade engine-size")}
    assert said["gravity"].startswith("**gravity j2**: `point-mass` or `j2`")
    assert said["burns"].startswith("**burns finite**: `impulsive` or `finite`")
    assert said["steering"].startswith("**steering inertial**: `velocity` or `inertial`")
    assert "`apsidal export`" in said["epoch"]
    assert "apsidal sweep PLAN --trade engine-size" in said["trade engine-size"]
    assert lsp.hover(EVERYTHING, line_of(EVERYTHING, "margin"), 1) is None
