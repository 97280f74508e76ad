"""`apsidal run` and `apsidal bodies` end to end: every format, the JSON contract of
DESIGN.md, no NaN or infinity anywhere, the caution in every format, and totals that
add up when recomputed here from the steps and the plan's own numbers.
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
from pathlib import Path

import pytest
from apsidal.compiler.cli import main
from apsidal.compiler.textfmt import sig
from strictjson import strict_json

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
SAMPLE_FILES = sorted(SAMPLES.glob("*.aps"))
FORMATS = ("table", "json", "markdown", "csv")
G0 = 9.80665  # standard gravity, m/s^2 (CGPM 1901, exact)

CONTRACT = {
    "top": {"plan", "body", "steps", "totals", "findings"},
    "body": {"name", "gm_km3_s2", "radius_km"},
    "step": {"index", "name", "kind", "at", "dv_m_s", "dv_with_margin_m_s", "vector_m_s",
             "propellant_kg", "mass_after_kg", "duration_s", "elapsed_s", "orbit_after"},
    "vector": {"along", "cross", "radial"},
    "orbit": {"periapsis_alt_km", "apoapsis_alt_km", "sma_km", "ecc", "inclination_deg",
              "raan_deg", "argp_deg", "anomaly_deg", "period_s"},
    "totals": {"dv_m_s", "dv_with_margin_m_s", "propellant_kg", "final_mass_kg",
               "propellant_left_kg", "dv_capacity_left_m_s", "elapsed_s"},
    "finding": {"rule", "severity", "steps", "message", "saves_m_s", "saves_kg",
                "suggestion"},
}
# A number that is not one: nan, inf, infinity, with or without a sign, as a word.
NON_FINITE = re.compile(r"(?<![A-Za-z])[+-]?(nan|inf|infinity)(?![A-Za-z])", re.IGNORECASE)


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err




def flat(text: str) -> str:
    """Whitespace folded, so a wrapped line reads as one."""
    return " ".join(text.split())


def plan_numbers(path: Path) -> dict:
    """The craft's masses, the default engine's isp and the drops, read from the text."""
    text = path.read_text()
    num = lambda pattern: float(re.search(pattern, text, re.MULTILINE).group(1))
    one_store = re.search(r"^\s*propellant\s", text, re.MULTILINE)
    load = (num(r"^\s*propellant\s+([\d.]+)\s*kg") if one_store
            else num(r"^\s*fuel\s+([\d.]+)\s*kg") + num(r"^\s*oxidiser\s+([\d.]+)\s*kg"))
    share = re.search(r"^\s*residual\s+([\d.]+)\s*%", text, re.MULTILINE)
    return {
        "dry": num(r"^\s*dry\s+([\d.]+)\s*kg"),
        "propellant": load,
        "usable": load * (1 - float(share.group(1)) / 100) if share else load,
        "isp": num(r"^\s*engine\s+\S+\s+isp\s+([\d.]+)\s*s"),  # the first engine
        "drops": [float(m) for m in re.findall(r"^drop\s+\S+\s+([\d.]+)\s*kg", text, re.MULTILINE)],
    }


@pytest.fixture(params=SAMPLE_FILES, ids=lambda p: p.stem)
def sample(request) -> Path:
    return request.param


# --- every format ---------------------------------------------------------------------


@pytest.mark.parametrize("fmt", FORMATS)
def test_run_every_format_is_clean(capsys, sample, fmt):
    code, out, err = run(capsys, "run", sample, "--format", fmt)
    assert code == 0, err
    assert err == ""
    assert out.strip()
    assert "Traceback" not in out + err
    if fmt == "json":
        strict_json(out)
    else:
        assert not NON_FINITE.search(out), NON_FINITE.search(out).group(0)


def test_default_format_is_the_table(capsys, sample):
    code, out, _ = run(capsys, "run", sample)
    code_t, out_t, _ = run(capsys, "run", sample, "--format", "table")
    assert code == code_t == 0
    assert out == out_t
    assert "Delta-v budget" in out


CAUTION_WORDS = ("preliminary-design estimates", "two-body approximation",
                 "high-fidelity analysis", "flight-dynamics authority")


@pytest.mark.parametrize("fmt", ["table", "json", "markdown", "csv"])
def test_caution_in_every_format(capsys, sample, fmt):
    code, out, _ = run(capsys, "run", sample, "--format", fmt)
    assert code == 0
    text = strict_json(out)["caution"] if fmt == "json" else out
    for words in CAUTION_WORDS:
        assert words in flat(text).lower()


# --- the JSON contract -------------------------------------------------------------------


def test_json_has_the_contract_keys(capsys, sample):
    code, out, _ = run(capsys, "run", sample, "--format", "json")
    assert code == 0
    rep = strict_json(out)
    assert CONTRACT["top"] <= set(rep)
    assert CONTRACT["body"] <= set(rep["body"])
    assert CONTRACT["totals"] <= set(rep["totals"])
    assert rep["steps"]
    for i, s in enumerate(rep["steps"], start=1):
        assert CONTRACT["step"] <= set(s), CONTRACT["step"] - set(s)
        assert CONTRACT["vector"] <= set(s["vector_m_s"])
        assert CONTRACT["orbit"] <= set(s["orbit_after"])
        assert s["index"] == i
        assert s["kind"] in {"burn", "coast", "drop", "expect", "allow", "entry", "leg"}
    assert isinstance(rep["findings"], list)
    for f in rep["findings"]:
        assert CONTRACT["finding"] <= set(f)
    assert isinstance(rep["caution"], str)
    assert rep["plan"] == re.search(r'^plan "([^"]*)"', sample.read_text(), re.MULTILINE).group(1)


def test_json_numbers_are_numbers(capsys, sample):
    """Every contract number is an int or a float (null only where no value exists)."""
    rep = strict_json(run(capsys, "run", sample, "--format", "json")[1])
    numeric = lambda x: isinstance(x, (int, float)) and not isinstance(x, bool)
    for s in rep["steps"]:
        for key in CONTRACT["step"] - {"name", "kind", "at", "vector_m_s", "orbit_after"}:
            assert numeric(s[key]), (s["name"], key, s[key])
        assert all(numeric(x) for x in s["vector_m_s"].values())
        o = s["orbit_after"]
        closed = o["ecc"] < 1.0
        for key, x in o.items():
            if key in ("apoapsis_alt_km", "period_s") and not closed:
                assert x is None  # an open orbit has neither
            else:
                assert numeric(x), (s["name"], key, x)
    assert all(numeric(rep["totals"][k]) for k in CONTRACT["totals"])


# --- totals add up ----------------------------------------------------------------------


def test_totals_are_consistent(capsys, sample):
    rep = strict_json(run(capsys, "run", sample, "--format", "json")[1])
    steps, tot = rep["steps"], rep["totals"]
    given = plan_numbers(sample)
    initial = given["dry"] + given["propellant"]
    approx = lambda x: pytest.approx(x, rel=1e-9, abs=1e-5)

    assert tot["dv_m_s"] == approx(sum(s["dv_m_s"] for s in steps))
    assert tot["dv_with_margin_m_s"] == approx(sum(s["dv_with_margin_m_s"] for s in steps))
    assert tot["propellant_kg"] == approx(sum(s["propellant_kg"] for s in steps))
    assert tot["propellant_kg"] == approx(given["usable"] - tot["propellant_left_kg"])
    assert tot["final_mass_kg"] == approx(initial - tot["propellant_kg"] - sum(given["drops"]))
    assert tot["elapsed_s"] == approx(steps[-1]["elapsed_s"])
    m, left = tot["final_mass_kg"], tot.get("burnable_left_kg", tot["propellant_left_kg"])
    capacity = given["isp"] * G0 * math.log(m / (m - left))
    if "fuel_left_kg" in tot:  # two stores: what the default engine burns in its ratio
        mr = float(re.search(r"mixture ([\d.]+)", sample.read_text()).group(1))
        assert left == approx(min(tot["fuel_left_kg"], tot["oxidiser_left_kg"] / mr) * (1 + mr))
    assert tot["dv_capacity_left_m_s"] == approx(capacity)


def test_step_chain_is_consistent(capsys, sample):
    """Mass falls by each burn's propellant and each drop; time never runs backwards;
    a burn's delta-v is the length of its vector and the margin never lowers it."""
    rep = strict_json(run(capsys, "run", sample, "--format", "json")[1])
    given = plan_numbers(sample)
    mass, elapsed = given["dry"] + given["propellant"], 0.0
    drops = iter(given["drops"])
    for s in rep["steps"]:
        if s["kind"] == "drop":
            mass -= next(drops)
        mass -= s["propellant_kg"]
        assert s["mass_after_kg"] == pytest.approx(mass, abs=1e-5), s["name"]
        assert s["elapsed_s"] >= elapsed - 1e-6, s["name"]
        elapsed = s["elapsed_s"]
        v = s["vector_m_s"]
        length = math.sqrt(v["along"] ** 2 + v["cross"] ** 2 + v["radial"] ** 2)
        # an allowance has a delta-v but no direction: it does not move the orbit
        assert length == pytest.approx(0.0 if s["kind"] == "allow" else s["dv_m_s"],
                                       rel=1e-9, abs=1e-5)
        assert s["dv_with_margin_m_s"] >= s["dv_m_s"]
        if s["kind"] not in ("burn", "allow"):
            assert s["dv_m_s"] == s["propellant_kg"] == 0.0
    assert next(drops, None) is None


