"""`check`'s drift-node-change rule: a node change bought with a burn, priced against
waiting in a drift orbit while J2 turns the node."""

from __future__ import annotations

import math

import numpy as np
import pytest
from apsidal.compiler.budget import budget
from apsidal.compiler.check import at_same_time, check_program
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.j2 import Drift
from apsidal.compiler.load import load_text
from apsidal.compiler.rules import BY_NAME
from apsidal.compiler.state import elements_from_state
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_check import movable_plans

# IERS Conventions (2010) Table 1.1: GM, a_E and J2 of the Earth (also compiler/bodies.toml)
MU, RE, J2 = 398600.4418, 6378.1366, 1.0826359e-3
RULE = BY_NAME["drift-node-change"]

HEAD = """\
plan "node change"
around earth
gravity j2
craft c { dry 500 kg propellant 900 kg engine main isp 310 s thrust 400 N }
"""
PLAN = """\
start circular 1200 km inclination 53 deg raan 10 deg
burn shift at crossing: raan to 25 deg
coast settle for 1 d
"""


def findings(text: str):
    program = load_text(text)
    return program, [f for f in check_program(program, [RULE]) if f.rule == RULE.rule_name]


def node_rate(a: float, inc_deg: float) -> float:
    """-(3/2) n J2 (R/a)^2 cos i for a circle (Curtis, 3rd ed., Eq. 4.52, from memory)."""
    return -1.5 * math.sqrt(MU / a**3) * J2 * (RE / a) ** 2 * math.cos(math.radians(inc_deg))


def test_a_drift_route_is_priced_and_reaches_the_same_plane():
    program, found = findings(HEAD + "drift at most 200 d\n" + PLAN)
    assert len(found) == 1
    f = found[0]
    assert f.saves_m_s > 0 and f.saves_kg > 0
    assert "shift-drift-out" in f.suggestion and "coast shift-drift for" in f.suggestion
    # the rewritten plan, priced again from its text: same plane as the plan's own at
    # the same moment (the plan's craft coasts on to the rewrite's end)
    mine, theirs = run(program), run(load_text(f.suggestion))
    assert theirs.ok
    gap = float(theirs.final.t[0] - mine.final.t[0])
    assert 0 < gap <= 200 * 86400.0
    drift = Drift(MU, RE, J2)
    r, v, ok = drift.propagate(mine.final.r, mine.final.v, gap)
    assert ok[0]
    ours = elements_from_state(r, v, MU)
    rewritten = elements_from_state(theirs.final.r, theirs.final.v, MU)
    assert rewritten.raan[0] == pytest.approx(ours.raan[0], abs=1e-7)
    assert rewritten.inclination[0] == pytest.approx(ours.inclination[0], abs=1e-9)
    assert rewritten.sma[0] == pytest.approx(ours.sma[0], rel=1e-9)
    # and it costs what the finding says less
    saves = (mine.final.dv_margin[0] - theirs.final.dv_margin[0]) * 1000.0
    assert saves == pytest.approx(f.saves_m_s, abs=1e-6)


def test_the_wait_is_the_differential_node_rate_at_work():
    # The drift alone: the turn divided by the difference of the two orbits' node rates,
    # from the classical rate worked here (the transfers add a little time of their own).
    _, found = findings(HEAD + "drift at most 200 d\n" + PLAN)
    text = found[0].suggestion
    line = next(x for x in text.splitlines() if x.startswith("transfer shift-drift-out"))
    alt = float(line.split("circular ")[1].split(" km")[0])
    wait = float(next(x for x in text.splitlines() if x.startswith("coast shift-drift "))
                 .split("for ")[1].split(" s")[0])
    differential = node_rate(RE + alt, 53.0) - node_rate(RE + 1200.0, 53.0)
    assert wait == pytest.approx(math.radians(15.0) / differential, rel=0.01)
    assert wait <= 200 * 86400.0


def test_a_shorter_limit_drifts_further_and_costs_more():
    _, long_wait = findings(HEAD + "drift at most 200 d\n" + PLAN)
    _, short_wait = findings(HEAD + "drift at most 60 d\n" + PLAN)
    assert long_wait and short_wait
    assert short_wait[0].saves_m_s < long_wait[0].saves_m_s


def test_without_a_limit_the_rule_says_how_long_the_drift_takes():
    _, found = findings(HEAD + PLAN)
    assert found
    assert any("sets no `drift at most`" in n for n in found[0].notes)
    wait = float(next(x for x in found[0].suggestion.splitlines()
                      if x.startswith("coast shift-drift ")).split("for ")[1].split(" s")[0])
    assert 200 * 86400.0 < wait <= 365.25 * 86400.0  # sized for the default year
    assert "lets J2 turn it instead" in found[0].message


