"""Every plan in samples/ runs clean, and each one shows a few facts worked out here.

The facts are computed in this file from the two-body formulas, not read back from the
compiler: vis-viva, the Hohmann and plane-change delta-v, the rocket equation and the
hyperbolic Kepler equation.  The body constants are the ones the report states it used
(so the check is of the physics, not of the catalogue, which tests/test_bodies.py covers).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import re
from functools import cache
from pathlib import Path

import pytest
from apsidal.compiler.cli import main

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
SAMPLE_FILES = sorted(SAMPLES.glob("*.aps"))
G0 = 9.80665  # standard gravity, m/s^2 (CGPM 1901, exact)


@cache
def run_json(path: Path) -> tuple[int, dict, str]:
    """Exit code, parsed JSON report and stderr of `apsidal run PATH --format json`."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["run", str(path), "--format", "json"])
    return code, json.loads(out.getvalue()), err.getvalue()


def report(stem: str) -> dict:
    code, rep, err = run_json(SAMPLES / f"{stem}.aps")
    assert code == 0, err
    return rep


def step(rep: dict, name: str) -> dict:
    found = [s for s in rep["steps"] if s["name"] == name]
    assert len(found) == 1, f"no single step named {name!r} in {[s['name'] for s in rep['steps']]}"
    return found[0]


def previous(rep: dict, name: str) -> dict:
    i = rep["steps"].index(step(rep, name))
    assert i > 0
    return rep["steps"][i - 1]


# --- two-body formulas, written out here (textbook relations, from memory) -----------


def circular_speed(mu: float, r: float) -> float:
    return math.sqrt(mu / r)


def vis_viva(mu: float, r: float, a: float) -> float:
    """Speed at radius r on a conic of semi-major axis a (negative for a hyperbola)."""
    return math.sqrt(mu * (2.0 / r - 1.0 / a))


def close(x: float):
    """Equal to within the report's rounding (6 decimals) and float noise."""
    return pytest.approx(x, rel=1e-9, abs=2e-6)


def craft_numbers(stem: str) -> dict[str, float]:
    """Dry and propellant mass as the sample file states them."""
    text = (SAMPLES / f"{stem}.aps").read_text()
    return {k: float(re.search(rf"^\s*{k}\s+([\d.]+)\s*kg", text, re.MULTILINE).group(1))
            for k in ("dry", "propellant")}


def propellant(mass: float, dv_m_s: float, isp: float) -> float:
    """Tsiolkovsky: the propellant a burn of dv uses from a craft of this mass."""
    return mass * (1.0 - math.exp(-dv_m_s / (isp * G0)))


# --- every sample ----------------------------------------------------------------------


def test_there_are_samples():
    assert len(SAMPLE_FILES) >= 3


@pytest.mark.parametrize("path", SAMPLE_FILES, ids=lambda p: p.stem)
def test_sample_runs_clean(path):
    code, rep, err = run_json(path)
    assert code == 0
    assert err == ""
    assert "error" not in rep
    assert rep["steps"], "a sample with no steps shows nothing"
    assert rep["totals"]["expectations_met"] is True
    checks = [c for s in rep["steps"] for c in s.get("checks", [])]
    assert checks, "every sample states at least one expectation"
    failed = [(s["name"], c) for s in rep["steps"] for c in s.get("checks", [])
              if not c["passed"]]
    assert failed == []
    assert rep["totals"]["reserve_met"] is True
    assert rep["totals"]["propellant_left_kg"] >= 0


@pytest.mark.parametrize("path", SAMPLE_FILES, ids=lambda p: p.stem)
def test_sample_expectations_hold_by_their_own_numbers(path):
    """Each passed check's actual value really is within its tolerance or bound."""
    _, rep, _ = run_json(path)
    for s in rep["steps"]:
        for c in s.get("checks", []):
            if c["comparator"] == "within":
                diff = c["actual"] - c["expected"]
                if c["unit"] == "deg":
                    diff = (diff + 180.0) % 360.0 - 180.0
                assert abs(diff) <= c["tolerance"] * (1 + 1e-9), (s["name"], c)
            elif c["comparator"] == "at least":
                assert c["actual"] >= c["expected"], (s["name"], c)
            else:
                assert c["actual"] <= c["expected"], (s["name"], c)


# --- the geostationary relay ------------------------------------------------------------