# --- csv, markdown and table hold the same figures ---------------------------------------


def csv_rows(text: str) -> list[list[str]]:
    """A strict reader: every line is a record, every record has the header's fields."""
    rows = list(csv.reader(io.StringIO(text), strict=True))
    assert all(len(r) == len(rows[0]) for r in rows), "ragged CSV"
    return rows


def test_csv_has_header_steps_total_checks_and_caution(capsys, sample):
    rep = strict_json(run(capsys, "run", sample, "--format", "json")[1])
    code, out, _ = run(capsys, "run", sample, "--format", "csv")
    assert code == 0
    assert not any(line.startswith("#") for line in out.splitlines())
    rows = csv_rows(out)
    header = rows[0]
    for key in ("record", "index", "name", "kind", "engine", "dv_m_s", "propellant_kg",
                "mass_after_kg", "burn_time_s", "coast_time_s", "check", "passed", "message"):
        assert key in header
    col = {k: header.index(k) for k in header}
    by = lambda kind: [r for r in rows[1:] if r[col["record"]] == kind]
    body, (total,), (caution,) = by("step"), by("total"), by("caution")
    assert len(body) == len(rep["steps"])
    for row, s in zip(body, rep["steps"]):
        assert row[col["name"]] == s["name"]
        assert float(row[col["dv_m_s"]]) == pytest.approx(s["dv_m_s"], abs=1e-6)
        assert float(row[col["mass_after_kg"]]) == pytest.approx(s["mass_after_kg"], abs=1e-6)
        assert float(row[col["burn_time_s"]]) == pytest.approx(s["burn_time_s"], abs=1e-6)
        assert float(row[col["coast_time_s"]]) == pytest.approx(s["coast_time_s"], abs=1e-6)
        assert row[col["engine"]] == s.get("engine", "")
    checks = [c for s in rep["steps"] for c in s.get("checks", [])]
    assert [r[col["passed"]] for r in by("check")] == [
        "true" if c["passed"] else "false" for c in checks]
    assert len(by("finding")) == len(rep["findings"])
    assert float(total[col["dv_m_s"]]) == pytest.approx(rep["totals"]["dv_m_s"], abs=1e-6)
    assert float(total[col["propellant_kg"]]) == pytest.approx(
        rep["totals"]["propellant_kg"], abs=1e-6)
    assert "two-body approximation" in caution[col["message"]]


