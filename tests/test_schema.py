"""Every JSON output of run, check and diff against the contract in docs/schema/.

The schemas allow keys they do not name (new fields are added, none renamed), so these
tests fail on a key renamed or dropped, a type changed, or a NaN that slipped through.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from apsidal.compiler.cli import main
from hypothesis import HealthCheck, given, settings
from jsonschema import Draft202012Validator
from plangen import plan_texts
from referencing import Registry, Resource
from test_check_cli import BROKEN
from test_screens import long_plan

ROOT = Path(__file__).resolve().parent.parent
SCHEMAS = {p.name: json.loads(p.read_text()) for p in (ROOT / "docs" / "schema").glob("*.json")}
REGISTRY = Registry().with_resources(
    (name, Resource.from_contents(s)) for name, s in SCHEMAS.items())
SAMPLES = sorted((ROOT / "samples").glob("*.aps"))


def validate(kind: str, text: str) -> dict:
    doc = json.loads(text, parse_constant=lambda c: pytest.fail(f"{c} in JSON"))
    schema = SCHEMAS[f"{kind}.schema.json"]
    Draft202012Validator.check_schema(schema)
    Draft202012Validator(schema, registry=REGISTRY).validate(doc)
    return doc


def out_of(capsys, *argv) -> str:
    main([str(a) for a in argv])
    return capsys.readouterr().out


@pytest.mark.parametrize("sample", SAMPLES, ids=lambda p: p.stem)
def test_run_check_of_every_sample(capsys, sample):
    validate("run", out_of(capsys, "run", sample, "--format", "json"))
    validate("check", out_of(capsys, "check", sample, "--format", "json"))


def test_run_of_a_plan_that_stops_and_of_a_long_plan(capsys, tmp_path):
    starved = tmp_path / "starved.aps"
    starved.write_text(long_plan(40).replace("propellant 90000 kg", "propellant 30 kg"))
    doc = validate("run", out_of(capsys, "run", starved, "--format", "json"))
    assert doc["feasible"] is False and len(doc["steps"]) == 40  # priced in full
    long = tmp_path / "long.aps"
    long.write_text(long_plan())
    assert len(validate("run", out_of(capsys, "run", long, "--format", "json"))["steps"]) == 200


def test_check_with_a_plan_that_does_not_parse(capsys, tmp_path):
    bad = tmp_path / "bad.aps"
    bad.write_text(BROKEN)
    doc = validate("check", out_of(capsys, "check", SAMPLES[0], bad, "--format", "json"))
    assert "error" in doc["plans"][1]


def test_diff_both_sides_and_one_sided(capsys, tmp_path):
    old, new, bad = tmp_path / "old.aps", tmp_path / "new.aps", tmp_path / "bad.aps"
    text = (ROOT / "samples" / "mars-capture.aps").read_text()
    old.write_text(text)
    new.write_text(text.replace("margin 4 %", "margin 6 %"))
    bad.write_text(BROKEN)
    doc = validate("diff", out_of(capsys, "diff", old, new, "--format", "json"))
    assert doc["change"]["dv_with_margin_m_s"] > 0
    doc = validate("diff", out_of(capsys, "diff", bad, new, "--format", "json", "--no-findings"))
    assert doc["error"]["side"] == "old"


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(text=plan_texts())
def test_run_of_generated_plans(capsys, tmp_path, text):
    path = tmp_path / "gen.aps"
    path.write_text(text)
    validate("run", out_of(capsys, "run", path, "--format", "json"))


def test_diff_csv_loads_in_a_strict_reader(capsys, tmp_path):
    import csv
    import io

    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    text = (ROOT / "samples" / "mars-capture.aps").read_text()
    old.write_text(text)
    new.write_text(text.replace("margin 4 %", "margin 6 %"))
    doc = json.loads(out_of(capsys, "diff", old, new, "--format", "json", "--no-findings"))
    rows = list(csv.DictReader(io.StringIO(
        out_of(capsys, "diff", old, new, "--format", "csv", "--no-findings")), strict=True))
    assert all(None not in r for r in rows) and rows[-1]["record"] == "caution"
    total = next(r for r in rows if r["record"] == "total"
                 and r["quantity"] == "dv_with_margin_m_s")
    assert float(total["change"]) == pytest.approx(doc["change"]["dv_with_margin_m_s"])
    steps = {r["name"] for r in rows if r["record"] == "step"}
    assert steps == {e["name"] for e in doc["steps"]}