def test_relay_reaches_geostationary_slot():
    rep = report("relay-geo")
    o = step(rep, "circ")["orbit_after"]
    assert o["periapsis_alt_km"] == pytest.approx(35786.0, abs=0.01)
    assert o["apoapsis_alt_km"] == pytest.approx(35786.0, abs=0.01)
    assert o["ecc"] < 1e-6
    assert o["inclination_deg"] == pytest.approx(0.0, abs=1e-6)
    # period of the slot: 2 pi sqrt(a^3 / mu), a sidereal day of 86164.1 s (from memory)
    assert o["period_s"] == pytest.approx(86164.1, abs=1.0)


def test_relay_hohmann_with_plane_change_at_apoapsis():
    """Burn 1 is the tangential Hohmann departure; burn 2 circularises and turns 27 deg.

    dv1 = v_c1 (sqrt(2 r2 / (r1 + r2)) - 1); dv2 from the law of cosines,
    sqrt(va^2 + vc2^2 - 2 va vc2 cos di) (textbook relations, from memory).
    """
    rep = report("relay-geo")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    r1, r2 = R + 250.0, R + 35786.0
    a = 0.5 * (r1 + r2)
    dv1 = (vis_viva(mu, r1, a) - circular_speed(mu, r1)) * 1000.0
    va, vc2 = vis_viva(mu, r2, a), circular_speed(mu, r2)
    di = math.radians(27.0)
    dv2 = math.sqrt(va**2 + vc2**2 - 2 * va * vc2 * math.cos(di)) * 1000.0
    raise_, circ = step(rep, "raise"), step(rep, "circ")
    assert raise_["dv_m_s"] == close(dv1)
    assert circ["dv_m_s"] == close(dv2)
    assert raise_["dv_with_margin_m_s"] == close(dv1 * 1.05)
    # propellant by the rocket equation, engine `main` isp 321 s, margin 5 %
    m0 = sum(craft_numbers("relay-geo").values())
    p1 = propellant(m0, dv1 * 1.05, 321.0)
    p2 = propellant(m0 - p1, dv2 * 1.05, 321.0)
    assert raise_["propellant_kg"] == close(p1)
    assert circ["propellant_kg"] == close(p2)
    # the apoapsis burn flies half an orbit of the transfer ellipse after the first one
    half = math.pi * math.sqrt(a**3 / mu)
    assert circ["elapsed_s"] - raise_["elapsed_s"] == close(half)


def test_relay_trim_burn_and_cover_drop():
    rep = report("relay-geo")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    tweak = step(rep, "tweak")
    assert tweak["vector_m_s"]["along"] == pytest.approx(1.5, abs=1e-9)
    assert tweak["vector_m_s"]["cross"] == pytest.approx(-0.3, abs=1e-9)
    assert tweak["dv_m_s"] == close(math.hypot(1.5, 0.3))
    # engine `trim`, isp 228 s, margin 20 %
    m_before = previous(rep, "tweak")["mass_after_kg"]
    assert tweak["propellant_kg"] == close(propellant(m_before, math.hypot(1.5, 0.3) * 1.2, 228.0))
    # 1.5 m/s along at the circular slot raises the far side: vis-viva gives the new sma
    r = R + 35786.0
    v_new = math.hypot(circular_speed(mu, r) + 1.5e-3, 0.3e-3)
    a = 1.0 / (2.0 / r - v_new**2 / mu)
    o = tweak["orbit_after"]
    assert o["sma_km"] == close(a)
    assert o["periapsis_alt_km"] == pytest.approx(35786.0, abs=1e-3)
    assert o["apoapsis_alt_km"] == pytest.approx(2 * a - r - R, abs=1e-3)
    # the cross component tilts the plane by atan(0.3 / v)
    tilt = math.degrees(math.atan2(0.3e-3, circular_speed(mu, r) + 1.5e-3))
    assert o["inclination_deg"] == pytest.approx(tilt, abs=1e-6)
    cover = step(rep, "cover")
    assert cover["kind"] == "drop"
    assert cover["mass_after_kg"] == pytest.approx(tweak["mass_after_kg"] - 4.5, abs=1e-6)


def test_relay_burn_time_from_thrust_and_mass_flow():
    """t = m_prop / mdot with mdot = F / (Isp g0), for the engine each burn names."""
    rep = report("relay-geo")
    text = (SAMPLES / "relay-geo.aps").read_text()
    scale = {"N": 1.0, "kN": 1000.0}
    engines = {m[0]: (float(m[1]), float(m[2]) * scale[m[3]]) for m in re.findall(
        r"engine\s+(\S+)\s+isp\s+([\d.]+)\s*s\s+thrust\s+([\d.]+)\s*(k?N)", text)}
    for name in ("raise", "circ", "tweak"):
        s = step(rep, name)
        isp, thrust = engines[s["engine"]]
        per_kg = isp * G0 / thrust  # seconds of burn per kg; the report rounds kg to 1e-6
        assert s["duration_s"] == pytest.approx(s["propellant_kg"] * per_kg,
                                                abs=5e-7 * per_kg + 1e-6)
    assert step(rep, "tweak")["engine"] == "trim"
    assert step(rep, "circ")["engine"] == "main"  # the first engine is the default


