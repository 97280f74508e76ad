"""Patched-conic legs: a plan that leaves one body for another.

Checked against Curtis, *Orbital Mechanics for Engineering Students* (3rd ed.), chapter 8
(its Earth-to-Mars examples, 8.3 to 8.5: the Hohmann transfer, the departure from a 300 km
parking orbit and the capture at Mars; the book's figures, and which example holds
which, are from memory), against
vis-viva written out here with the catalogue's own constants, and against scipy's
DOP853 integrating the same two-body motion on the departure and arrival hyperbolas.
"""

from __future__ import annotations

import itertools
import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest
from apsidal.compiler import bodies
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.legs import hohmann
from apsidal.compiler.load import load_text
from apsidal.lang.format import format_text
from hypothesis import given, settings
from hypothesis import strategies as st
from strictjson import strict_json
from test_bad_inputs import Bad, check_error, write

ROOT = Path(__file__).resolve().parent.parent
CATALOGUE = tomllib.loads((ROOT / "compiler" / "bodies.toml").read_text(encoding="utf-8"))

CRAFT = """\
craft pathfinder {
    dry 1200 kg
    propellant 9000 kg
    engine main isp 320 s thrust 400 kN
}
"""

# Curtis' own constants (3rd ed., Table A.1, from memory): the Earth's gm and radius,
# Mars' gm and radius.
CURTIS_HEAD = """\
plan "Curtis chapter 8"
body earthc { gm 398600 km3/s2 radius 6378 km }
body marsc { gm 42828 km3/s2 radius 3396 km }
around earthc
""" + CRAFT


def report_of(text: str) -> dict:
    result = run(load_text(text, "legs.aps"))
    assert result.ok, result.error and result.error.message
    return budget(result)


def step(report: dict, name: str) -> dict:
    return next(s for s in report["steps"] if s["name"] == name)


# --- the heliocentric Hohmann transfer ---------------------------------------------------


def vis_viva_hohmann(mu: float, r1: float, r2: float) -> tuple[float, float, float]:
    """vinf at both ends and the time of flight, written out from vis-viva
    v^2 = mu (2/r - 1/a) and Kepler's third law (half the transfer orbit's period)."""
    a = (r1 + r2) / 2
    dep = math.sqrt(mu * (2 / r1 - 1 / a)) - math.sqrt(mu / r1)
    arr = math.sqrt(mu / r2) - math.sqrt(mu * (2 / r2 - 1 / a))
    return dep, arr, math.pi * math.sqrt(a**3 / mu)


def test_catalogue_hohmann_leg_is_vis_viva_with_the_catalogue_constants():
    mu = CATALOGUE["sun"]["gm_km3_s2"]
    r1, r2 = CATALOGUE["earth"]["orbit_sma_km"], CATALOGUE["mars"]["orbit_sma_km"]
    dep, arr, tof = vis_viva_hohmann(mu, r1, r2)
    rep = report_of(mission(f"{dep:.9f}"))
    leg = step(rep, "cruise")["leg"]
    assert leg["form"] == "hohmann"
    assert leg["vinf_depart_km_s"] == pytest.approx(dep, rel=1e-9)
    assert leg["vinf_arrive_km_s"] == pytest.approx(arr, rel=1e-9)
    assert leg["time_of_flight_s"] == pytest.approx(tof, rel=1e-12)


def test_earth_mars_hohmann_against_curtis_example_8_3():
    # Curtis 3rd ed. Example 8.3 (from memory): vinf 2.943 km/s leaving the Earth,
    # 2.648 km/s arriving at Mars, about 259 days in flight.  The book rounds the orbits
    # (149.6e6 and 227.9e6 km) and the Sun's gm (1.327e11): agreement to those digits.
    h = hohmann(bodies.lookup("sun").gm, bodies.lookup("earth").orbit_sma,
                bodies.lookup("mars").orbit_sma)
    assert h.vinf_depart == pytest.approx(2.943, abs=0.005)
    assert h.vinf_arrive == pytest.approx(2.648, abs=0.005)
    assert h.duration / 86400 == pytest.approx(259, abs=1.0)
    # and with the book's own rounded constants, to its printed digits
    book = hohmann(1.327e11, 149.6e6, 227.9e6)
    assert (book.vinf_depart, book.vinf_arrive) == pytest.approx((2.943, 2.648), abs=6e-4)


