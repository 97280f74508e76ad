"""`apsidal diff` between a plan and the same plan priced with another model (`burns
finite`, `gravity j2`): the headline says what changed besides the numbers, the JSON
carries both models (docs/schema/diff.schema.json), the CSV a row for each, and the
caution names every model either side used (budget.caution).  Scenarios of our own."""

from __future__ import annotations

import csv
import io

import pytest
from apsidal.compiler.cli import main
from test_schema import validate

BASE = """\
plan "Apogee raise"
around earth
craft petrel {
    dry 1450 kg
    propellant 2300 kg
    engine main isp 321 s thrust 445 N
}
margin 3 %
start orbit periapsis 250 km apoapsis 35786 km inclination 7 deg raan 40 deg
coast wait for 1 d
burn lift at apoapsis: periapsis to 9000 km
"""


def diff(tmp_path, capsys, old: str, new: str, fmt: str) -> str:
    (tmp_path / "old.aps").write_text(old)
    (tmp_path / "new.aps").write_text(new)
    assert main(["diff", str(tmp_path / "old.aps"), str(tmp_path / "new.aps"),
                 "--format", fmt, "--no-findings"]) == 0
    return capsys.readouterr().out


@pytest.mark.parametrize(("added", "said", "caution"), [
    ("burns finite\n", "burns impulsive -> finite; ", "constant thrust"),
    ("gravity j2\n", "gravity point-mass -> j2; ", "J2 drift"),
    ("gravity j2\nburns finite\n", "gravity point-mass -> j2; burns impulsive -> finite; ",
     "constant thrust"),
])
def test_a_change_of_model_is_in_the_headline_json_csv_and_caution(tmp_path, capsys, added,
                                                                   said, caution):
    new = BASE.replace("margin 3 %\n", "margin 3 %\n" + added)
    doc = validate("diff", diff(tmp_path, capsys, BASE, new, "json"))
    finite = "burns finite" in added
    assert doc["burns"] == {"old": "impulsive", "new": "finite" if finite else "impulsive"}
    assert doc["gravity"]["new"] == ("j2" if "gravity" in added else "point-mass")
    assert caution in doc["caution"]
    table = diff(tmp_path, capsys, BASE, new, "table")
    assert said in " ".join(table.split("\n")[:2]).replace("  ", " ")
    rows = list(csv.DictReader(io.StringIO(diff(tmp_path, capsys, BASE, new, "csv"))))
    models = {r["quantity"]: (r["old"], r["new"]) for r in rows
              if r["record"] == "total" and r["quantity"] in ("burns", "gravity")}
    assert ("burns" in models) == finite
    if finite:
        assert models["burns"] == ("impulsive", "finite")


def test_the_same_model_on_both_sides_says_nothing_of_it(tmp_path, capsys):
    plan = BASE.replace("margin 3 %\n", "margin 3 %\nburns finite\n")
    out = diff(tmp_path, capsys, plan, plan.replace("9000 km", "9100 km"), "table")
    assert "burns" not in out.split("\n")[0] and "gravity" not in out.split("\n")[0]