# --- the lunar polar mapper ---------------------------------------------------------------


def test_lunar_sample_ends_polar():
    rep = report("lunar-polar")
    final = rep["steps"][-1]["orbit_after"]
    assert final["inclination_deg"] == pytest.approx(90.0, abs=0.01)
    assert final["periapsis_alt_km"] == pytest.approx(100.0, abs=0.5)
    assert final["apoapsis_alt_km"] == pytest.approx(115.0, abs=0.01)
    mapping = step(rep, "mapping")["orbit_after"]
    assert mapping["inclination_deg"] == pytest.approx(90.0, abs=1e-6)
    assert mapping["ecc"] < 1e-6


def test_lunar_three_burn_plane_change_beats_a_single_turn():
    """Raise to 4000 km, turn 70 deg at apoapsis, lower back: 2 dv_raise + 2 va sin(35)."""
    rep = report("lunar-polar")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    rp, ra = R + 100.0, R + 4000.0
    a = 0.5 * (rp + ra)
    vc = circular_speed(mu, rp)
    raise_dv = (vis_viva(mu, rp, a) - vc) * 1000.0
    turn_dv = 2 * vis_viva(mu, ra, a) * math.sin(math.radians(35.0)) * 1000.0
    names = [s["name"] for s in rep["steps"]]
    assert names[:3] == ["polar/1", "polar/2", "polar/3"]
    burns = [step(rep, f"polar/{i}")["dv_m_s"] for i in (1, 2, 3)]
    assert burns[0] == close(raise_dv)
    assert burns[1] == close(turn_dv)
    assert burns[2] == close(raise_dv)
    single_turn = 2 * vc * math.sin(math.radians(35.0)) * 1000.0
    assert sum(burns) < single_turn


def test_lunar_survey_coast_is_twelve_periods():
    rep = report("lunar-polar")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    period = 2 * math.pi * math.sqrt((R + 100.0) ** 3 / mu)
    survey = step(rep, "survey")
    assert survey["elapsed_s"] - previous(rep, "survey")["elapsed_s"] == close(12 * period)


# --- the Mars arrival ------------------------------------------------------------------------


def test_mars_capture_from_the_hyperbola():
    """Capture dv = sqrt(vinf^2 + 2 mu / rp) - vis-viva on the 400 x 33000 km ellipse."""
    rep = report("mars-capture")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    rp, ra = R + 400.0, R + 33000.0
    v_hyp = math.sqrt(2.65**2 + 2 * mu / rp)
    dv = (v_hyp - vis_viva(mu, rp, 0.5 * (rp + ra))) * 1000.0
    capture = step(rep, "capture")
    assert capture["dv_m_s"] == close(dv)
    assert capture["vector_m_s"]["along"] == close(-dv)
    # time from anomaly -40 deg to periapsis: hyperbolic Kepler equation
    # tanh(F/2) = sqrt((e-1)/(e+1)) tan(nu/2), M = e sinh F - F, t = M sqrt(-a^3/mu)
    e = 1.0 + rp * 2.65**2 / mu
    a = rp / (1.0 - e)
    F = 2 * math.atanh(math.sqrt((e - 1) / (e + 1)) * math.tan(math.radians(40.0) / 2))
    t = (e * math.sinh(F) - F) * math.sqrt(-(a**3) / mu)
    assert capture["coast_before_s"] == close(t)
    assert capture["elapsed_s"] == close(t)


def test_mars_lander_drop_shows_in_the_mass_chain():
    rep = report("mars-capture")
    lander = step(rep, "lander")
    assert lander["kind"] == "drop"
    assert lander["propellant_kg"] == 0.0
    assert lander["mass_after_kg"] == pytest.approx(
        previous(rep, "lander")["mass_after_kg"] - 95.0, abs=1e-6)
    # the dry mass less the lander is what remains beside the propellant
    final = rep["totals"]
    assert final["final_mass_kg"] - final["propellant_left_kg"] == close(
        craft_numbers("mars-capture")["dry"] - 95.0)


