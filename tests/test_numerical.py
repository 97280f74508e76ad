"""The evaluator's orbit-state chain against an independent numerical integration.

scipy's DOP853 integrator (rtol 1e-13) propagates the same two-body motion between burns,
and each burn is applied as the velocity jump the evaluator itself reports (the inertial
difference of the velocities after and just before it).  The chain the integrator builds
must match the evaluator's state after every step to 1 m and 1 mm/s.  The Kepler routines
(kepler.propagate, kepler.place, kepler.time_of_flight) are also checked one by one against
the integrator and, for the time of flight, against a quadrature of dt = r^2 / h dtheta.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from apsidal.compiler import kepler
from apsidal.compiler.state import local_frame, state_from_elements
from scipy.integrate import quad

POSITION_TOL = 1e-3  # km: 1 m
VELOCITY_TOL = 1e-6  # km/s: 1 mm/s
MU_EARTH = 398600.4418

PLANS = {
    "eccentric-retrograde": (
        ("start orbit periapsis 300 km apoapsis 20000 km inclination 120 deg raan 40 deg "
         "argp 70 deg anomaly 10 deg"),
        "burn lower at apoapsis: periapsis to 1000 km",
        "coast wait for 5 h",
        "burn tilt at descending node: inclination to 100 deg",
        "coast loop 2 rev",
        "burn kick at anomaly 200 deg: along 50 m/s, cross 10 m/s, radial 20 m/s",
        "coast home to periapsis",
        "burn swing at crossing: raan to 60 deg",
        "coast drift for 40 min",
    ),
    "near-equatorial": (
        "start circular 700 km inclination 0.01 deg raan 20 deg",
        "burn up at ascending node: apoapsis to 5000 km",
        "coast climb to apoapsis",
        "burn circ: circular",
        "coast wait for 3 h",
        "burn tilt at node: inclination to 0.5 deg",
        "coast loop 1 rev",
        "coast aside to anomaly 90 deg",
        "burn nudge: along -20 m/s, radial 5 m/s",
    ),
    "equatorial": (
        "start orbit periapsis 500 km apoapsis 3000 km argp 45 deg anomaly 30 deg",
        "coast climb to apoapsis",
        "burn tilt at node: inclination to 5 deg",
        "burn up at periapsis: apoapsis to 8000 km",
        "coast wait for 2 h",
        "burn down at anomaly 300 deg: cross -15 m/s",
    ),
    "retrograde-sun-synchronous": (
        "start circular 800 km inclination 98.6 deg raan 200 deg anomaly 37 deg",
        "transfer up: circular 1500 km",
        "burn trim at descending node: inclination to 97.2 deg",
        "coast loop 3 rev",
        "coast on to ascending node",
        "burn lift at anomaly 45 deg: apoapsis to 2500 km",
        "coast for 100 min",
    ),
    "leo-to-geo-split": (
        "start circular 250 km inclination 27 deg raan 110 deg anomaly 80 deg",
        "transfer geo at node: circular 35786 km, inclination to 1 deg",
        "coast settle for 2 d",
        "burn tweak: along 1.5 m/s, cross -0.3 m/s",
        "drop cover 4.5 kg",
        "coast more for 7 h",
    ),
    "bi-elliptic-and-detour": (
        "start circular 600 km inclination 40 deg raan 15 deg",
        "transfer far: circular 60000 km via apoapsis 150000 km",
        "coast wait for 9 h",
        "transfer turn at descending node: inclination to 80 deg via apoapsis 120000 km",
        "coast to anomaly 10 deg",
    ),
    "departure": (
        "start circular 300 km inclination 28.5 deg anomaly 15 deg",
        "burn escape: along 3.5 km/s",
        "coast out for 6 h",
        "burn correct: radial 40 m/s",
        "coast on for 2 h",
    ),
}

MARS_PLANS = {
    "hyperbolic-arrival": (
        ("start orbit periapsis 400 km vinf 2.65 km/s inclination 75 deg raan 20 deg "
         "anomaly -40 deg"),
        "coast approach for 4 min",
        "burn capture at periapsis: apoapsis to 33000 km",
        "coast loiter 2 rev",
        "burn walk at periapsis: apoapsis to 8000 km",
        "burn plane at apoapsis: inclination to 93 deg",
        "burn science at periapsis: apoapsis to 400 km",
        "coast map for 5 h",
    ),
    "hyperbolic-flyby-retrograde": (
        ("start orbit periapsis 900 km ecc 1.8 inclination 150 deg raan 300 deg argp 20 deg "
         "anomaly -70 deg"),
        "coast in to periapsis",
        "burn brake: along -300 m/s",
        "coast out for 3 h",
    ),
}


def assert_at(at: str, r, v, mu: float) -> None:
    """The pre-burn state is where the report says the burn is (computed here)."""
    e_vec = ((v @ v - mu / np.linalg.norm(r)) * r - (r @ v) * v) / mu
    e = np.linalg.norm(e_vec)
    h = np.cross(r, v)
    inclined = math.hypot(h[0], h[1]) > 1e-9 * np.linalg.norm(h)
    # true anomaly; for a circular orbit the argument of latitude (state.py's convention)
    node = np.cross([0.0, 0.0, 1.0], h) if inclined else np.array([1.0, 0.0, 0.0])
    ref = e_vec if e > 1e-9 else node
    nu = math.atan2(np.cross(ref, r) @ h / np.linalg.norm(h), ref @ r) % (2 * math.pi)
    sweep = lambda target: abs((nu - target + math.pi) % (2 * math.pi) - math.pi)
    if at == "periapsis" and e > 1e-9:
        assert sweep(0.0) < 1e-9
    elif at == "apoapsis" and e > 1e-9:
        assert sweep(math.pi) < 1e-9
    elif at.startswith("anomaly"):
        assert sweep(math.radians(float(at.split()[1]))) < 1e-9
    elif at.endswith("node") and inclined:
        assert abs(r[2]) < 1e-9 * np.linalg.norm(r)
        if at != "node":
            assert bool(v[2] > 0) == (at == "ascending node")


def chain_check(plans, numeric, text: str) -> int:
    """Fly the evaluator's chain again with the integrator; returns the burns checked."""
    result = plans.result(text)
    mu = result.program.body.gm
    r_eval, v_eval = result.program.start_r, result.program.start_v
    r_num, v_num = r_eval.copy(), v_eval.copy()
    burns = 0
    assert result.rows
    for row in result.rows:
        after_r, after_v = row.after.r[0], row.after.v[0]
        if row.coast_time is not None:
            dt = float(row.coast_time[0])
            assert dt >= 0.0
            r_num, v_num = numeric(r_num, v_num, mu, dt)
            if row.kind == "burn":
                # the evaluator's own state just before the burn
                r1, v1, ok = kepler.propagate(r_eval[None], v_eval[None], mu, np.array([dt]))
                assert ok[0]
                r_pre, v_pre = r1[0], v1[0]
                assert_at(row.at, r_pre, v_pre, mu)
                assert np.linalg.norm(r_pre - after_r) < POSITION_TOL, row.name
                jump = after_v - v_pre
                assert np.linalg.norm(jump) == pytest.approx(row.dv[0], abs=VELOCITY_TOL)
                along, cross, radial = (d[0] for d in local_frame(r_pre[None], v_pre[None]))
                parts = [jump @ along, jump @ cross, jump @ radial]
                assert parts == pytest.approx(list(row.dv_vec[0]), abs=VELOCITY_TOL)
                v_num = v_num + jump
                burns += 1
        assert np.linalg.norm(r_num - after_r) < POSITION_TOL, (row.name, r_num, after_r)
        assert np.linalg.norm(v_num - after_v) < VELOCITY_TOL, (row.name, v_num, after_v)
        r_eval, v_eval = after_r, after_v
    final = result.final
    assert np.linalg.norm(r_num - final.r[0]) < POSITION_TOL
    assert np.linalg.norm(v_num - final.v[0]) < VELOCITY_TOL
    return burns


