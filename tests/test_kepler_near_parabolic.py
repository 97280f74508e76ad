"""Coasts near e = 1 (and ordinary ones) against an independent numerical integration.

The reference is scipy's DOP853 integrator (``scipy.integrate.solve_ivp``, rtol 1e-13,
atol 1e-15) flying the same two-body motion, r'' = -mu r / |r|^3, from the same state;
coasts to a place are integrated until the event itself (r . v = 0 at periapsis, z = 0
at a node, the radius crossing the target direction for an anomaly).  Every position
must agree to 1 m and every velocity to 1 mm/s, down to 1 - e = 1e-9 on both sides of
e = 1, at the kepler-function level and through the real plan pipeline (text -> parse
-> lower -> evaluate).  The method under test is universal-variable propagation
(Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., algorithm 8; Curtis,
Orbital Mechanics for Engineering Students, 3rd ed., algorithm 3.3, its number from
memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from apsidal.compiler import kepler
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

MU = 398600.4418  # km3/s2, Earth (IERS Conventions 2010, table 1.1)
POSITION_TOL = 1e-3  # km: 1 m
VELOCITY_TOL = 1e-6  # km/s: 1 mm/s
RP = 6978.137  # km: a 600 km periapsis over Earth's equatorial radius

NEAR = {  # 1 - e, on both sides of the parabola, and the parabola itself
    "1-1e-5": 1.0 - 1e-5,
    "1-1e-7": 1.0 - 1e-7,
    "1-1e-9": 1.0 - 1e-9,
    "parabola": 1.0,
    "1+1e-9": 1.0 + 1e-9,
    "1+1e-7": 1.0 + 1e-7,
    "1+1e-5": 1.0 + 1e-5,
}
ORDINARY = {"circle": 0.0, "0.3": 0.3, "0.9": 0.9, "3": 3.0}
STARTS = (-100.0, -20.0, 30.0, 100.0)  # deg of true anomaly: before and after periapsis


# --- the reference: scipy's integrator, nothing from apsidal ------------------------


def _two_body(t, y, mu):
    r = y[:3]
    return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])


def fly(r, v, dt: float, event=None, mu: float = MU):
    """DOP853 from (r, v) for dt seconds, or until ``event`` (then returns its time too)."""
    y0 = np.concatenate([r, v])
    if dt == 0.0:
        return r.copy(), v.copy(), 0.0
    events = None
    if event is not None:
        event.terminal, event.direction = True, 1.0
        events = [event]
    sol = solve_ivp(_two_body, (0.0, dt), y0, method="DOP853", rtol=1e-13, atol=1e-15,
                    args=(mu,), events=events)
    assert sol.success, sol.message
    if event is not None:
        assert sol.t_events[0].size == 1, "the event did not happen within the span"
        y = sol.y_events[0][0]
        return y[:3], y[3:], float(sol.t_events[0][0])
    return sol.y[:3, -1], sol.y[3:, -1], dt


def conic_state(e: float, nu_deg: float, rp: float = RP, inc=0.5, raan=0.7, argp=1.1,
                mu: float = MU):
    """Position and velocity from periapsis radius, e and true anomaly (perifocal, rotated).

    Written here, apart from state.py, so that e = 1 exactly is possible.
    """
    nu = math.radians(nu_deg)
    p = rp * (1.0 + e)
    h = math.sqrt(mu * p)
    r = p / (1.0 + e * math.cos(nu))
    rp_ = np.array([r * math.cos(nu), r * math.sin(nu), 0.0])
    vp_ = np.array([-mu / h * math.sin(nu), mu / h * (e + math.cos(nu)), 0.0])
    def rot(axis, a):
        c, s = math.cos(a), math.sin(a)
        if axis == 3:
            return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
        return np.array([[1.0, 0.0, 0.0], [0.0, c, -s], [0.0, s, c]])
    q = rot(3, raan) @ rot(1, inc) @ rot(3, argp)
    return q @ rp_, q @ vp_


def assert_close(r1, v1, rn, vn, label):
    dr, dv = np.linalg.norm(r1 - rn), np.linalg.norm(v1 - vn)
    assert dr < POSITION_TOL, f"{label}: position off by {dr * 1e3:.3f} m"
    assert dv < VELOCITY_TOL, f"{label}: velocity off by {dv * 1e6:.3f} mm/s"


def period(e: float, rp: float = RP) -> float:
    return 2 * math.pi * math.sqrt((rp / (1.0 - e)) ** 3 / MU)


# --- kepler.propagate: a coast for a time -------------------------------------------


@pytest.mark.parametrize("name", sorted(NEAR))
@pytest.mark.parametrize("nu0", STARTS)
def test_propagate_near_parabolic_matches_integration(name, nu0):
    e = NEAR[name]
    r, v = conic_state(e, nu0)
    for dt in (60.0, 3 * 3600.0, 2 * 86400.0, 30 * 86400.0):
        r1, v1, ok = kepler.propagate(r[None], v[None], MU, np.array([dt]))
        assert ok[0]
        rn, vn, _ = fly(r, v, dt)
        assert_close(r1[0], v1[0], rn, vn, f"e {name}, from {nu0} deg, {dt:g} s")


@pytest.mark.parametrize("name", sorted(ORDINARY))
@pytest.mark.parametrize("nu0", STARTS)
def test_propagate_ordinary_matches_integration(name, nu0):
    e = ORDINARY[name]
    r, v = conic_state(e, nu0)
    spans = [60.0, 3 * 3600.0]
    spans.append(7.3 * period(e) if e < 1 else 2 * 86400.0)  # many periods, or 2 days out
    for dt in spans:
        r1, v1, ok = kepler.propagate(r[None], v[None], MU, np.array([dt]))
        assert ok[0]
        rn, vn, _ = fly(r, v, dt)
        assert_close(r1[0], v1[0], rn, vn, f"e {name}, from {nu0} deg, {dt:g} s")


def test_propagate_takes_a_batch_of_every_conic_at_once():
    # one call, every conic: the same answers as one by one (and as the integrator)
    cases = [(e, nu0) for e in (*NEAR.values(), *ORDINARY.values()) for nu0 in STARTS]
    r = np.array([conic_state(e, nu0)[0] for e, nu0 in cases])
    v = np.array([conic_state(e, nu0)[1] for e, nu0 in cases])
    r1, v1, ok = kepler.propagate(r, v, MU, np.full(len(cases), 3 * 3600.0))
    assert ok.all() and np.isfinite(r1).all() and np.isfinite(v1).all()
    for i in range(len(cases)):
        one_r, one_v, _ = kepler.propagate(r[i:i + 1], v[i:i + 1], MU, np.array([3 * 3600.0]))
        assert np.array_equal(one_r[0], r1[i]) and np.array_equal(one_v[0], v1[i])


def test_propagate_back_in_time_only_round_a_closed_orbit():
    # a closed orbit repeats: -600 s is one period less 600 s; an open one is refused,
    # with the state kept and no NaN
    r, v = conic_state(0.3, 40.0)
    back, vb, ok = kepler.propagate(r[None], v[None], MU, np.array([-600.0]))
    rn, vn, _ = fly(r, v, period(0.3) - 600.0)
    assert ok[0]
    assert_close(back[0], vb[0], rn, vn, "600 s back")
    for e in (1.0 + 1e-9, 3.0):
        r, v = conic_state(e, 40.0)
        r1, v1, ok = kepler.propagate(r[None], v[None], MU, np.array([-600.0]))
        assert not ok[0] and np.array_equal(r1[0], r) and np.array_equal(v1[0], v)


# --- kepler.time_of_flight and kepler.place: a coast to a place ------------------------


def periapsis_event(t, y, mu):
    return float(y[:3] @ y[3:])  # r . v crosses 0 upwards at periapsis


def node_event(t, y, mu):
    return float(y[2])  # z crosses 0 upwards at the ascending node


def anomaly_event(r0, v0, target_deg: float):
    """The radius crossing the direction at true anomaly ``target_deg`` (set from r0, v0)."""
    h = np.cross(r0, v0)
    e_vec = ((v0 @ v0 - MU / np.linalg.norm(r0)) * r0 - (r0 @ v0) * v0) / MU
    p_hat = e_vec / np.linalg.norm(e_vec)
    q_hat = np.cross(h, p_hat) / np.linalg.norm(h)
    a = math.radians(target_deg)
    target = math.cos(a) * p_hat + math.sin(a) * q_hat
    side = np.cross(h / np.linalg.norm(h), target)  # a quarter turn ahead of the target
    # |r| sin(angle from the target to r) = r . (h x target): crosses 0 upwards there
    return lambda t, y, mu: float(y[:3] @ side)


def along_track_error(dt_model, dt_event, v) -> float:
    """A timing error as the distance flown in it (km)."""
    return abs(dt_model - dt_event) * float(np.linalg.norm(v))


@pytest.mark.parametrize("name", sorted(NEAR) + sorted(ORDINARY))
@pytest.mark.parametrize("nu0", (-100.0, -20.0))
def test_time_to_periapsis_matches_integration(name, nu0):
    e = {**NEAR, **ORDINARY}[name]
    if e == 0.0:
        pytest.skip("a circle has no periapsis")
    r, v = conic_state(e, nu0)
    d = np.array([math.radians(-nu0)])
    dt, ok_t = kepler.time_of_flight(r[None], v[None], MU, d)
    r1, v1, ok_p = kepler.place(r[None], v[None], MU, d)
    assert ok_t[0] and ok_p[0]
    rn, vn, t_event = fly(r, v, 2.0 * dt[0] + 600.0, periapsis_event)
    assert along_track_error(dt[0], t_event, vn) < POSITION_TOL, (dt[0], t_event)
    assert_close(r1[0], v1[0], rn, vn, f"e {name}, to periapsis from {nu0} deg")


@pytest.mark.parametrize("name", sorted(NEAR) + sorted(ORDINARY))
@pytest.mark.parametrize("nu0", (-100.0, -20.0, 30.0))
def test_time_to_an_anomaly_and_to_the_node_matches_integration(name, nu0):
    e = {**NEAR, **ORDINARY}[name]
    # argp 1.1 rad: the ascending node is at true anomaly -63.0 deg, ahead of -100 deg
    r, v = conic_state(e, nu0)
    nu_node = -math.degrees(1.1)
    node_ahead = (nu_node - nu0) % 360.0
    targets = [(100.0 - nu0, anomaly_event(r, v, 100.0) if e > 0 else None)]
    if e < 0.99 or nu0 < nu_node:  # not past a near-parabola's far apoapsis
        targets.append((node_ahead, node_event))
    for sweep_deg, event in targets:
        if event is None:
            continue
        d = np.array([math.radians(sweep_deg)])
        dt, ok_t = kepler.time_of_flight(r[None], v[None], MU, d)
        r1, v1, ok_p = kepler.place(r[None], v[None], MU, d)
        assert ok_t[0] and ok_p[0]
        rn, vn, t_event = fly(r, v, 2.0 * dt[0] + 600.0, event)
        label = f"e {name}, {sweep_deg:.1f} deg from {nu0} deg"
        assert along_track_error(dt[0], t_event, vn) < POSITION_TOL, (label, dt[0], t_event)
        assert_close(r1[0], v1[0], rn, vn, label)


@pytest.mark.parametrize("name", ["1-1e-5", "1-1e-9", "0.3", "0.9"])
def test_time_of_flight_adds_whole_periods(name):
    # sweeping 2 turns and a bit is 2 periods plus the bit (Kepler's third law)
    e = {**NEAR, **ORDINARY}[name]
    r, v = conic_state(e, -20.0)
    one, ok1 = kepler.time_of_flight(r[None], v[None], MU, np.array([0.4]))
    more, ok2 = kepler.time_of_flight(r[None], v[None], MU, np.array([0.4 + 4 * math.pi]))
    assert ok1[0] and ok2[0]
    # the state holds its energy to rounding, about 1e-16 of v^2: near e = 1 that is
    # 1e-16 / (1 - e) of the energy itself, and 1.5 times that of the period
    rel = max(1e-12, 1e-14 / (1.0 - e))
    assert more[0] - one[0] == pytest.approx(2 * period(e), rel=rel)


@pytest.mark.parametrize("name", ["1+1e-9", "1+1e-7", "parabola", "3"])
def test_no_time_of_flight_past_the_asymptote(name):
    e = {**NEAR, **ORDINARY}[name]
    limit = math.degrees(math.acos(-1.0 / e)) if e > 1 else 180.0
    r, v = conic_state(e, -20.0)
    d = np.array([math.radians(limit + 20.0 + 0.5)])
    dt, ok = kepler.time_of_flight(r[None], v[None], MU, d)
    _, _, ok_p = kepler.place(r[None], v[None], MU, d)
    assert not ok[0] and not ok_p[0] and dt[0] == 0.0


def test_sweep_for_time_and_time_of_flight_invert_near_the_parabola():
    for e in NEAR.values():
        r, v = conic_state(e, -100.0)
        dtheta, ok = kepler.sweep_for_time(r[None], v[None], MU, np.array([5 * 3600.0]))
        assert ok[0]
        dt, ok = kepler.time_of_flight(r[None], v[None], MU, dtheta)
        assert ok[0] and dt[0] == pytest.approx(5 * 3600.0, rel=1e-11)


# --- invariants near e = 1 (hypothesis) --------------------------------------------------


@st.composite
def near_parabolic(draw):
    side = draw(st.sampled_from([-1.0, 1.0]))
    e = 1.0 + side * 10.0 ** draw(st.floats(-12.0, -3.0))
    rp = draw(st.floats(6600.0, 60000.0))
    limit = math.degrees(math.acos(-1.0 / e)) if e > 1 else 180.0
    nu = draw(st.floats(-0.98 * limit, 0.98 * limit))
    angles = [draw(st.floats(0.0, math.pi)), draw(st.floats(0.0, 2 * math.pi)),
              draw(st.floats(0.0, 2 * math.pi))]
    return conic_state(e, nu, rp, *angles)


def _assert_conserved(r, v, r1, v1):
    # energy is near 0 here: compare with the size of its two terms (the rounding scale)
    scale = 0.5 * (v @ v) + MU / np.linalg.norm(r)
    energy = lambda r, v: 0.5 * (v @ v) - MU / np.linalg.norm(r)
    assert abs(energy(r1, v1) - energy(r, v)) <= 1e-12 * scale
    h0, h1 = np.cross(r, v), np.cross(r1, v1)
    assert np.linalg.norm(h1 - h0) <= 1e-10 * np.linalg.norm(h0)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(near_parabolic(), st.floats(0.0, 1e6))
def test_coast_for_a_time_conserves_energy_and_momentum_near_e_1(state, dt):
    r, v = state
    r1, v1, ok = kepler.propagate(r[None], v[None], MU, np.array([dt]))
    assert ok[0]
    _assert_conserved(r, v, r1[0], v1[0])


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(near_parabolic(), st.floats(0.0, 1.0))
def test_coast_to_a_place_conserves_energy_and_momentum_near_e_1(state, share):
    r, v = state
    nu0, e = kepler.anomaly(r[None], v[None], MU)
    start = (nu0[0] + math.pi) % (2 * math.pi) - math.pi
    limit = math.acos(-1.0 / e[0]) if e[0] > 1 else math.pi
    d = np.array([share * 0.98 * (limit - start)])
    r1, v1, ok = kepler.place(r[None], v[None], MU, d)
    dt, ok_t = kepler.time_of_flight(r[None], v[None], MU, d)
    assert ok[0] and ok_t[0] and dt[0] >= 0.0 and np.isfinite(dt[0])
    _assert_conserved(r, v, r1[0], v1[0])


# --- through the plan pipeline: text -> parse -> lower -> evaluate ----------------------


START = ("start orbit periapsis 600 km ecc {ecc} inclination 30 deg raan 40 deg argp 50 deg "
         "anomaly {nu} deg")
PLAN_ECC = ["0.99999", "0.9999999", "0.999999999", "1.000000001", "1.0000001", "0.3", "0.9",
            "3"]


def fly_plan(plans, text: str, events=None):
    """Price ``text``, then fly its chain again with the integrator, coast by coast."""
    result = plans.result(text)
    mu = result.program.body.gm
    r, v = result.program.start_r.copy(), result.program.start_v.copy()
    for row in result.rows:
        assert row.kind == "coast"
        dt = float(row.coast_time[0])
        event = (events or {}).get(row.name)
        if event is None:
            rn, vn, _ = fly(r, v, dt, mu=mu)
        else:
            rn, vn, t_event = fly(r, v, 2.0 * dt + 600.0, event(r, v), mu=mu)
            assert along_track_error(dt, t_event, vn) < POSITION_TOL, (row.name, dt, t_event)
        assert_close(row.after.r[0], row.after.v[0], rn, vn, f"{row.name} ({row.at})")
        r, v = rn, vn
    return result


@pytest.mark.parametrize("ecc", PLAN_ECC)
@pytest.mark.parametrize("nu", ["-60", "-5", "20"])
def test_plan_coasts_for_a_time_match_integration(plans, ecc, nu):
    text = plans.text(START.format(ecc=ecc, nu=nu), "coast short for 1 min",
                      "coast long for 3 h", "coast longer for 2 d")
    fly_plan(plans, text)


def test_plan_coast_over_many_periods_matches_integration(plans):
    # 0.3 from 600 km: a period of about 2.9 h, so 40 h is about 14 turns
    fly_plan(plans, plans.text(START.format(ecc="0.3", nu="-60"), "coast laps for 40 h"))


@pytest.mark.parametrize("ecc", [e for e in PLAN_ECC if e != "3"])  # 140 deg: past e 3's asymptote
def test_plan_coasts_to_places_match_integration(plans, ecc):
    # from 60 deg before periapsis: periapsis, then the descending node (argument of
    # latitude 180 deg, true anomaly 130 deg), then the anomaly 140 deg
    text = plans.text(START.format(ecc=ecc, nu="-60"), "coast in to periapsis",
                      "coast out to descending node", "coast on to anomaly 140 deg")
    descending = lambda r, v: lambda t, y, mu: float(-y[2])
    fly_plan(plans, text, {"in": lambda r, v: periapsis_event, "out": descending,
                           "on": lambda r, v: anomaly_event(r, v, 140.0)})


@pytest.mark.parametrize("ecc", PLAN_ECC)
def test_plan_coast_to_the_ascending_node_matches_integration(plans, ecc):
    # argp 50 deg, anomaly -80 deg: the ascending node is 30 deg ahead
    text = plans.text(START.format(ecc=ecc, nu="-80"), "coast up to ascending node")
    fly_plan(plans, text, {"up": lambda r, v: node_event})
