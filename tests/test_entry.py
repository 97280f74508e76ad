"""`entry at ALT`: the end of a plan at the entry interface, against integration and by hand.

The chain ends the next time the craft comes down through the interface radius.  scipy's
DOP853 integrator (rtol 1e-13, as tests/test_numerical.py) finds that time as an event
on |r| - R crossed downward; vis-viva gives the speed there and the angular momentum the
flight-path angle, cos(gamma) = h / (R v), below the horizontal on the way down (Curtis,
Orbital Mechanics for Engineering Students, 3rd ed., Sec. 2.6, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from apsidal.compiler.budget import budget
from apsidal.compiler.check import check_program
from apsidal.compiler.load import load_text
from apsidal.compiler.reorder import blocks
from scipy.integrate import solve_ivp

RE = 6378.137
MU = 398600.4418


def _two_body(t, y, mu):
    r = y[:3]
    return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])


def down_through(r, v, mu: float, radius: float):
    """The first downward crossing of ``radius``: time (s), position and velocity."""
    event = lambda t, y, mu: np.linalg.norm(y[:3]) - radius
    event.terminal, event.direction = True, -1
    sol = solve_ivp(_two_body, (0.0, 1e6), np.concatenate([r, v]), method="DOP853",
                    rtol=1e-13, atol=1e-15, args=(mu,), events=event, max_step=60.0)
    assert sol.status == 1
    return sol.t_events[0][0], sol.y_events[0][0][:3], sol.y_events[0][0][3:]


def entry_of(report: dict) -> dict:
    step = report["steps"][-1]
    assert step["kind"] == "entry"
    return step


@pytest.mark.parametrize(("start", "burn", "interface"), [
    ("start circular 400 km inclination 51.6 deg anomaly 20 deg",
     "burn deorbit: periapsis to 50 km", "120 km"),
    ("start circular 400 km inclination 51.6 deg anomaly 20 deg",
     "burn deorbit: periapsis to -40 km", "120 km"),  # under the surface: a steep way down
    ("start orbit periapsis 250 km apoapsis 35786 km inclination 7 deg",
     "burn deorbit at apoapsis: periapsis to 80 km", "radius 6500 km"),
    ("start circular 400 km", "burn deorbit: along -300 m/s, radial -20 m/s", "0 km"),
])
def test_entry_against_integration_and_vis_viva(plans, start, burn, interface):
    text = plans.text(start, burn, f"entry at {interface}")
    result = plans.result(text)
    report = budget(result)
    step = entry_of(report)
    last_burn = result.rows[-2]
    radius = float(interface.split()[-2]) + (0.0 if interface.startswith("radius") else RE)
    t, r1, v1 = down_through(last_burn.after.r[0], last_burn.after.v[0], MU, radius)
    assert step["coast_time_s"] == pytest.approx(t, abs=1e-5)
    assert np.linalg.norm(result.final.r[0] - r1) < 1e-3
    assert np.linalg.norm(result.final.v[0] - v1) < 1e-6
    # the speed and the flight-path angle there, from the orbit after the burn
    r, v = last_burn.after.r[0], last_burn.after.v[0]
    a = 1 / (2 / np.linalg.norm(r) - v @ v / MU)
    h = np.linalg.norm(np.cross(r, v))
    speed = math.sqrt(MU * (2 / radius - 1 / a))
    gamma = -math.degrees(math.acos(min(h / (radius * speed), 1.0)))
    assert step["entry"]["speed_m_s"] == pytest.approx(speed * 1000.0, abs=1e-6)
    assert step["entry"]["flight_path_angle_deg"] == pytest.approx(gamma, abs=1e-7)
    assert step["entry"]["altitude_km"] == pytest.approx(radius - RE, abs=1e-6)
    assert report["totals"]["elapsed_s"] == pytest.approx(
        last_burn.after.t[0] + t, abs=1e-5)


def test_the_last_burn_may_go_under_the_surface_and_is_the_explicit_burn(plans):
    start = "start circular 400 km inclination 30 deg"
    result = plans.result(plans.text(start, "burn deorbit: periapsis to -40 km", "entry at 120 km"))
    burn = result.rows[-2]
    parts = ", ".join(f"{k} {float(x) * 1000.0!r} m/s"
                      for k, x in zip(("along", "cross", "radial"), burn.dv_vec[0]))
    again = plans.result(plans.text(start, f"burn deorbit: {parts}", "entry at 120 km"))
    assert np.linalg.norm(again.final.r[0] - result.final.r[0]) < 1e-3
    assert np.linalg.norm(again.final.v[0] - result.final.v[0]) < 1e-6


def test_without_entry_the_surface_still_stops_the_chain(plans):
    # only the way down to an entry may dip under the surface
    from apsidal.compiler.evaluate import run
    from apsidal.lang.errors import PlanError

    start = "start circular 400 km inclination 30 deg"
    with pytest.raises(PlanError, match="under the surface"):
        load_text(plans.text(start, "burn deorbit: periapsis to -40 km"))
    result = run(load_text(plans.text(start, "burn deorbit: along -300 m/s")))
    assert not result.ok and "under the surface" in result.error.message


def test_the_way_down_may_drop_expect_and_coast_short_of_the_interface(plans):
    start = "start circular 400 km inclination 30 deg"
    text = plans.text(start, "burn deorbit: periapsis to 50 km", "drop module 300 kg",
                      "coast settle for 10 min", "expect propellant at least 1 kg",
                      "entry capsule at 120 km")
    report = plans.budget(text)
    step = entry_of(report)
    assert step["name"] == "capsule" and step["at"] == "120 km"
    assert step["mass_after_kg"] == pytest.approx(report["steps"][0]["mass_after_kg"] - 300.0)
    alone = plans.budget(plans.text(start, "burn deorbit: periapsis to 50 km", "entry at 120 km"))
    assert step["entry"] == alone["steps"][-1]["entry"]  # the same crossing
    assert report["totals"]["elapsed_s"] == pytest.approx(alone["totals"]["elapsed_s"], abs=1e-6)


def test_impact_speed_at_the_surface(plans):
    # entry at 0 km is an impact: the speed at the body's radius by vis-viva
    text = plans.text("start circular 100 km", "burn b: periapsis to -1000 km", "entry at 0 km",
                      gm=4902.8, radius=1737.4)
    report = plans.budget(text)
    r0, rp = 1737.4 + 100.0, 1737.4 - 1000.0
    a = (r0 + rp) / 2
    speed = math.sqrt(4902.8 * (2 / 1737.4 - 1 / a))
    assert entry_of(report)["entry"]["speed_m_s"] == pytest.approx(speed * 1000.0, abs=1e-6)
    assert entry_of(report)["entry"]["flight_path_angle_deg"] < 0


def test_check_leaves_the_way_down_where_it_is(plans):
    # two goal burns before the way down form a block; the deorbit burn and the entry are
    # barriers, so no order of the block reaches past them
    text = plans.text("start circular 400 km inclination 30 deg",
                      "burn tilt at node: inclination to 31 deg",
                      "burn up at periapsis: apoapsis to 900 km",
                      "burn lower at apoapsis: periapsis to 300 km",
                      "burn deorbit at apoapsis: periapsis to -20 km",
                      "entry at 120 km")
    program = load_text(text)
    assert blocks(program) == [[0, 1, 2]]
    for finding in check_program(program):
        if finding.suggestion is not None:
            again = plans.budget(finding.suggestion)
            assert again["steps"][-1]["kind"] == "entry"