@pytest.mark.parametrize("name", sorted(PLANS))
def test_chain_matches_integration_earth(plans, numeric, name):
    text = plans.text(*PLANS[name], propellant=1e5)
    assert chain_check(plans, numeric, text) >= 2


@pytest.mark.parametrize("name", sorted(MARS_PLANS))
def test_chain_matches_integration_mars(plans, numeric, name):
    text = plans.text(*MARS_PLANS[name], around="mars", propellant=1e5)
    assert chain_check(plans, numeric, text) >= 1


# --- kepler.py routine by routine ---------------------------------------------------

# (sma km, ecc, inclination, raan, argp, anomaly) in the conventions of state.py
ORBITS = {
    "circular": (7000.0, 0.0, 0.9, 0.3, 0.0, 1.1),
    "elliptic": (26000.0, 0.7, 1.1, 2.0, 4.0, 3.0),
    "elliptic-retrograde": (12000.0, 0.25, 2.6, 5.5, 1.0, 5.9),
    "hyperbolic": (-15000.0, 1.5, 0.4, 1.0, 2.0, -1.4),
    "hyperbolic-strong": (-3000.0, 4.0, 2.0, 0.5, 0.3, 0.2),
}


def orbit_state(name: str):
    r, v = state_from_elements(MU_EARTH, *(np.array([x]) for x in ORBITS[name]))
    return r, v


