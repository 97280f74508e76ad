"""`gravity j2`: the secular J2 rates against published values and a numerical
integration of the J2 equations of motion, sun-synchronous orbits, places reached exactly
on the drifting orbit, and the model in every report."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from apsidal.compiler import j2 as secular
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main
from apsidal.compiler.diff import diff_reports
from apsidal.compiler.diff_render import headline
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.state import elements_from_state, state_from_elements
from apsidal.lang.errors import PlanError
from apsidal.lang.format import format_text
from hypothesis import HealthCheck, given, settings
from jsonschema import Draft202012Validator
from plangen import plan_texts
from scipy.integrate import solve_ivp
from test_properties import assert_clean_budget

ROOT = Path(__file__).resolve().parent.parent
# IERS Conventions (2010) Table 1.1: GM, a_E and J2 of the Earth (also compiler/bodies.toml)
MU, RE, J2 = 398600.4418, 6378.1366, 1.0826359e-3
DEG_PER_DAY = 86400.0 * 180.0 / math.pi

HEAD = """\
plan "j2 test"
around earth
gravity j2
craft c { dry 500 kg propellant 200 kg engine main isp 300 s thrust 400 N }
"""


def priced(text: str):
    result = run(load_text(HEAD + text), strict=True)
    return result, budget(result)


def checks(report) -> dict:
    return {c["kind"]: c for s in report["steps"] for c in s.get("checks", [])}


# --- published values -------------------------------------------------------------------


def test_sun_synchronous_node_rate_is_the_suns_mean_motion():
    # The node of a sun-synchronous orbit turns 360 deg in a tropical year: 0.9856 deg/day
    # (Vallado, 4th ed., Sec. 9.6, sun-synchronous orbits; 360/365.2422 - from memory).
    _, report = priced("start circular 700 km inclination sun-synchronous\n"
                       "expect raan drift 0.9856 deg/d within 0.0001 deg/d\n")
    check = checks(report)["raan drift"]
    assert check["passed"]
    assert check["actual"] == pytest.approx(360.0 / 365.2422, abs=1e-9)


def test_sun_synchronous_inclination_at_700_km():
    # About 98.19 deg for a circular orbit at 700 km (from memory; tables of SSO
    # inclinations list 98.2 deg at 700 km).
    result, _ = priced("start circular 700 km inclination sun-synchronous\n"
                       "coast c for 1 min\n")
    el = elements_from_state(result.final.r, result.final.v, MU)
    assert math.degrees(el.inclination[0]) == pytest.approx(98.19, abs=0.02)


def test_sun_synchronous_at_mars_follows_the_martian_year():
    # Around Mars the node must keep up with Mars's own year (686.98 d, JPL's planetary
    # fact sheet - from memory): Mars Global Surveyor's mapping orbit, about 378 km up,
    # was sun-synchronous at about 92.9 deg (from memory).
    text = HEAD.replace("around earth", "around mars") + (
        "start circular 378 km inclination sun-synchronous\n"
        "expect raan drift 0.5240 deg/d within 0.0001 deg/d\n")
    result = run(load_text(text), strict=True)
    el = elements_from_state(result.final.r, result.final.v, result.program.body.gm)
    assert math.degrees(el.inclination[0]) == pytest.approx(92.9, abs=0.1)
    assert checks(budget(result))["raan drift"]["actual"] == pytest.approx(360 / 686.98,
                                                                         rel=1e-4)


def test_thirty_days_of_sun_synchronous_drift():
    # 30 d x 0.9856 deg/d = 29.57 deg: the drift J2 gives where a point-mass model gives
    # none (from memory: "about 29.6 deg a month").
    result, _ = priced("start circular 700 km inclination sun-synchronous raan 10 deg\n"
                            "coast month for 30 d\n")
    el = elements_from_state(result.final.r, result.final.v, MU)
    assert math.degrees(el.raan[0]) - 10.0 == pytest.approx(29.57, abs=0.01)
    flat = run(load_text(HEAD.replace("gravity j2\n", "") +
                         "start circular 700 km inclination 98.19 deg raan 10 deg\n"
                         "coast month for 30 d\n"))
    assert math.degrees(elements_from_state(flat.final.r, flat.final.v, MU).raan[0]) == \
        pytest.approx(10.0, abs=1e-9)


def test_node_rate_of_a_low_prograde_orbit():
    # The classical secular node rate, -(3/2) n J2 (R/p)^2 cos i (Curtis, 3rd ed.,
    # Eq. 4.52, from memory), worked here by hand for a = 7000 km, i = 28.5 deg.
    n = math.sqrt(MU / 7000.0**3)
    by_hand = -1.5 * n * J2 * (RE / 7000.0) ** 2 * math.cos(math.radians(28.5))
    assert secular.raan_rate(MU, RE, J2, 7000.0, 0.0, math.radians(28.5)) == \
        pytest.approx(by_hand, rel=1e-14)


def test_highest_sun_synchronous_orbit():
    # Where cos i would pass -1: (3/2) J2 R^2 sqrt(mu) a^-3.5 = the Sun's rate (the
    # formula solved for a, here by bisection instead of the closed form).
    lo, hi = 7000.0, 20000.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        rate = 1.5 * J2 * RE**2 * math.sqrt(MU) * mid**-3.5
        lo, hi = (mid, hi) if rate > secular.SUN_RATE else (lo, mid)
    assert secular.highest_sun_synchronous(MU, RE, J2) == pytest.approx(lo, rel=1e-12)
    assert math.isnan(float(secular.sun_synchronous(MU, RE, J2, 1.01 * lo)))
    assert float(np.degrees(secular.sun_synchronous(MU, RE, J2, 0.999 * lo))) > 170.0


# --- against an integration of the J2 equations of motion ------------------------------


def _j2_motion(t, y):
    """Two-body plus the J2 acceleration (Vallado, 4th ed., Sec. 8.6.1, Eq. 8-30, the
    zonal term for J2 - from memory)."""
    r, v = y[:3], y[3:]
    x, yy, z = r
    rn = np.linalg.norm(r)
    k = 1.5 * J2 * MU * RE**2 / rn**5
    zz = 5.0 * z * z / rn**2
    a = -MU * r / rn**3 + k * np.array([x * (zz - 1.0), yy * (zz - 1.0), z * (zz - 3.0)])
    return np.concatenate([v, a])


@pytest.mark.parametrize("a, e, inc", [(7000.0, 0.001, 51.6), (8000.0, 0.05, 40.0),
                                       (7078.1366, 0.0005, 98.19)])
def test_secular_trend_against_integration(a, e, inc):
    # scipy's DOP853 (rtol 1e-12) of the full J2 equations of motion over 30 orbits;
    # the secular trend of raan and argp is the straight-line fit of the osculating
    # elements, sampled densely so that the short-period terms average out.  The state
    # of record is read as mean elements, so the rates differ by O(J2) in the elements
    # themselves: agreement to 1.5 % of the rate (and 2 % for argp near the critical
    # inclination, none here) is what first-order theory promises.
    r0, v0 = state_from_elements(MU, a, e, math.radians(inc), math.radians(30.0),
                                 math.radians(60.0), 0.0)
    r0, v0 = r0[0], v0[0]
    period = 2 * math.pi * math.sqrt(a**3 / MU)
    span = 30 * period
    t = np.linspace(0.0, span, 30 * 200 + 1)
    sol = solve_ivp(_j2_motion, (0.0, span), np.concatenate([r0, v0]), method="DOP853",
                    rtol=1e-12, atol=1e-12, t_eval=t)
    assert sol.success
    el = elements_from_state(sol.y[:3].T, sol.y[3:].T, MU)
    raan = np.unwrap(el.raan)
    argp = np.unwrap(el.argp)
    raan_rate = np.polyfit(t, raan, 1)[0]
    argp_rate = np.polyfit(t, argp, 1)[0]
    drift = secular.Drift(MU, RE, J2)
    rates = drift.rates(r0[None], v0[None])
    assert rates.raan[0] == pytest.approx(raan_rate, rel=0.015)
    if e > 0.01:  # the apse line of a nearly circular orbit is not a trend to fit
        assert rates.argp[0] == pytest.approx(argp_rate, rel=0.02)
    # the evaluator's coast: the node after the whole span is the secular trend's
    r1, v1, ok = drift.propagate(r0[None], v0[None], span)
    assert ok[0]
    moved = elements_from_state(r1, v1, MU).raan[0] - math.radians(30.0)
    moved = (moved + math.pi) % (2 * math.pi) - math.pi
    assert moved == pytest.approx(raan_rate * span, rel=0.015)
    # the plane after the span is the integration's, to the same share of its turn (the
    # along-track position is not compared: the mean motion of a state read as mean
    # elements differs from the osculating one by O(J2), which grows along the track)
    h1 = np.cross(r1[0], v1[0])
    h2 = np.cross(sol.y[:3, -1], sol.y[3:, -1])
    tilt = math.acos(min(1.0, np.dot(h1, h2) / np.linalg.norm(h1) / np.linalg.norm(h2)))
    assert tilt < 0.015 * abs(raan_rate * span) * math.sin(math.radians(inc)) + 2e-4


def test_energy_and_angular_momentum_kept_through_j2_coasts():
    # Secular drift turns the orbit; it keeps its size and shape (first-order theory has
    # no secular change of a, e or i).
    drift = secular.Drift(MU, RE, J2)
    for a, e, inc in [(7000.0, 0.0, 28.5), (9000.0, 0.3, 63.4), (26000.0, 0.7, 116.0)]:
        r0, v0 = state_from_elements(MU, a, e, math.radians(inc), 1.0, 2.0, 0.5)
        for dt in (100.0, 5.5e4, 3.7e6):
            r1, v1, ok = drift.propagate(r0, v0, dt)
            assert ok[0]
            energy = lambda r, v: 0.5 * np.dot(v[0], v[0]) - MU / np.linalg.norm(r[0])
            assert energy(r1, v1) == pytest.approx(energy(r0, v0), rel=1e-11)
            assert np.linalg.norm(np.cross(r1[0], v1[0])) == pytest.approx(
                np.linalg.norm(np.cross(r0[0], v0[0])), rel=1e-11)
            h0, h1 = np.cross(r0[0], v0[0]), np.cross(r1[0], v1[0])
            assert h1[2] / np.linalg.norm(h1) == pytest.approx(h0[2] / np.linalg.norm(h0),
                                                             abs=1e-12)


# --- places on the drifting orbit are reached exactly ----------------------------------


def test_places_are_reached_on_the_drifted_orbit():
    result, report = priced(
        "start orbit periapsis 600 km apoapsis 3000 km inclination 63 deg raan 20 deg "
        "argp 40 deg anomaly 10 deg\n"
        "coast long for 12 d\n"
        "coast to ascending node\n"
        "coast to apoapsis\n"
        "coast to descending node\n"
        "coast to radius 8000 km\n"
        "coast to anomaly 123 deg\n"
        "coast 3 rev\n")
    rows = {r.name: r for r in result.rows}
    mu = MU
    node = rows["coast-2"].after
    assert report["gravity"] == "j2"
    assert abs(node.r[0, 2]) < 1e-7 and node.v[0, 2] > 0  # on the equator, going north
    ap = rows["coast-3"].after
    el = elements_from_state(ap.r, ap.v, mu)
    assert abs(np.dot(ap.r[0], ap.v[0])) < 1e-9 * np.linalg.norm(ap.r[0])
    assert np.linalg.norm(ap.r[0]) == pytest.approx(el.apoapsis[0], rel=1e-12)
    down = rows["coast-4"].after
    assert abs(down.r[0, 2]) < 1e-7 and down.v[0, 2] < 0
    assert np.linalg.norm(rows["coast-5"].after.r[0]) == pytest.approx(8000.0, rel=1e-12)
    at = rows["coast-6"].after
    assert math.degrees(elements_from_state(at.r, at.v, mu).anomaly[0]) == \
        pytest.approx(123.0, abs=1e-7)
    # whole revolutions are anomalistic: back at the same true anomaly of the turned orbit
    revs = rows["coast-7"].after
    assert math.degrees(elements_from_state(revs.r, revs.v, mu).anomaly[0]) == \
        pytest.approx(123.0, abs=1e-7)


def test_an_open_orbit_has_no_node_drift():
    _, report = priced("start orbit periapsis 400 km ecc 1.5 inclination 30 deg\n"
                       "expect raan drift 0 deg/d\n")
    check = checks(report)["raan drift"]
    assert check["actual"] is None and not check["passed"]
    assert "no secular node drift" in check["reason"]


def test_a_burn_at_crossing_meets_its_node_under_drift():
    _, report = priced("start circular 900 km inclination 53 deg raan 10 deg "
                            "anomaly 200 deg\n"
                            "coast c for 3 d\n"
                            "burn shift at crossing: raan to 15 deg\n"
                            "expect raan 15 deg within 0.000001 deg, inclination 53 deg "
                            "within 0.000001 deg\n")
    assert all(c["passed"] for c in checks(report).values())


def test_an_apse_line_turn_at_crossing_meets_its_goal_under_drift():
    # the crossing of the orbit with the turned one moves as the apse line drifts
    _, report = priced("start orbit periapsis 500 km apoapsis 3000 km inclination 50 deg "
                       "argp 10 deg anomaly 100 deg\n"
                       "coast c for 5 d\n"
                       "burn swing at crossing: argp to 90 deg\n"
                       "expect argp 90 deg within 0.000001 deg, periapsis 500 km within "
                       "0.000001 km, apoapsis 3000 km within 0.000001 km\n")
    assert all(c["passed"] for c in checks(report).values())


def test_a_transfer_reaches_a_sun_synchronous_circle():
    _, report = priced("start circular 400 km inclination 97 deg\n"
                            "transfer up at node: circular 800 km, inclination to "
                            "sun-synchronous\n"
                            "expect raan drift 0.9856473 deg/d within 0.0000001 deg/d\n")
    assert checks(report)["raan drift"]["passed"]


def test_a_burn_to_a_sun_synchronous_plane_after_its_shape_change():
    _, report = priced("start orbit periapsis 700 km apoapsis 900 km inclination "
                            "97 deg\n"
                            "burn c at apoapsis: circular, inclination to sun-synchronous\n"
                            "expect raan drift 0.9856473 deg/d within 0.0000001 deg/d\n")
    assert checks(report)["raan drift"]["passed"]


def test_phasing_under_drift_comes_back_to_the_same_point_of_the_turned_orbit():
    # N anomalistic periods of the phasing orbit, then the original speed and direction
    # (turned with the orbit): the same size, shape and true anomaly as before the first
    # burn, the node moved by the phasing orbit's own rate over the wait (worked here
    # from the classical rate of a 7000 km circle's phasing ellipse).
    result, report = priced("start circular 621.8634 km inclination 45 deg raan 30 deg\n"
                            "transfer slot: phase -20 deg in 3 rev\n")
    one, two = (s for s in report["steps"] if s["name"].startswith("slot/"))
    assert two["dv_m_s"] == pytest.approx(one["dv_m_s"], rel=1e-12)
    before = result.program.start_r[None], result.program.start_v[None]
    e0 = elements_from_state(*before, MU)
    e1 = elements_from_state(result.final.r, result.final.v, MU)
    assert e1.sma[0] == pytest.approx(e0.sma[0], rel=1e-12)
    assert e1.ecc[0] < 1e-9
    assert e1.inclination[0] == pytest.approx(e0.inclination[0], abs=1e-12)
    # the phasing orbit: periapsis here at 7000 km, the period T + tau / N longer
    a0 = 7000.0
    period = 2 * math.pi * math.sqrt(a0**3 / MU) * (1 + 20 / 360 / 3)
    a1 = (MU * (period / (2 * math.pi)) ** 2) ** (1 / 3)
    e = 1 - a0 / a1
    n = math.sqrt(MU / a1**3)
    p = a1 * (1 - e * e)
    rate = -1.5 * n * J2 * (RE / p) ** 2 * math.cos(math.radians(45))
    n_bar = n * (1 + 0.75 * J2 * (RE / p) ** 2 * math.sqrt(1 - e * e) *
                 (3 * math.cos(math.radians(45)) ** 2 - 1))
    wait = 3 * 2 * math.pi / n_bar
    assert two["coast_before_s"] == pytest.approx(wait, rel=1e-9)
    moved = (e1.raan[0] - e0.raan[0] + math.pi) % (2 * math.pi) - math.pi
    assert moved == pytest.approx(rate * wait, rel=1e-9)


def test_after_a_leg_the_phase_drifts_with_its_own_body():
    # The Venus phase of the courier sample under gravity j2: its node rate is Venus's,
    # the classical rate worked here from the catalogue's Venus (not the Earth's).
    text = (ROOT / "samples" / "venus-courier.aps").read_text().replace(
        "around earth", "around earth\ngravity j2", 1) + "expect rate raan drift 0 deg/d\n"
    result = run(load_text(text))
    assert result.ok
    check = checks(budget(result))["raan drift"]
    from apsidal.compiler.bodies import lookup

    venus = lookup("venus")
    el = elements_from_state(result.final.r, result.final.v, venus.gm)
    p = el.sma[0] * (1 - el.ecc[0] ** 2)
    rate = -1.5 * math.sqrt(venus.gm / el.sma[0] ** 3) * venus.j2 * (venus.radius / p) ** 2 \
        * math.cos(el.inclination[0])
    assert check["actual"] == pytest.approx(rate * DEG_PER_DAY, abs=1e-9)  # 9 places


# --- the model in the reports, the diff and the formatter -------------------------------


def test_the_report_says_which_model_priced_the_plan(capsys, tmp_path):
    path = tmp_path / "p.aps"
    path.write_text(HEAD + "start circular 700 km inclination sun-synchronous\n"
                    "coast c for 1 d\n")
    main(["run", str(path), "--format", "json"])
    doc = json.loads(capsys.readouterr().out)
    assert doc["gravity"] == "j2"
    assert "J2" in doc["caution"]
    schema = json.loads((ROOT / "docs" / "schema" / "run.schema.json").read_text())
    Draft202012Validator(schema).validate(doc)
    main(["run", str(path), "--format", "markdown"])
    assert "(gravity j2)" in capsys.readouterr().out
    main(["run", str(path), "--format", "csv"])
    lines = capsys.readouterr().out.splitlines()
    header = lines[0].split(",")
    total = next(line for line in lines if line.startswith("total,")).split(",")
    assert total[header.index("gravity")] == "j2"


def test_diff_shows_a_change_of_model():
    plain = HEAD.replace("gravity j2\n", "")
    old = budget(run(load_text(plain + "start circular 700 km inclination 98 deg\n"
                                       "coast c for 10 d\n")))
    new = budget(run(load_text(HEAD + "start circular 700 km inclination 98 deg\n"
                                      "coast c for 10 d\n")))
    d = diff_reports(old, new)
    assert d["gravity"] == {"old": "point-mass", "new": "j2"}
    assert headline(d).startswith("gravity point-mass -> j2; ")
    assert not headline(diff_reports(new, new)).startswith("gravity")


def test_the_new_words_format_stably():
    text = (HEAD + "drift   at most 90 d\n"
            "start circular 700 km inclination   sun-synchronous\n"
            "burn b at apoapsis:  circular, inclination to sun-synchronous\n"
            "expect raan drift 0.9856 deg/d within 0.001 deg/d\n"
            "expect raan drift at least 0.9 deg/d\n")
    once = format_text(text)
    assert format_text(once) == once
    assert "drift at most 90 d" in once and "inclination sun-synchronous" in once
    assert "raan drift 0.9856 deg/d within 0.001 deg/d" in once
    assert run(load_text(once)).ok == run(load_text(text)).ok


def test_old_names_still_name_steps():
    # `drift` and `gravity` became keywords after plans could name steps with them
    result, _ = priced("start circular 700 km inclination 98 deg\n"
                       "coast drift for 1 d\ncoast gravity 1 rev\n")
    assert [r.name for r in result.rows] == ["drift", "gravity"]


# --- properties over generated plans (tests/plangen.py) --------------------------------


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(plan_texts(tidy=True))
def test_generated_plans_under_j2_keep_size_shape_and_inclination_through_coasts(text):
    # Under gravity j2 a coast turns the orbit: |h|, the energy and the inclination
    # (h_z / |h|) are kept, the node and apse line move.  A plan either flies or stops at
    # a located error; no NaN reaches the budget either way.
    if "around earth" not in text:
        return
    text = text.replace("around earth", "around earth\ngravity j2", 1)
    try:
        result = run(load_text(text))
    except PlanError:
        return
    assert_clean_budget(budget(result))
    mu = result.program.body.gm
    r, v = result.program.start_r[None], result.program.start_v[None]
    for row in result.rows:
        if row.kind == "coast":
            r1, v1 = row.after.r, row.after.v
            energy = lambda r, v: 0.5 * float(v[0] @ v[0]) - mu / float(np.linalg.norm(r[0]))
            assert energy(r1, v1) == pytest.approx(energy(r, v), rel=1e-9, abs=1e-12)
            h0, h1 = np.cross(r[0], v[0]), np.cross(r1[0], v1[0])
            assert np.linalg.norm(h1) == pytest.approx(np.linalg.norm(h0), rel=1e-9)
            assert h1[2] / np.linalg.norm(h1) == pytest.approx(h0[2] / np.linalg.norm(h0),
                                                             abs=1e-9)
        r, v = row.after.r, row.after.v