def test_burn_time_and_coast_time_are_apart(capsys, sample):
    rep = strict_json(run(capsys, "run", sample, "--format", "json")[1])
    for s in rep["steps"]:
        if s["kind"] == "coast":
            assert s["burn_time_s"] == 0.0 and s["coast_time_s"] == s["duration_s"] > 0
        if s["kind"] == "burn":
            assert s["burn_time_s"] == s["duration_s"] > 0
            assert s["coast_time_s"] == s["coast_before_s"]


@pytest.mark.parametrize("fmt", ["table", "markdown"])
def test_text_formats_name_every_step_and_the_total(capsys, sample, fmt):
    rep = strict_json(run(capsys, "run", sample, "--format", "json")[1])
    code, out, _ = run(capsys, "run", sample, "--format", fmt)
    assert code == 0
    for s in rep["steps"]:
        assert s["name"] in out
    assert f"total delta-v        {sig(rep['totals']['dv_m_s'])} m/s" in out
    if fmt == "markdown":
        assert out.lstrip().startswith("## ")
        assert "|---|" in out


# --- bodies -------------------------------------------------------------------------------


def test_bodies_prints_the_catalogue(capsys):
    code, out, err = run(capsys, "bodies")
    assert code == 0
    assert err == ""
    for name in ("Sun", "Earth", "Moon", "Mars", "Jupiter", "Titan"):
        assert re.search(rf"\b{name}\b", out), name
    # published GM values, as the catalogue states them (IERS 2010 Conventions, Table 1.1)
    assert "398600.4418" in out
    assert not NON_FINITE.search(out)