# --- departure and capture ---------------------------------------------------------------


def curtis_plan(capture: str = "period to 7 h") -> str:
    return CURTIS_HEAD + """\
start circular 300 km
burn depart at periapsis: vinf to 2.943 km/s
leg cruise to marsc vinf 2.943 km/s to 2.648 km/s for 259 d
start orbit periapsis 300 km
burn capture at periapsis: """ + capture + "\n"


def test_departure_from_a_300_km_parking_orbit_curtis_example_8_4():
    # Curtis 3rd ed. Example 8.4 (from memory): 3.590 km/s from a 300 km circular orbit.
    rep = report_of(curtis_plan())
    dv = step(rep, "depart")["dv_m_s"] / 1000
    assert dv == pytest.approx(3.590, abs=5e-4)
    # vis-viva on the hyperbola at periapsis, less the circular speed
    rp = 6378 + 300
    assert dv == pytest.approx(math.sqrt(2.943**2 + 2 * 398600 / rp)
                               - math.sqrt(398600 / rp), rel=1e-9)
    # the same example's propellant share with a specific impulse of 300 s, about 70.5 %
    # of the mass before the burn (from memory)
    rep = report_of(curtis_plan().replace("isp 320 s", "isp 300 s"))
    share = step(rep, "depart")["propellant_kg"] / (1200 + 9000)
    assert share == pytest.approx(0.705, abs=0.002)
    assert share == pytest.approx(1 - math.exp(-dv / (300 * 9.80665e-3)), rel=1e-9)


def test_capture_at_mars_curtis_example_8_5():
    # Curtis 3rd ed. Example 8.5 (from memory): capture from vinf 2.648 km/s at a
    # 300 km periapsis into an orbit of 7 h period, about 1.21 km/s.
    rep = report_of(curtis_plan())
    cap = step(rep, "capture")
    assert cap["body"] == "marsc"
    dv = cap["dv_m_s"] / 1000
    assert dv == pytest.approx(1.21, abs=0.01)
    # worked here: the sma from Kepler's third law, the eccentricity from the periapsis,
    # vis-viva on the hyperbola and on the ellipse at periapsis
    mu, rp = 42828.0, 3396.0 + 300.0
    a = (mu * (7 * 3600 / (2 * math.pi)) ** 2) ** (1 / 3)
    ecc = 1 - rp / a
    assert cap["orbit_after"]["ecc"] == pytest.approx(ecc, rel=1e-9)
    worked = math.sqrt(2.648**2 + 2 * mu / rp) - math.sqrt(mu * (1 + ecc) / rp)
    assert dv == pytest.approx(worked, rel=1e-9)


# --- one chain: one craft, one mass history, one clock -----------------------------------


def mission(vinf: str = "2.944801864", leg: str = "leg cruise to mars") -> str:
    return ('plan "Pathfinder to Mars"\naround earth\n' + CRAFT + f"""\
start circular 300 km inclination 28.5 deg
burn depart at periapsis: vinf to {vinf} km/s
coast out for 2 d
{leg}
start orbit periapsis 400 km inclination 75 deg anomaly -80 deg
coast in to periapsis
burn capture at periapsis: apoapsis to 33000 km
drop lander 300 kg
burn lower at periapsis: apoapsis to 10000 km
""")


def test_one_clock_and_one_mass_history():
    rep = report_of(mission())
    names = [s["name"] for s in rep["steps"]]
    assert names == ["depart", "out", "cruise", "in", "capture", "lander", "lower"]
    out, cruise, inbound = step(rep, "out"), step(rep, "cruise"), step(rep, "in")
    tof = cruise["leg"]["time_of_flight_s"]
    assert cruise["elapsed_s"] == pytest.approx(out["elapsed_s"] + tof, rel=1e-12)
    assert cruise["duration_s"] == pytest.approx(tof)
    assert inbound["elapsed_s"] == pytest.approx(cruise["elapsed_s"] + inbound["duration_s"])
    assert rep["totals"]["elapsed_s"] == pytest.approx(rep["steps"][-1]["elapsed_s"])
    # the leg burns nothing: the mass runs on unchanged through it
    assert cruise["mass_after_kg"] == out["mass_after_kg"]
    assert cruise["propellant_kg"] == 0.0 and cruise["dv_m_s"] == 0.0
    masses = [s["mass_after_kg"] for s in rep["steps"]]
    assert all(b <= a for a, b in itertools.pairwise(masses))
    spent = sum(s["propellant_kg"] for s in rep["steps"]) + 300.0
    assert 1200 + 9000 - rep["totals"]["final_mass_kg"] == pytest.approx(spent)
    assert rep["totals"]["dv_m_s"] == pytest.approx(sum(s["dv_m_s"] for s in rep["steps"]))