def period(name: str) -> float:
    a = ORBITS[name][0]
    return 2 * math.pi * math.sqrt(a**3 / MU_EARTH) if a > 0 else 7200.0


@pytest.mark.parametrize("name", sorted(ORBITS))
@pytest.mark.parametrize("fraction", [0.013, 0.3, 0.999, 2.7])
def test_propagate_matches_integration(numeric, name, fraction):
    r, v = orbit_state(name)
    dt = fraction * period(name)
    r1, v1, ok = kepler.propagate(r, v, MU_EARTH, np.array([dt]))
    assert ok[0]
    rn, vn = numeric(r[0], v[0], MU_EARTH, dt)
    assert np.linalg.norm(r1[0] - rn) < POSITION_TOL
    assert np.linalg.norm(v1[0] - vn) < VELOCITY_TOL


def test_propagate_parabola_matches_integration(numeric):
    # escape speed at right angles to the radius: eccentricity 1 (Barker's equation)
    r = np.array([[7000.0, 0.0, 0.0]])
    v = np.array([[0.0, math.sqrt(2 * MU_EARTH / 7000.0) * 0.6, math.sqrt(2 * MU_EARTH
                                                                         / 7000.0) * 0.8]])
    for dt in (600.0, 20000.0):
        r1, v1, ok = kepler.propagate(r, v, MU_EARTH, np.array([dt]))
        assert ok[0]
        rn, vn = numeric(r[0], v[0], MU_EARTH, dt)
        assert np.linalg.norm(r1[0] - rn) < POSITION_TOL
        assert np.linalg.norm(v1[0] - vn) < VELOCITY_TOL


SWEEPS = {
    "circular": [0.4, 3.0, 6.2, 9.0],
    "elliptic": [0.1, 2.0, math.pi, 5.5, 8.0],
    "elliptic-retrograde": [0.2, 1.7, 4.0, 6.28],
    "hyperbolic": [0.3, 1.5, 2.4],
    "hyperbolic-strong": [0.5, 1.5],
}


@pytest.mark.parametrize("name", sorted(SWEEPS))
def test_place_and_time_of_flight_match_integration(numeric, name):
    r, v = orbit_state(name)
    for dtheta in SWEEPS[name]:
        d = np.array([dtheta])
        dt, ok_t = kepler.time_of_flight(r, v, MU_EARTH, d)
        r1, v1, ok_p = kepler.place(r, v, MU_EARTH, d)
        assert ok_t[0] and ok_p[0] and dt[0] > 0
        rn, vn = numeric(r[0], v[0], MU_EARTH, float(dt[0]))
        assert np.linalg.norm(r1[0] - rn) < POSITION_TOL, dtheta
        assert np.linalg.norm(v1[0] - vn) < VELOCITY_TOL, dtheta


@pytest.mark.parametrize("name", sorted(SWEEPS))
def test_time_of_flight_matches_quadrature(name):
    # Kepler's second law: dt = r^2 / h dtheta, with r = p / (1 + e cos theta)
    a, e, *_, nu0 = ORBITS[name]
    p = a * (1 - e * e)
    h = math.sqrt(MU_EARTH * p)
    r, v = orbit_state(name)
    for dtheta in SWEEPS[name]:
        want, _ = quad(lambda th: (p / (1 + e * math.cos(th))) ** 2 / h, nu0, nu0 + dtheta,
                       epsabs=1e-9, epsrel=1e-13, limit=200)
        dt, ok = kepler.time_of_flight(r, v, MU_EARTH, np.array([dtheta]))
        assert ok[0]
        assert dt[0] == pytest.approx(want, rel=1e-10, abs=1e-6)


@pytest.mark.parametrize("start", ["start circular 500 km anomaly 30 deg",
                                   ("start orbit periapsis 500 km apoapsis 3000 km argp 45 deg "
                                    "anomaly 30 deg")])
@pytest.mark.parametrize("where", ["ascending node", "descending node", "node"])
def test_node_of_an_equatorial_orbit_is_here(plans, start, where):
    # DESIGN.md, "Semantics worth getting right": in an equatorial orbit a node is here.
    (row,) = plans.result(plans.text(start, f"burn tilt at {where}: inclination to 5 deg")).rows
    assert row.coast_time[0] == 0.0


def test_place_refuses_to_pass_the_asymptote():
    r, v = orbit_state("hyperbolic")
    limit = math.acos(-1.0 / ORBITS["hyperbolic"][1])
    beyond = limit - ORBITS["hyperbolic"][5] + 0.1
    _, ok_t = kepler.time_of_flight(r, v, MU_EARTH, np.array([beyond]))
    _, _, ok_p = kepler.place(r, v, MU_EARTH, np.array([beyond]))
    assert not ok_t[0] and not ok_p[0]