# --- a plan that does not fit its load ---------------------------------------------------

STARVED = """\
plan "Short of propellant"
around earth
craft tug {
    dry 500 kg
    propellant 40 kg
    engine main isp 300 s thrust 400 N
}
start circular 400 km
burn lift at periapsis: apoapsis to 1000 km
coast wait to apoapsis
burn ring: periapsis to 1000 km
burn far at periapsis: apoapsis to 35786 km
"""


@pytest.mark.parametrize("fmt", FORMATS)
def test_a_plan_that_does_not_fit_is_priced_in_full_and_exits_1(capsys, tmp_path, fmt):
    path = tmp_path / "starved.aps"
    path.write_text(STARVED)
    code, out, err = run(capsys, "run", path, "--format", fmt)
    assert code == 1
    assert "Traceback" not in err and "does not fit its load" in err
    assert not NON_FINITE.search(out)
    # every step is on stdout, the ones the load does not cover marked as such
    if fmt == "json":
        rep = strict_json(out)
        assert [s["name"] for s in rep["steps"]] == ["lift", "wait", "ring", "far"]
        assert rep["feasible"] is False
        assert [s.get("covered") for s in rep["steps"]] == [True, None, False, False]
        tot = rep["totals"]
        assert tot["reserve_met"] is False and tot["expectations_met"] is False
        assert tot["shortfall_kg"] == pytest.approx(tot["propellant_needed_kg"]
                                                     - tot["load_kg"])
        assert all(s["dv_m_s"] > 0 for s in rep["steps"] if s["kind"] == "burn")
    elif fmt == "csv":
        rows = list(csv.DictReader(io.StringIO(out)))
        (fit,) = [r for r in rows if r["record"] == "fit"]
        assert "does not fit its load" in fit["message"]
        assert [r["covered"] for r in rows if r["record"] == "step"] == [
            "true", "", "false", "false"]
    else:
        assert "DOES NOT FIT" in out and "runs out at ring" in out
        assert re.search(r"\bring\b", out) and re.search(r"\bfar\b", out)