def test_mars_science_orbit():
    rep = report("mars-capture")
    science = step(rep, "science")["orbit_after"]
    assert science["periapsis_alt_km"] == pytest.approx(400.0, abs=1e-3)
    assert science["apoapsis_alt_km"] == pytest.approx(400.0, abs=1e-3)
    assert science["inclination_deg"] == pytest.approx(93.0, abs=1e-6)
    # the plane burn at apoapsis of 400 x 8000 km turns 18 deg: 2 va sin(9 deg)
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    rp, ra = R + 400.0, R + 8000.0
    va = vis_viva(mu, ra, 0.5 * (rp + ra))
    assert step(rep, "plane")["dv_m_s"] == close(2 * va * math.sin(math.radians(9.0)) * 1000.0)


def test_mars_loiter_is_two_capture_periods():
    rep = report("mars-capture")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    a = 0.5 * (2 * R + 400.0 + 33000.0)
    period = 2 * math.pi * math.sqrt(a**3 / mu)
    loiter = step(rep, "loiter")
    assert loiter["elapsed_s"] - previous(rep, "loiter")["elapsed_s"] == pytest.approx(
        2 * period, rel=1e-6)


# --- the dispenser: phased slots and the carrier's disposal ------------------------------


def test_weft_slots_are_a_third_of_a_turn_apart():
    """A craft left on the circle moves on at the mean motion n; the carrier comes back to
    the point of its burn 15 phasing periods later, T' = T (1 + (120 / 360) / 15), so the
    craft it left there is n 15 T' = 15 turns + 120 deg ahead of it (Kepler's third law)."""
    rep = report("weft-slots")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    r = R + 560.0
    period = 2 * math.pi * math.sqrt(r**3 / mu)
    drops = [step(rep, name)["elapsed_s"] for name in ("weft-a", "weft-b", "weft-c")]
    ahead = lambda t: math.degrees(2 * math.pi * t / period) % 360.0
    assert ahead(drops[1] - drops[0]) == pytest.approx(120.0, abs=1e-6)  # A ahead of B
    assert ahead(drops[2] - drops[1]) == pytest.approx(120.0, abs=1e-6)  # B ahead of C
    assert ahead(drops[2] - drops[0]) == pytest.approx(240.0, abs=1e-6)  # C 120 ahead of A
    # each phasing orbit: vis-viva at the burn point, the period from Kepler's third law
    t_phase = period * (1 + (120.0 / 360.0) / 15)
    a_phase = (mu * (t_phase / (2 * math.pi)) ** 2) ** (1 / 3)
    dv = (vis_viva(mu, r, a_phase) - circular_speed(mu, r)) * 1000.0
    for name in ("slot-b/1", "slot-b/2", "slot-c/1", "slot-c/2"):
        assert step(rep, name)["dv_m_s"] == close(dv)
    assert step(rep, "slot-b/1")["orbit_after"]["apoapsis_alt_km"] == close(2 * a_phase - r - R)
    assert step(rep, "slot-b/2")["coast_before_s"] == close(15 * t_phase)


def test_weft_carrier_disposal_and_entry():
    """The disposal burn lowers the perigee to -30 km from the 560 km circle (vis-viva on
    the -30 x 560 km ellipse); the entry speed at 120 km is vis-viva there and the
    flight-path angle follows from the angular momentum, cos(gamma) = h / (r v)."""
    rep = report("weft-slots")
    mu, R = rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]
    ra, rp, r = R + 560.0, R - 30.0, R + 120.0
    a = 0.5 * (ra + rp)
    v_apo = vis_viva(mu, ra, a)
    deorbit = step(rep, "deorbit")
    assert deorbit["dv_m_s"] == close((circular_speed(mu, ra) - v_apo) * 1000.0)
    assert deorbit["vector_m_s"]["along"] < 0
    entry = step(rep, "reentry")
    assert entry["kind"] == "entry" and rep["steps"][-1] is entry
    speed = vis_viva(mu, r, a)
    gamma = -math.degrees(math.acos(ra * v_apo / (r * speed)))
    assert entry["entry"]["speed_m_s"] == close(speed * 1000.0)
    assert entry["entry"]["flight_path_angle_deg"] == pytest.approx(gamma, abs=1e-7)
    # the time down from apoapsis to 120 km: Kepler's equation, E from r = a (1 - e cos E)
    e = (ra - rp) / (ra + rp)
    E = 2 * math.pi - math.acos((1 - r / a) / e)
    t = (E - e * math.sin(E) - math.pi) * math.sqrt(a**3 / mu)
    assert entry["coast_time_s"] == close(t)
