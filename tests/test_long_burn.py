"""`long-burn`: a burn is judged by the arc of its orbit it sweeps, not by a share of a
period, and that arc is checked against a numerical integration of the same motion."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.rules.burns import burn_arc
from apsidal.compiler.state import elements_from_state
from scipy.integrate import solve_ivp
from test_check import findings

# A Mars capture of our own: the sample's arrival hyperbola (400 km periapsis,
# v-infinity 2.65 km/s), captured at periapsis into a 400 x 33000 km orbit.
CAPTURE = """plan "capture"
around mars
craft lark {
    dry 780 kg
    propellant 1100 kg
    engine main isp 325 s thrust THRUST
}
start orbit periapsis 400 km vinf 2.65 km/s inclination 75 deg anomaly -40 deg
burn capture at periapsis: apoapsis to 33000 km
"""


def capture(thrust: str) -> str:
    return CAPTURE.replace("THRUST", thrust)


def integrated_sweep(r0, v0, mu: float, dt: float) -> float:
    """True anomaly (rad) swept in dt s (negative: backward) by scipy's solve_ivp (DOP853)
    on the two-body equations r'' = -mu r / |r|^3."""

    def rhs(_, y):
        return np.concatenate([y[3:], -mu * y[:3] / np.linalg.norm(y[:3]) ** 3])

    sol = solve_ivp(rhs, (0.0, dt), np.concatenate([r0, v0]), method="DOP853",
                    rtol=1e-12, atol=1e-9)
    r1 = sol.y[:3, -1]
    h = np.cross(r0, v0)
    h = h / np.linalg.norm(h)
    angle = math.atan2(float(np.dot(h, np.cross(r0, r1))), float(np.dot(r0, r1)))
    swept = angle if dt > 0 else -angle
    assert 0 <= swept < math.pi  # one half-burn here stays under half a turn
    return swept


# An eccentric Earth orbit of our own, pushed off its apsides by a small engine.
OFF_APSIS = """plan "push"
around earth
craft probe {
    dry 500 kg
    propellant 2 t
    engine small isp 300 s thrust 200 N
}
start orbit periapsis 400 km apoapsis 30000 km inclination 20 deg anomaly 120 deg
burn capture: along 20 m/s, radial 15 m/s
"""


def capture_row(thrust: str, text: str | None = None):
    program = load_text(capture(thrust) if text is None else text, "capture.aps")
    [row] = [r for r in run(program).rows if r.name == "capture"]
    return program, row


def test_a_low_thrust_mars_capture_sweeps_a_large_arc_and_is_flagged():
    [f] = findings(capture("200 N"), "long-burn")
    assert f.severity == "error" and f.steps == ("capture",)
    arc = float(re.search(r"sweeps ([\d.]+) deg", f.message).group(1))
    seconds = float(re.search(r"lasts (\d+) s", f.message).group(1))
    assert arc > 100
    _, row = capture_row("200 N")
    assert seconds == pytest.approx(float(row.burn_time[0]), abs=0.5)
    # as a share of the capture orbit's period (about a day) it looks small: under 20 %
    program, _ = capture_row("200 N")
    period = float(elements_from_state(row.after.r, row.after.v, program.body.gm).period[0])
    assert float(row.burn_time[0]) < 0.2 * period


def test_a_burn_of_a_few_seconds_is_not_flagged():
    _, row = capture_row("400 kN")
    assert float(row.burn_time[0]) < 10
    assert findings(capture("400 kN"), "long-burn") == []


@pytest.mark.parametrize("thrust, text", [("200 N", None), ("1 kN", None), ("4 kN", None),
                                          ("", OFF_APSIS)])
def test_the_arc_matches_a_numerical_integration(thrust, text):
    # scipy's solve_ivp integrating the two-body motion for -T/2 and +T/2 on the orbits
    # before and after the burn, combined as the rule does: the half before on whichever
    # orbit sweeps more backward, the half after on whichever sweeps more forward.
    program, row = capture_row(thrust, text)
    mu = program.body.gm
    r, vb, va = row.after.r[0], row.v_before[0], row.after.v[0]
    half = 0.5 * float(row.burn_time[0])
    back = max(integrated_sweep(r, vb, mu, -half), integrated_sweep(r, va, mu, -half))
    ahead = max(integrated_sweep(r, vb, mu, half), integrated_sweep(r, va, mu, half))
    arc, ok = burn_arc(row.after.r, row.v_before, row.after.v, mu, row.burn_time)
    assert bool(ok[0])
    assert math.degrees(float(arc[0])) == pytest.approx(math.degrees(back + ahead), abs=0.01)


def test_a_burn_longer_than_a_period_counts_every_turn():
    # 400 km circular orbit of Earth, a burn of two and a half periods at 5 N: the arc
    # is the number of turns times 360 deg (closed form for a circle), not its remainder
    program = load_text("""plan "slow"
around earth
craft probe {
    dry 500 kg
    propellant 20 t
    engine slow isp 320 s thrust 5 N
}
start circular 400 km
burn nudge: along 0.1 m/s
""", "slow.aps")
    [row] = run(program).rows
    mu, r = program.body.gm, np.linalg.norm(row.after.r[0])
    period = 2 * math.pi * math.sqrt(r**3 / mu)
    arc, ok = burn_arc(row.after.r, row.v_before, row.v_before, mu,
                       np.array([2.5 * period]))
    assert bool(ok[0]) and math.degrees(float(arc[0])) == pytest.approx(900.0, abs=1e-6)


def test_a_marker_comment_silences_long_burn_for_its_step_and_is_counted():
    from apsidal.compiler.check import Budget, check_program
    from apsidal.compiler.load import load_text
    from apsidal.compiler.rules import BY_NAME

    text = capture("200 N").replace(
        "burn capture at periapsis: apoapsis to 33000 km",
        "burn capture at periapsis: apoapsis to 33000 km  # apsidal: waive long-burn")
    budget = Budget(None)
    kept = check_program(load_text(text, "c.aps"), [BY_NAME["long-burn"]], budget=budget)
    assert kept == [] and [f.rule for f in budget.silenced] == ["long-burn"]
    budget = Budget(None)
    kept = check_program(load_text(capture("200 N"), "c.aps"), [BY_NAME["long-burn"]],
                         budget=budget, ignore=["long-burn"])
    assert kept == [] and len(budget.silenced) == 1