def test_each_step_names_its_body_and_the_report_its_phases():
    rep = report_of(mission())
    assert [s["body"] for s in rep["steps"]] == ["Earth"] * 2 + ["Mars"] * 5
    assert rep["body"]["name"] == "Earth"  # the first phase's, as before
    phases = rep["phases"]
    assert [(p["body"]["name"], p["leg"], p["first_index"]) for p in phases] == [
        ("Earth", None, 1), ("Mars", "cruise", 4)]
    mars = bodies.lookup("mars")
    # altitudes after the leg are above Mars' radius, the arrival hyperbola's vinf
    # is the leg's
    arrive = step(rep, "in")["orbit_after"]
    assert arrive["periapsis_alt_km"] == pytest.approx(400.0, abs=1e-6)
    vinf = step(rep, "cruise")["leg"]["vinf_arrive_km_s"]
    assert arrive["sma_km"] == pytest.approx(-mars.gm / vinf**2, rel=1e-9)
    assert step(rep, "capture")["orbit_after"]["apoapsis_alt_km"] == pytest.approx(33000.0)


def test_a_single_body_plan_has_no_phases_key():
    rep = report_of('plan "One"\naround earth\n' + CRAFT
                    + "start circular 300 km\nburn up at periapsis: apoapsis to 900 km\n")
    assert "phases" not in rep
    assert rep["steps"][0]["body"] == "Earth"


# --- the hyperbolas against an integrator --------------------------------------------------


def _integrate(mu: float, r0, v0, seconds: float):
    from scipy.integrate import solve_ivp

    def f(_, y):
        r = y[:3]
        return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])

    sol = solve_ivp(f, (0.0, seconds), np.concatenate([r0, v0]), method="DOP853",
                    rtol=1e-12, atol=1e-9)
    return sol.y[:3, -1], sol.y[3:, -1]


def _state(program, rows, name):
    row = next(r for r in rows if r.name == name)
    return row.after.r[0], row.after.v[0]


def test_departure_and_arrival_hyperbolas_match_dop853():
    # scipy's DOP853 integrating the two-body equations (scipy.integrate.solve_ivp)
    program = load_text(mission(), "legs.aps")
    result = run(program)
    assert result.ok
    earth, mars = bodies.lookup("earth"), bodies.lookup("mars")
    r0, v0 = _state(program, result.rows, "depart")
    r1, v1 = _state(program, result.rows, "out")
    r, v = _integrate(earth.gm, r0, v0, 2 * 86400.0)
    assert np.allclose(r, r1, rtol=1e-8) and np.allclose(v, v1, rtol=1e-8)
    # the arrival: from the start on the arrival hyperbola, in to periapsis
    leg = next(s for s in program.steps if s.kind == "leg")
    r2, v2 = _state(program, result.rows, "in")
    dt = next(row for row in result.rows if row.name == "in").duration[0]
    r, v = _integrate(mars.gm, np.array(leg.arrival_r), np.array(leg.arrival_v), dt)
    assert np.allclose(r, r2, rtol=1e-8, atol=1e-4) and np.allclose(v, v2, rtol=1e-8)
    assert np.linalg.norm(r2) == pytest.approx(mars.radius + 400.0, rel=1e-9)


# --- the rest of the tool treats the plan as one chain ------------------------------------


def test_formatter_round_trip():
    text = mission(leg="leg   cruise  to mars")
    text += "leg home to earth vinf 2.65 km/s to 2.9 km/s for 250 d\n"
    text += "start orbit periapsis 500 km\n"
    text = text.replace("vinf to 2.944801864 km/s", "vinf   to  leg")
    once = format_text(text)
    assert "vinf to leg" in once
    assert "leg cruise to mars\n" in once
    assert "leg home to earth vinf 2.65 km/s to 2.9 km/s for 250 d\n" in once
    assert format_text(once) == once


