"""Coasts to a radius, fractional revolutions and `next`, against integration and by hand.

scipy's DOP853 integrator (rtol 1e-13, as tests/test_numerical.py) finds the first time
the craft crosses a radius (an event on |r| - R), and propagates fractional revolutions
and full ones; the evaluator's coast must end there, at that time.  A burn `at next
periapsis` is checked against the same burn written as explicit components after a
coast of one revolution.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

POSITION_TOL = 1e-3  # km: 1 m
VELOCITY_TOL = 1e-6  # km/s: 1 mm/s
RE = 6378.137


def _two_body(t, y, mu):
    r = y[:3]
    return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])


def first_crossing(r, v, mu: float, radius: float, after: float = 0.0, span: float = 1e6):
    """Time (s) and state of the first crossing of ``radius`` later than ``after`` s."""
    y0 = np.concatenate([r, v])
    if after > 0:
        y0 = solve_ivp(_two_body, (0.0, after), y0, method="DOP853", rtol=1e-13,
                       atol=1e-15, args=(mu,)).y[:, -1]
    event = lambda t, y, mu: np.linalg.norm(y[:3]) - radius
    event.terminal = True
    # short steps: a radius just inside an apsis is crossed twice within a few minutes
    sol = solve_ivp(_two_body, (0.0, span), y0, method="DOP853", rtol=1e-13, atol=1e-15,
                    args=(mu,), events=event, max_step=60.0)
    assert sol.status == 1, "the integrator found no crossing"
    return after + sol.t_events[0][0], sol.y_events[0][0][:3], sol.y_events[0][0][3:]


def coast_row(plans, start: str, *steps: str):
    result = plans.result(plans.text(start, *steps))
    return result, result.rows[-1]


def before(result, row):
    """The state before the last row (the start for a one-step plan)."""
    rows = result.rows
    if len(rows) == 1:
        return result.program.start_r, result.program.start_v
    prev = rows[rows.index(row) - 1].after
    return prev.r[0], prev.v[0]


ORBITS = {
    "ellipse": "start orbit periapsis 300 km apoapsis 12000 km inclination 40 deg raan 70 deg "
               "argp 120 deg anomaly 10 deg",
    "ellipse-inbound": "start orbit periapsis 300 km apoapsis 12000 km inclination 140 deg "
                       "anomaly 250 deg",
    "hyperbola-inbound": "start orbit periapsis 500 km ecc 1.6 inclination 20 deg anomaly -80 deg",
}


@pytest.mark.parametrize(("orbit", "place"), [
    ("ellipse", "5000 km"), ("ellipse", "radius 9000 km"), ("ellipse", "11999 km"),
    ("ellipse-inbound", "5000 km"), ("ellipse-inbound", "radius 7000 km"),
    ("hyperbola-inbound", "3000 km"), ("hyperbola-inbound", "800 km"),
])
def test_coast_to_a_radius_is_the_next_crossing(plans, orbit, place):
    result, row = coast_row(plans, ORBITS[orbit], f"coast c to {place}")
    mu = result.program.body.gm
    radius = float(place.split()[-2]) + (0.0 if place.startswith("radius") else RE)
    r0, v0 = before(result, row)
    t, r1, v1 = first_crossing(r0, v0, mu, radius)
    assert float(row.coast_time[0]) == pytest.approx(t, abs=1e-6)
    assert np.linalg.norm(row.after.r[0] - r1) < POSITION_TOL
    assert np.linalg.norm(row.after.v[0] - v1) < VELOCITY_TOL
    assert float(np.linalg.norm(row.after.r[0])) == pytest.approx(radius, abs=1e-9)


def test_coast_to_the_radius_it_stands_on(plans):
    # here is now; `next` is the other crossing, half-way round on the far branch
    start = ORBITS["ellipse"]
    result, row = coast_row(plans, start, "coast a to 5000 km", "coast b to 5000 km")
    assert float(row.coast_time[0]) == 0.0
    result, row = coast_row(plans, start, "coast a to 5000 km", "coast b to next 5000 km")
    mu = result.program.body.gm
    r0, v0 = before(result, row)
    t, r1, v1 = first_crossing(r0, v0, mu, RE + 5000.0, after=1.0)
    assert float(row.coast_time[0]) == pytest.approx(t, abs=1e-6)
    assert np.linalg.norm(row.after.r[0] - r1) < POSITION_TOL
    assert float(r1 @ v1) < 0 < float(r0 @ v0)  # out there, in here


def test_coast_to_an_apsis_radius_and_next_one(plans):
    # the periapsis altitude itself: here at periapsis, a whole period with `next`
    start = "start orbit periapsis 300 km apoapsis 12000 km"
    _, row = coast_row(plans, start, "coast c to 300 km")
    assert float(row.coast_time[0]) == 0.0
    result, row = coast_row(plans, start, "coast c to next 300 km")
    period = 2 * math.pi * math.sqrt(((2 * RE + 12300.0) / 2) ** 3 / result.program.body.gm)
    assert float(row.coast_time[0]) == pytest.approx(period, rel=1e-12)


@pytest.mark.parametrize("orbit", ["ellipse", "ellipse-inbound"])
@pytest.mark.parametrize("revs", ["0.5", "2.5", "1.25", "3", "0.01"])
def test_fractional_revolutions_against_integration(plans, numeric, orbit, revs):
    result, row = coast_row(plans, ORBITS[orbit], f"coast c {revs} rev")
    mu = result.program.body.gm
    r0, v0 = before(result, row)
    a = 1 / (2 / np.linalg.norm(r0) - v0 @ v0 / mu)
    dt = float(revs) * 2 * math.pi * math.sqrt(a**3 / mu)  # Kepler's third law
    assert float(row.coast_time[0]) == pytest.approx(dt, rel=1e-12)
    r1, v1 = numeric(r0, v0, mu, dt)
    assert np.linalg.norm(row.after.r[0] - r1) < POSITION_TOL
    assert np.linalg.norm(row.after.v[0] - v1) < VELOCITY_TOL
    assert row.at == f"{float(revs):g} rev"


def test_half_a_revolution_from_periapsis_is_apoapsis(plans):
    # an ellipse is symmetric: half its period from periapsis is apoapsis (Kepler)
    _, row = coast_row(plans, "start orbit periapsis 300 km apoapsis 12000 km",
                       "coast half 0.5 rev")
    assert float(np.linalg.norm(row.after.r[0])) == pytest.approx(RE + 12000.0, abs=1e-6)


@pytest.mark.parametrize(("place", "revs"), [("apoapsis", 1.0), ("periapsis", 1.0),
                                             ("ascending node", 1.0), ("anomaly 45 deg", 1.0)])
def test_next_place_from_the_place_is_one_revolution(plans, place, revs):
    start = ("start orbit periapsis 300 km apoapsis 12000 km inclination 40 deg argp 45 deg "
             "anomaly 315 deg")  # at the ascending node
    result, row = coast_row(plans, start, f"coast a to {place}", f"coast b to next {place}")
    period = float(result.rows[-1].after.t[0] - result.rows[-2].after.t[0])
    el_period = 2 * math.pi * math.sqrt(((2 * RE + 12300.0) / 2) ** 3 / result.program.body.gm)
    assert period == pytest.approx(revs * el_period, rel=1e-12)
    assert row.at == f"next {place}"
    prev = result.rows[-2].after
    assert np.linalg.norm(row.after.r[0] - prev.r[0]) < 1e-6


def test_next_node_from_a_node_is_the_other_node(plans):
    start = "start circular 500 km inclination 51.6 deg"  # at the ascending node
    result, row = coast_row(plans, start, "coast c to next node")
    period = 2 * math.pi * math.sqrt((RE + 500.0) ** 3 / result.program.body.gm)
    assert float(row.coast_time[0]) == pytest.approx(period / 2, rel=1e-12)
    assert float(row.after.v[0][2]) < 0  # descending
    _, here = coast_row(plans, start, "coast c to node")
    assert float(here.coast_time[0]) == 0.0


def test_circular_apsis_next_is_a_full_revolution(plans):
    # in a circular orbit an apsis is here; the next pass of it is a revolution on
    result, row = coast_row(plans, "start circular 500 km", "coast c to next apoapsis")
    period = 2 * math.pi * math.sqrt((RE + 500.0) ** 3 / result.program.body.gm)
    assert float(row.coast_time[0]) == pytest.approx(period, rel=1e-12)


def test_burn_at_next_periapsis_is_the_explicit_burn_a_revolution_on(plans):
    start = "start orbit periapsis 300 km apoapsis 12000 km inclination 28 deg raan 5 deg"
    result = plans.result(plans.text(start, "burn up at next periapsis: apoapsis to 20000 km"))
    row = result.rows[-1]
    period = 2 * math.pi * math.sqrt(((2 * RE + 12300.0) / 2) ** 3 / result.program.body.gm)
    assert float(row.coast_time[0]) == pytest.approx(period, rel=1e-12)
    parts = ", ".join(f"{k} {float(x) * 1000.0!r} m/s"
                      for k, x in zip(("along", "cross", "radial"), row.dv_vec[0]))
    again = plans.result(plans.text(start, "coast 1 rev", f"burn up: {parts}"))
    assert np.linalg.norm(again.final.r[0] - result.final.r[0]) < POSITION_TOL
    assert np.linalg.norm(again.final.v[0] - result.final.v[0]) < VELOCITY_TOL
    assert float(again.final.t[0]) == pytest.approx(float(result.final.t[0]), abs=1e-6)
    # without `next` the burn is here and now, with the same delta-v
    now = plans.result(plans.text(start, "burn up at periapsis: apoapsis to 20000 km"))
    assert float(now.rows[-1].coast_time[0]) == 0.0
    assert float(now.rows[-1].dv[0]) == pytest.approx(float(row.dv[0]), abs=1e-12)


def test_burn_at_a_radius_against_explicit_components(plans, numeric):
    start = ORBITS["ellipse"]
    result = plans.result(plans.text(start, "burn b at 4000 km: apoapsis to 15000 km"))
    row = result.rows[-1]
    mu = result.program.body.gm
    t, _r1, v1 = first_crossing(result.program.start_r, result.program.start_v, mu, RE + 4000)
    assert float(row.coast_time[0]) == pytest.approx(t, abs=1e-6)
    assert np.linalg.norm(row.v_before[0] - v1) < VELOCITY_TOL
    parts = ", ".join(f"{k} {float(x) * 1000.0!r} m/s"
                      for k, x in zip(("along", "cross", "radial"), row.dv_vec[0]))
    again = plans.result(plans.text(start, "coast to 4000 km", f"burn b: {parts}"))
    assert np.linalg.norm(again.final.v[0] - result.final.v[0]) < VELOCITY_TOL