def test_usage_errors_exit_2_without_traceback(capsys, tmp_path):
    with pytest.raises(SystemExit) as exc:
        main(["run", str(tmp_path / "x.aps"), "--format", "yaml"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "invalid choice" in err and "Traceback" not in err
    with pytest.raises(SystemExit) as exc:
        main(["launch"])
    assert exc.value.code == 2


# --- run's own findings ---------------------------------------------------------------

CRAFT_TEXT = "around earth\ncraft c { dry 100 kg propellant 500 kg engine m isp 300 s thrust 1 N }\n"
CONSISTENCY_PLANS = [  # one plan or more for each rule `run` reports (our own scenarios)
    CRAFT_TEXT + "start circular 400 km inclination 28 deg\n"
    "burn raise at periapsis: apoapsis to 35786 km\n"
    "burn circ at apoapsis: circular, inclination to 0 deg\n"
    "expect circular 35000 km within 1 km, inclination 0 deg within 0.01 deg\n",
    CRAFT_TEXT.replace("500 kg", "5 kg") + "reserve 10 m/s\nstart circular 400 km\n"
    "burn raise at periapsis: apoapsis to 35786 km\n",
    CRAFT_TEXT + "reserve 6 km/s\nstart circular 400 km\nburn raise at periapsis: "
    "apoapsis to 1000 km\n",
    CRAFT_TEXT + "start circular 400 km\nburn out at periapsis: apoapsis to 1000000 km\n",
    CRAFT_TEXT + "start orbit periapsis 400 km vinf 3 km/s anomaly 0 deg\n"
    "coast drift for 10 d\nburn trim: along 10 m/s\n",
    ("around earth\ncraft c { dry 500 kg propellant 800 kg engine m isp 320 s thrust 400 N }\n"
    "burns finite\nstart orbit periapsis 400 km apoapsis 35786 km anomaly 180 deg\n"
    "burn circ: circular\n"),
]


@pytest.mark.parametrize("source", [p.read_text() for p in SAMPLE_FILES] + CONSISTENCY_PLANS)
def test_run_finds_what_the_checker_finds_with_its_consistency_rules(source):
    # run hands the rules a PricedPlan, not the whole Checker: the same findings
    from apsidal.compiler.check import Checker
    from apsidal.compiler.cli import self_consistency
    from apsidal.compiler.evaluate import run as evaluate
    from apsidal.compiler.load import load_text
    from apsidal.compiler.rules import CONSISTENCY

    program = load_text(source, "plan.aps")
    result = evaluate(program)
    checker = Checker(program, result)
    expected = [f for rule in CONSISTENCY if result.ok or not rule.needs_flyable
                for f in rule(checker)]
    assert self_consistency(program, result) == expected


def test_every_consistency_rule_is_met_by_a_plan_above():
    from apsidal.compiler.cli import self_consistency
    from apsidal.compiler.evaluate import run as evaluate
    from apsidal.compiler.load import load_text
    from apsidal.compiler.rules import CONSISTENCY

    seen = set()
    for source in CONSISTENCY_PLANS:
        program = load_text(source, "plan.aps")
        seen |= {f.rule for f in self_consistency(program, evaluate(program))}
    assert seen == {rule.rule_name for rule in CONSISTENCY}


def test_the_program_and_main_called_from_python_print_the_same(capsys, monkeypatch):
    # the program freezes the collector before Python's shutdown; main([...]) called from
    # Python (tests, a notebook) leaves the collector as it was
    import gc
    import subprocess
    import sys

    monkeypatch.setenv("COLUMNS", "100")
    frozen = gc.get_freeze_count()
    code, out, _ = run(capsys, "run", SAMPLE_FILES[0])
    assert gc.get_freeze_count() == frozen
    done = subprocess.run([sys.executable, "-m", "apsidal.compiler.cli", "run",
                           str(SAMPLE_FILES[0])], capture_output=True, text=True,
                          env={**os.environ, "COLUMNS": "100"}, check=False)
    assert (done.returncode, done.stdout) == (code, out)