def test_json_run_and_check_and_size(tmp_path, capsys):
    path = tmp_path / "mission.aps"
    path.write_text(mission())
    assert main(["run", str(path), "--format", "json"]) == 0
    rep = strict_json(capsys.readouterr().out)
    assert rep["feasible"] and len(rep["phases"]) == 2
    code = main(["check", str(path), "--format", "json"])
    out = capsys.readouterr().out
    assert code in (0, 1) and "internal error" not in out
    assert main(["size", str(path)]) == 0
    capsys.readouterr()


def test_reorders_never_cross_a_leg():
    from apsidal.compiler.reorder import blocks

    program = load_text(mission(), "legs.aps")
    leg_at = next(i for i, s in enumerate(program.steps) if s.kind == "leg")
    for block in blocks(program):
        assert all(i < leg_at for i in block) or all(i > leg_at for i in block)


def test_diff_matches_steps_across_phases(tmp_path, capsys):
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(mission())
    new.write_text(mission().replace("apoapsis to 33000 km", "apoapsis to 30000 km"))
    assert main(["diff", str(old), str(new), "--format", "json"]) in (0, 1)
    rep = strict_json(capsys.readouterr().out)
    status = {s["name"]: s["status"] for s in rep["steps"]}
    assert status["capture"] == "changed" and status["cruise"] == "same"
    assert status["depart"] == "same" and status["lower"] == "changed"
    # a leg's arrival vinf alone changed is a changed leg
    given = mission(leg="leg cruise to mars vinf 2.944801864 km/s to 2.6 km/s for 259 d")
    old.write_text(given)
    new.write_text(given.replace("to 2.6 km/s", "to 2.7 km/s"))
    main(["diff", str(old), str(new), "--format", "json"])
    rep = strict_json(capsys.readouterr().out)
    status = {s["name"]: s["status"] for s in rep["steps"]}
    assert status["cruise"] == "changed" and status["depart"] == "same"


def test_the_table_says_where_the_body_changes(tmp_path, capsys, monkeypatch):
    path = tmp_path / "mission.aps"
    path.write_text(mission())
    for width in ("80", "120"):
        monkeypatch.setenv("COLUMNS", width)
        assert main(["run", str(path)]) == 0
        out = capsys.readouterr().out
        assert "Mars: " in out
        assert max(len(line) for line in out.splitlines()) <= int(width)
        # under the totals, the leg's figures on one line of their own
        assert re.search(r"^leg cruise +Earth to Mars, Hohmann: vinf 2\.945 -> 2\.649 km/s, "
                         r"258\.9 d$", out, re.MULTILINE), out


def test_a_round_trip_is_one_chain_and_the_hohmann_legs_mirror():
    text = ('plan "Round trip"\naround earth\n' + CRAFT + """\
start circular 300 km
burn depart at periapsis: vinf to leg
leg out to mars
start orbit periapsis 300 km
burn capture at periapsis: period to 7 h
coast stay for 450 d
burn leave at periapsis: vinf to leg
leg back to earth
start orbit periapsis 400 km
burn home at periapsis: circular
""")
    rep = report_of(text)
    out, back = step(rep, "out")["leg"], step(rep, "back")["leg"]
    # the Hohmann transfer flown backwards: the same two speeds, swapped, and the same time
    assert back["vinf_depart_km_s"] == pytest.approx(out["vinf_arrive_km_s"], rel=1e-12)
    assert back["vinf_arrive_km_s"] == pytest.approx(out["vinf_depart_km_s"], rel=1e-12)
    assert [s["body"] for s in rep["steps"]] == ["Earth", "Mars", "Mars", "Mars", "Mars",
                                                 "Earth", "Earth"]
    leave = step(rep, "leave")
    assert step(rep, "back")["elapsed_s"] == pytest.approx(
        leave["elapsed_s"] + back["time_of_flight_s"], rel=1e-12)
    home = step(rep, "home")["orbit_after"]
    assert home["periapsis_alt_km"] == pytest.approx(400.0) and home["ecc"] < 1e-9
    assert [p["first_index"] for p in rep["phases"]] == [1, 3, 7]