def test_no_route_when_no_drift_orbit_fits_the_wait():
    # 15 deg of node in a day would need an orbit far under the surface
    _, found = findings(HEAD + "drift at most 1 d\n" + PLAN)
    assert found == []


def test_the_point_mass_model_has_no_drift_to_use():
    _, found = findings(HEAD.replace("gravity j2\n", "") + PLAN)
    assert found == []


def test_a_burn_that_also_tilts_the_plane_is_left_alone():
    _, found = findings(HEAD + "drift at most 200 d\n" + PLAN.replace(
        "raan to 25 deg", "raan to 25 deg, inclination to 50 deg"))
    assert found == []


def test_explain_names_the_rule(capsys):
    main(["explain", "drift-node-change"])
    out = capsys.readouterr().out
    assert "J2" in out and "drift at most" in out


def test_check_in_a_subprocess_shape(capsys, tmp_path):
    path = tmp_path / "p.aps"
    path.write_text(HEAD + "drift at most 200 d\n" + PLAN)
    code = main(["check", str(path), "--format", "json"])
    import json

    doc = json.loads(capsys.readouterr().out)
    rules = [f["rule"] for p in doc["plans"] for f in p["findings"]]
    assert "drift-node-change" in rules
    assert code in (0, 1)
    assert np.isfinite([f["saves_m_s"] for p in doc["plans"] for f in p["findings"]
                        if f["saves_m_s"] is not None]).all()


def test_a_near_polar_plan_drifts_in_inclination():
    # The node rate goes as cos i: near the pole a small tilt changes it more cheaply
    # than a change of altitude (to first order the altitude route costs tan i / 7 of
    # the tilt route: our own estimate from the rate formula), so the tilt route wins.
    text = HEAD + "drift at most 200 d\n" + PLAN.replace("53 deg", "87 deg").replace(
        "raan to 25 deg", "raan to 12 deg")
    program, found = findings(text)
    assert len(found) == 1
    f = found[0]
    assert "deg inclination" in f.message
    assert "shift-drift-tilt at node: inclination to" in f.suggestion
    mine, theirs = run(program), run(load_text(f.suggestion))
    gap = float(theirs.final.t[0] - mine.final.t[0])
    r, v, _ = Drift(MU, RE, J2).propagate(mine.final.r, mine.final.v, gap)
    assert elements_from_state(theirs.final.r, theirs.final.v, MU).raan[0] == \
        pytest.approx(elements_from_state(r, v, MU).raan[0], abs=1e-7)
    # the drift inclination: the differential rate, from the classical formula, makes
    # the 2 deg over the wait
    line = next(x for x in f.suggestion.splitlines() if "drift-tilt" in x)
    tilt = float(line.split("inclination to ")[1].split(" deg")[0])
    wait = float(next(x for x in f.suggestion.splitlines() if x.startswith("coast shift-drift "))
                 .split("for ")[1].split(" s")[0])
    a = RE + 1200.0
    differential = node_rate(a, tilt) - node_rate(a, 87.0)
    assert differential * wait == pytest.approx(math.radians(2.0), rel=0.01)


# --- property: under j2 a finding never costs more and reaches the same orbit, then ---------


@st.composite
def drifting_plans(draw):
    """The reorder property's plans under `gravity j2`, some with a node change."""
    text = draw(movable_plans()).replace("around earth", "around earth\ngravity j2", 1)
    if draw(st.booleans()):
        text += (f"burn shift{draw(st.integers(0, 9))} at crossing: raan to "
                 f"{draw(st.integers(0, 359))} deg\n")
    return text


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(drifting_plans())
def test_findings_under_j2_never_cost_more_and_reach_the_same_orbit_at_the_same_moment(text):
    program = load_text(text, "gen.aps")
    mine = run(program)
    if not mine.ok:
        return
    used = budget(mine)["totals"]["propellant_kg"]
    for f in check_program(program, [BY_NAME["cheaper-order"], BY_NAME["merge-burns"], RULE]):
        if f.suggestion is None:
            continue
        theirs = run(load_text(f.suggestion, "suggestion.aps"))
        assert theirs.ok
        assert budget(theirs)["totals"]["propellant_kg"] <= used + 1e-9
        a, b = at_same_time(program, theirs.final, mine.final)
        ea, eb = elements_from_state(a.r, a.v, MU), elements_from_state(b.r, b.v, MU)
        assert ea.sma[0] == pytest.approx(eb.sma[0], rel=1e-6)
        assert ea.ecc[0] == pytest.approx(eb.ecc[0], abs=1e-5)
        assert ea.inclination[0] == pytest.approx(eb.inclination[0], abs=1e-6)
        if eb.inclination[0] > 1e-3:
            assert math.cos(ea.raan[0] - eb.raan[0]) > math.cos(1e-6)
