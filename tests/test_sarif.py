"""`apsidal check --format sarif`: SARIF 2.1.0 for code-review tools.

Every output is validated against the published JSON schema of SARIF Version 2.1.0 (OASIS
Standard, errata 01), read from ``../shared/standards/sarif-schema-2.1.0.json`` beside the
project (a draft-04 schema: ``jsonschema.Draft4Validator``); the tests skip, saying why,
where that file is absent.  Validated: every sample, and plans that bring out the findings
of every rule (each of `apsidal explain`'s list), a plan that does not parse and one that
cannot be flown.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from apsidal.compiler.cli import main
from apsidal.compiler.rules import RULES

ROOT = Path(__file__).resolve().parent.parent
SCHEMA = ROOT.parent / "shared" / "standards" / "sarif-schema-2.1.0.json"
SAMPLES = sorted((ROOT / "samples").glob("*.aps"))

CRAFT = """around earth
craft probe {
    dry 500 kg
    propellant 20 t
    engine main isp 320 s thrust 400 kN
    engine slow isp 320 s thrust 50 N
}
"""


def plan(body: str, settings: str = "") -> str:
    return 'plan "rule plan"\n' + CRAFT + settings + body


LOW_PLANE_FIRST = plan("""start circular 300 km inclination 28.5 deg
burn plane at node: inclination to 0 deg
burn raise at periapsis: apoapsis to 35786 km
burn circ at apoapsis: circular
""")

# Plans whose findings, together, come from every rule (scenarios of our own; the rules'
# own tests in test_check.py check the savings against hand calculations).
RULE_PLANS = {
    "propellant-exhausted": plan("start circular 400 km\nburn raise: apoapsis to 35786 km\n"
                                 ).replace("propellant 20 t", "propellant 100 kg"),
    "expectation-not-met": plan("start circular 400 km\nburn raise: apoapsis to 1000 km\n"
                                "expect high apoapsis 1200 km within 1 km\n"),
    "reserve-not-covered": plan("start circular 400 km\nburn raise: apoapsis to 1000 km\n",
                                "reserve 12 km/s\n"),
    "beyond-sphere-of-influence": plan("start circular 400 km\n"
                                       "transfer out: circular 1000000 km\n"),
    "cheaper-order": LOW_PLANE_FIRST,
    "costlier-node": plan("start orbit periapsis 400 km apoapsis 30000 km inclination 30 deg\n"
                          "burn tilt at ascending node: inclination to 25 deg\n"),
    "shared-plane-change": plan("start circular 300 km inclination 28.5 deg\n"
                                "transfer geo at node: circular 35786 km\n"
                                "burn turn at node: inclination to 0 deg\n"),
    "hohmann-cheaper": plan("start circular 300 km\n"
                            "transfer geo: circular 35786 km via apoapsis 90000 km\n"),
    "three-burn-plane-change": plan("start circular 400 km inclination 30 deg\n"
                                    "burn tilt at node: inclination to 90 deg\n"),
    "long-burn": plan("start circular 400 km\nburn raise: apoapsis to 35786 km using slow\n"),
    # a node bought with a burn where differential J2 drift would turn it for less
    "drift-node-change": plan("start circular 1200 km inclination 53 deg raan 10 deg\n"
                              "burn shift at crossing: raan to 25 deg\n"
                              "coast settle for 1 d\n", "gravity j2\n"),
    # a finite burn cannot make a circle at its own impulse point: its goal is missed
    "finite-burn": ('plan "rule plan"\naround earth\n'
                    "craft c { dry 1100 kg propellant 1900 kg engine main isp 318 s "
                    "thrust 400 N }\nburns finite\n"
                    "start orbit periapsis 250 km apoapsis 35786 km inclination 6 deg\n"
                    "burn circ at apoapsis: circular\n"),
    # bi-elliptic-cheaper, cancelling-burns, merge-burns and the rewrites combined
    "combined-rewrites": plan("start circular 300 km\ntransfer out: circular 130000 km\n"
                              "coast c for 1 h\nburn up: along 12 m/s\n"
                              "burn down: along -12 m/s\n"),
}


@pytest.fixture(scope="module")
def validator():
    if not SCHEMA.exists():
        pytest.skip(f"the SARIF 2.1.0 schema is not at {SCHEMA} (the OASIS file, kept beside "
                    "the project in ../shared/standards/); the SARIF output is not validated")
    import jsonschema

    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    jsonschema.Draft4Validator.check_schema(schema)
    return jsonschema.Draft4Validator(schema)


def sarif(capsys, *args) -> tuple[int, dict]:
    code = main(["check", *map(str, args), "--format", "sarif"])
    return code, json.loads(capsys.readouterr().out)


def assert_valid(validator, log: dict) -> None:
    errors = sorted(validator.iter_errors(log), key=lambda e: list(e.path))
    assert not errors, "\n".join(f"{list(e.path)}: {e.message}" for e in errors[:5])


@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_every_sample_is_valid_sarif(path, validator, capsys):
    code, log = sarif(capsys, path)
    assert code in (0, 1)
    assert_valid(validator, log)
    run = log["runs"][0]
    assert run["tool"]["driver"]["name"] == "apsidal"
    assert run["artifacts"][0]["location"]["uri"].endswith(path.name)


@pytest.fixture(scope="module")
def rule_logs(tmp_path_factory):
    """The SARIF of each rule plan, and of a plan cut short by the time limit."""
    folder = tmp_path_factory.mktemp("rules")
    out = {}
    for name, text in RULE_PLANS.items():
        path = folder / f"{name}.aps"
        path.write_text(text)
        out[name] = (path, text)
    return out


def test_findings_of_every_rule_are_valid_sarif(rule_logs, validator, capsys):
    seen = set()
    for name, (path, text) in rule_logs.items():
        code, log = sarif(capsys, path)
        assert_valid(validator, log)
        run = log["runs"][0]
        rules = run["tool"]["driver"]["rules"]
        got = {r["ruleId"] for r in run["results"]}
        assert name in got, (name, got)
        seen |= got
        for res in run["results"]:
            # the result names its rule, and the rule is in the driver at its index
            assert rules[res["ruleIndex"]]["id"] == res["ruleId"]
            assert res["level"] in ("error", "warning", "note")
            region = res["locations"][0]["physicalLocation"]["region"]
            assert 1 <= region["startLine"] <= len(text.splitlines())
            for fix in res.get("fixes", []):
                assert apply_fix(text, fix) == suggestion_of(path, res["ruleId"], capsys)
        # exit code as `check` gives it: 1 for an error finding
        errors = any(r["level"] == "error" for r in run["results"])
        assert code == (1 if errors else 0)
    assert {r.rule_name for r in RULES} | {"combined-rewrites"} <= seen


def test_time_limit_and_plan_error_are_valid_sarif(tmp_path, validator, capsys):
    path = tmp_path / "slow.aps"
    path.write_text(LOW_PLANE_FIRST)
    _, log = sarif(capsys, path, "--time-limit", "0.000001")
    assert_valid(validator, log)
    assert "time-limit" in {r["ruleId"] for r in log["runs"][0]["results"]}
    bad = tmp_path / "bad.aps"
    bad.write_text(LOW_PLANE_FIRST.replace("burn raise at periapsis:", "burn raise at periapsys:"))
    code, log = sarif(capsys, bad, path)
    assert code == 2
    assert_valid(validator, log)
    [err] = [r for r in log["runs"][0]["results"] if r["ruleId"] == "plan-error"]
    region = err["locations"][0]["physicalLocation"]["region"]
    assert (region["startLine"], region["startColumn"]) == (11, 15)
    assert "did you mean `periapsis`" in err["message"]["text"]
    assert len(log["runs"][0]["artifacts"]) == 2


def test_a_finding_points_at_its_step_and_the_others_are_related(tmp_path, capsys):
    path = tmp_path / "p.aps"
    path.write_text(RULE_PLANS["shared-plane-change"])
    _, log = sarif(capsys, path)
    [res] = [r for r in log["runs"][0]["results"] if r["ruleId"] == "shared-plane-change"]
    region = res["locations"][0]["physicalLocation"]["region"]
    assert region["startLine"] == 10 and region["startColumn"] == 1  # transfer geo ...
    assert [r["physicalLocation"]["region"]["startLine"] for r in res["relatedLocations"]] \
        == [11]
    assert res["properties"]["saves_m_s"] > 0
    uri = res["locations"][0]["physicalLocation"]["artifactLocation"]["uri"]
    assert uri == path.as_uri()


def test_driver_rules_carry_their_explanations(capsys):
    from apsidal.compiler.sarif import to_sarif

    rules = {r["id"]: r for r in to_sarif([])["runs"][0]["tool"]["driver"]["rules"]}
    for rule in RULES:
        assert rules[rule.rule_name]["shortDescription"]["text"]
        assert main(["explain", rule.rule_name]) == 0
        explained = capsys.readouterr().out.split(None, 1)[1]
        assert " ".join(explained.split()) == rules[rule.rule_name]["fullDescription"]["text"]


def apply_fix(text: str, fix: dict) -> str:
    [change] = fix["artifactChanges"]
    out, cut = [], 0
    for rep in change["replacements"]:
        start = rep["deletedRegion"]["charOffset"]
        out += [text[cut:start], rep["insertedContent"]["text"]]
        cut = start + rep["deletedRegion"]["charLength"]
    return "".join(out) + text[cut:]


def suggestion_of(path: Path, rule: str, capsys) -> str:
    """The rule's rewritten plan as `check --format json` gives it."""
    main(["check", str(path), "--format", "json"])
    found = json.loads(capsys.readouterr().out)["plans"][0]["findings"]
    return next(f["suggestion"] for f in found if f["rule"] == rule and f["suggestion"])