def test_an_arrival_start_past_the_sphere_of_influence_is_flagged(tmp_path, capsys):
    mars = bodies.lookup("mars")
    text = mission().replace("anomaly -80 deg", "anomaly -128 deg")
    path = tmp_path / "far.aps"
    path.write_text(text)
    assert main(["run", str(path), "--format", "json"]) == 0
    rep = strict_json(capsys.readouterr().out)
    far = [f for f in rep["findings"] if f["rule"] == "beyond-sphere-of-influence"]
    assert far and far[0]["steps"] == ["cruise"] and "Mars" in far[0]["message"]
    # the state it names is the arrival's, measured from Mars: vis-viva's orbit equation
    e = 1 + (mars.radius + 400) * step(rep, "cruise")["leg"]["vinf_arrive_km_s"] ** 2 / mars.gm
    r = (mars.radius + 400) * (1 + e) / (1 + e * math.cos(math.radians(-128)))
    said = re.search(r"the craft is ([\d,]+) km from Mars", far[0]["message"])
    assert float(said.group(1).replace(",", "")) == pytest.approx(r, abs=1.0)
    path.write_text(mission())  # from -80 deg: well inside, and nothing said of the Earth
    main(["run", str(path), "--format", "json"])
    rep = strict_json(capsys.readouterr().out)
    assert not [f for f in rep["findings"] if f["rule"] == "beyond-sphere-of-influence"]


# --- a direct entry from the arrival hyperbola ---------------------------------------------


def test_direct_entry_from_the_arrival_hyperbola():
    text = ('plan "Direct"\naround earth\n' + CRAFT + """\
start circular 300 km
burn depart at periapsis: vinf to leg
leg cruise to mars
start orbit periapsis -20 km inclination 10 deg anomaly -80 deg
entry descent at 125 km
""")
    rep = report_of(text)
    mars = bodies.lookup("mars")
    vinf = step(rep, "cruise")["leg"]["vinf_arrive_km_s"]
    entry = step(rep, "descent")["entry"]
    # energy: v^2 = vinf^2 + 2 mu / r at the interface (vis-viva on the hyperbola)
    r = mars.radius + 125.0
    assert entry["speed_m_s"] / 1000 == pytest.approx(math.sqrt(vinf**2 + 2 * mars.gm / r),
                                                      rel=1e-9)
    assert entry["flight_path_angle_deg"] < 0


# --- `vinf to leg`: the departure burn's goal from the leg ---------------------------------


def test_vinf_to_leg_flies_the_legs_departure_vinf():
    rep = report_of(mission(vinf="X").replace("vinf to X km/s", "vinf to leg"))
    leg = step(rep, "cruise")["leg"]
    o = step(rep, "depart")["orbit_after"]
    earth = bodies.lookup("earth")
    assert math.sqrt(-earth.gm / o["sma_km"]) == pytest.approx(leg["vinf_depart_km_s"],
                                                                 rel=1e-9)
    given = report_of(mission())  # the same vinf written out
    assert step(rep, "depart")["dv_m_s"] == pytest.approx(step(given, "depart")["dv_m_s"],
                                                         abs=1e-5)


def test_vinf_to_leg_in_a_checked_rewrite_reads_back():
    text = ('plan "Merge"\naround earth\n' + CRAFT + """\
start circular 300 km inclination 28.5 deg
burn turn at periapsis: inclination to 0 deg
burn depart at periapsis: vinf to leg
leg cruise to mars
start orbit periapsis 300 km
burn capture at periapsis: period to 7 h
""")
    from apsidal.compiler.check import check_program

    program = load_text(text, "merge.aps")
    findings = check_program(program)
    merged = [f for f in findings if f.rule == "merge-burns"]
    assert merged and "inclination to 0 deg, vinf to leg" in merged[0].suggestion


# --- bad input ------------------------------------------------------------------------------

LEG_HEAD = 'plan "Probe"\naround earth\n' + CRAFT + "start circular 300 km\n"  # lines 1-8
GOOD_VINF = "2.944801864"


def leg_plan(*lines: str) -> str:
    return LEG_HEAD + "".join(x + "\n" for x in lines)


DEPART = f"burn depart at periapsis: vinf to {GOOD_VINF} km/s"
ARRIVE = "start orbit periapsis 300 km"

BAD = [
    Bad("leg-from-closed-orbit", leg_plan("leg cruise to mars", ARRIVE), 9, 1, "leg",
        ("a leg leaves on a hyperbola", "closed orbit about Earth"), "vinf to 2.94480"),
    Bad("leg-vinf-mismatch", leg_plan("burn depart at periapsis: vinf to 2.9 km/s",
                                      "leg cruise to mars", ARRIVE), 10, 1, "leg",
        ("vinf is 2.90000 km/s", "needs 2.94480 km/s"), "vinf to 2.94480 km/s"),
    Bad("leg-no-common-parent", leg_plan(DEPART, "leg cruise to moon", ARRIVE), 10, 15, "moon",
        ("do not orbit a common parent",), "vinf 3 km/s to 2.6 km/s for 200 d"),
    Bad("leg-same-body", leg_plan(DEPART, "leg cruise to earth", ARRIVE), 10, 15, "earth",
        ("already flies around",), "another body"),
    Bad("leg-unknown-body", leg_plan(DEPART, "leg cruise to marz", ARRIVE), 10, 15, "marz",
        ("unknown body `marz`",), "mars"),
    Bad("leg-arrival-under-surface", leg_plan(DEPART, "leg cruise to mars",
                                              "start orbit periapsis -100 km"), 11, 13,
        "periapsis", ("under the surface of Mars",), "above it"),
    Bad("leg-no-arrival-start", leg_plan(DEPART, "leg cruise to mars",
                                         "burn capture at periapsis: apoapsis to 30000 km"),
        10, 1, "leg", ("needs its arrival start before the next step",), "start orbit"),
    Bad("leg-arrival-circular", leg_plan(DEPART, "leg cruise to mars", "start circular 300 km"),
        11, 1, "start", ("not a circle",), "start orbit periapsis"),
    Bad("leg-arrival-apoapsis", leg_plan(DEPART, "leg cruise to mars",
                                         "start orbit periapsis 300 km apoapsis 900 km"),
        11, 30, "apoapsis", ("takes no `apoapsis`",), "vinf comes from the leg"),
    Bad("leg-arrival-vinf-mismatch", leg_plan(DEPART, "leg cruise to mars",
                                              "start orbit periapsis 300 km vinf 3 km/s"),
        11, 30, "vinf", ("is not the leg's",), "drop `vinf`"),
    Bad("leg-around-after", leg_plan(DEPART, "leg cruise to mars", ARRIVE, "around mars"),
        12, 1, "around", ("already takes the plan around mars",), "drop this `around`"),
    Bad("leg-arrival-under-surface-then-burn",
        leg_plan(DEPART, "leg cruise to mars", "start orbit periapsis -20 km",
                 "burn x: along 1 m/s", "entry descent at 125 km"), 11, 13, "periapsis",
        ("under the surface of Mars",), "for a direct entry"),
    Bad("vinf-to-leg-without-leg", leg_plan("burn depart at periapsis: vinf to leg"), 9, 27,
        "vinf to leg", ("no leg follows this burn",), "vinf to 3 km/s"),
    Bad("leg-given-wrong-unit", leg_plan(DEPART, "leg cruise to mars vinf 3 km to 2 km/s for 9 d",
                                         ARRIVE), 10, 25, "3 km", ("speed",), "km/s"),
]


@pytest.mark.parametrize("case", [pytest.param(c, id=c.id) for c in BAD])
def test_bad_leg(case, tmp_path, capsys, monkeypatch):
    monkeypatch.delenv("APSIDAL_DEBUG", raising=False)
    path = write(tmp_path, case)
    code = main(["run", str(path), "--format", case.fmt])
    out, err = capsys.readouterr()
    check_error(case, path, code, out, err)


# --- properties ----------------------------------------------------------------------------

@settings(max_examples=40, deadline=None)
@given(vinf_out=st.floats(0.5, 8.0), vinf_in=st.floats(0.5, 8.0), days=st.floats(30, 900),
       alt=st.floats(100, 80000), inc=st.floats(0, 180), share=st.floats(-0.95, 0.95),
       coast_h=st.floats(0.1, 48))
def test_a_given_leg_keeps_one_chain(vinf_out, vinf_in, days, alt, inc, share, coast_h):
    """Whatever the leg's figures and the arrival hyperbola: the clock adds the time of
    flight, the mass runs on, the arrival orbit has the leg's vinf (energy vinf^2 / 2)
    and the plane and periapsis the start names, and a coast on it keeps its energy."""
    mars = bodies.lookup("mars")
    e = 1 + (mars.radius + alt) * vinf_in**2 / mars.gm
    anomaly = share * math.degrees(math.acos(-1 / e))
    text = ('plan "Prop"\naround earth\n' + CRAFT + f"""\
start circular 300 km
burn depart at periapsis: vinf to leg
leg cruise to mars vinf {vinf_out!r} km/s to {vinf_in!r} km/s for {days!r} d
start orbit periapsis {alt!r} km inclination {inc!r} deg anomaly {anomaly!r} deg
coast drift for {coast_h!r} h
""")
    result = run(load_text(text, "prop.aps"))
    if not result.ok:  # only a coast that would run into Mars may stop the chain
        assert "surface" in result.error.message or "periapsis" in result.error.message
        return
    rep = budget(result)
    depart, cruise, drift = rep["steps"]
    assert cruise["elapsed_s"] == pytest.approx(depart["elapsed_s"] + days * 86400, rel=1e-12)
    assert cruise["mass_after_kg"] == depart["mass_after_kg"]
    for s in (cruise, drift):
        o = s["orbit_after"]
        assert math.sqrt(-mars.gm / o["sma_km"]) == pytest.approx(vinf_in, rel=1e-9)
        assert o["periapsis_alt_km"] == pytest.approx(alt, rel=1e-9, abs=1e-6)
        assert o["inclination_deg"] == pytest.approx(inc, abs=1e-7)
    o = depart["orbit_after"]
    assert math.sqrt(-bodies.lookup("earth").gm / o["sma_km"]) == pytest.approx(vinf_out,
                                                                                 rel=1e-9)


def test_a_sweep_across_a_leg_prices_each_variant_as_run_does(tmp_path, capsys):
    """The batch axis through a leg: a trade over the parking orbit (before the leg) and
    over the capture (after it) gives, for every variant, the plan's own `run` total."""
    base = mission()
    path = tmp_path / "swept.aps"
    path.write_text(base + "trade park: vary start.circular 250..450 km points 3\n"
                    + "trade cap: vary capture.apoapsis 20000..40000 km points 3\n")
    for trade, field, values, old in (
            ("park", "start.circular", (250.0, 350.0, 450.0), "start circular 300 km"),
            ("cap", "capture.apoapsis", (20000.0, 30000.0, 40000.0), "apoapsis to 33000 km")):
        assert main(["sweep", str(path), "--trade", trade, "--format", "json"]) in (0, 1)
        rep = strict_json(capsys.readouterr().out)
        for variant, value in zip(rep["variants"], values):
            assert variant["values"][field] == pytest.approx(value)
            new = (f"start circular {value:g} km" if trade == "park"
                   else f"apoapsis to {value:g} km")
            own = report_of(base.replace(old, new + (" inclination 28.5 deg"
                                                     if trade == "park" else "")
                                         ).replace("28.5 deg inclination 28.5 deg",
                                                   "28.5 deg"))
            assert variant["totals"]["dv_m_s"] == pytest.approx(own["totals"]["dv_m_s"],
                                                                rel=1e-9)
            assert variant["totals"]["elapsed_s"] == pytest.approx(
                own["totals"]["elapsed_s"], rel=1e-12)


def test_csv_and_markdown_name_the_body(tmp_path, capsys):
    import csv
    import io

    path = tmp_path / "mission.aps"
    path.write_text(mission())
    assert main(["run", str(path), "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    steps = [r for r in rows if r["record"] == "step"]
    assert [(r["name"], r["body"]) for r in steps][1:4] == [
        ("out", "Earth"), ("cruise", "Mars"), ("in", "Mars")]
    assert main(["run", str(path), "--format", "markdown"]) == 0
    md = capsys.readouterr().out
    assert "| Mars: 400.0 x open i 75.00 |" in md
    assert "- leg cruise Earth to Mars, Hohmann: vinf 2.945 -> 2.649 km/s, 258.9 d" in md
