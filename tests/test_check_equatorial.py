"""`apsidal check` from an equatorial orbit: rewrites of a plane change keep its plane.

From the equator every point is a node, so `inclination to I` alone takes its node line
from wherever the burn is flown.  A rewrite that turns the plane elsewhere would reach
another plane and be thrown out; the rules pin the plane the plan flew (`raan to`, beside
the inclination) so such rewrites are compared and suggested.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from scipy.optimize import minimize_scalar
from test_check import MU, RE, findings, plan, reprice, vcirc

EARTH_SOI = 924_649  # km, the catalogue's Laplace radius (recomputed in test_bodies.py)


def normal(text: str) -> np.ndarray:
    """Unit orbit normal r x v at the end of a plan, from its text alone."""
    final = run(load_text(text, "normal.aps")).final
    h = np.cross(final.r[0], final.v[0])
    return h / np.linalg.norm(h)


def via_altitude(suggestion: str) -> float:
    line = next(ln for ln in suggestion.splitlines() if "via apoapsis" in ln)
    return float(line.split("via apoapsis")[1].split()[0])


POLAR_TURN = plan("""start circular 400 km
burn tilt at node: inclination to 90 deg
""")


def test_a_polar_turn_from_the_equator_gets_the_three_burn_detour():
    [f] = findings(POLAR_TURN, "three-burn-plane-change")
    assert f.steps == ("tilt",)
    assert "transfer tilt at node: inclination to 90 deg, raan to 0 deg via apoapsis" \
        in f.suggestion
    # Closed form, vis-viva (Curtis, Orbital Mechanics for Engineering Students, ch. 6,
    # plane-change manoeuvres; Vallado, Fundamentals of Astrodynamics and Applications,
    # 4th ed., sec. 6.4 -- section numbers from memory): a pure rotation costs
    # 2 v sin(di/2); the detour raises the apoapsis to ra (v_p - v_c), turns there
    # (2 v_a sin(di/2)) and lowers back (v_p - v_c again).
    r, ra = RE + 400, RE + via_altitude(f.suggestion)
    di = math.radians(90)
    vc = vcirc(400)
    vp = math.sqrt(MU * (2 / r - 2 / (r + ra)))
    va = math.sqrt(MU * (2 / ra - 2 / (r + ra)))
    rotation = 2 * vc * math.sin(di / 2)
    detour = 2 * (vp - vc) + 2 * va * math.sin(di / 2)
    assert f.saves_m_s == pytest.approx((rotation - detour) * 1000, abs=1e-3)
    assert f.saves_m_s > 4000  # hundreds of m/s at least: here over 4 km/s
    # and the apoapsis is the best one the rule may use (95 % of Earth's SOI)
    n_max = 0.95 * EARTH_SOI / r
    best = minimize_scalar(
        lambda ln: 2 * (math.sqrt(2 * math.exp(ln) / (1 + math.exp(ln))) - 1)
        + 2 * math.sqrt(2 / (math.exp(ln) * (1 + math.exp(ln)))) * math.sin(di / 2),
        bounds=(0, math.log(n_max)), method="bounded")
    assert f.saves_m_s == pytest.approx((2 * math.sin(di / 2) - best.fun) * vc * 1000, abs=0.5)


def test_the_rewrite_reprices_to_the_same_plane():
    [f] = findings(POLAR_TURN, "three-burn-plane-change")
    assert float(np.dot(normal(f.suggestion), normal(POLAR_TURN))) >= math.cos(1e-7)
    old, new = reprice(POLAR_TURN), reprice(f.suggestion)
    assert old["totals"]["dv_m_s"] - new["totals"]["dv_m_s"] == pytest.approx(f.saves_m_s,
                                                                                 abs=1e-6)


@pytest.mark.parametrize("anomaly", [60.0, 137.25, 301.5])
def test_the_pin_is_the_node_line_the_plan_flew(anomaly):
    # from a circular equatorial orbit the burn is flown here, so the ascending node is
    # the craft's position: raan = its true longitude
    text = plan(f"""start circular 400 km anomaly {anomaly} deg
burn tilt at node: inclination to 90 deg
""")
    [f] = findings(text, "three-burn-plane-change")
    line = next(ln for ln in f.suggestion.splitlines() if "via apoapsis" in ln)
    raan = float(line.split("raan to")[1].split()[0])
    assert raan == pytest.approx(anomaly, abs=1e-7)
    assert float(np.dot(normal(f.suggestion), normal(text))) >= math.cos(1e-7)


EQUATOR_TO_GEO = plan("""start circular 300 km
burn tilt at node: inclination to 30 deg
burn raise at periapsis: apoapsis to 35786 km
burn circ at apoapsis: circular
""")


def test_reordering_a_plane_change_from_the_equator_is_found():
    # The turn flown in geostationary orbit instead of at 300 km saves
    # 2 sin(di/2) (v_c(300 km) - v_c(35786 km)) (closed form, vis-viva; Curtis, ch. 6).
    [f] = findings(EQUATOR_TO_GEO, "cheaper-order")
    expected = 2 * math.sin(math.radians(15)) * (vcirc(300) - vcirc(35786)) * 1000
    assert f.saves_m_s == pytest.approx(expected, abs=0.1)
    assert float(np.dot(normal(f.suggestion), normal(EQUATOR_TO_GEO))) >= math.cos(1e-7)


@pytest.mark.parametrize("rule", ["plane-change-at-speed", "merge-burns"])
def test_moving_or_merging_a_plane_change_from_the_equator_keeps_its_plane(rule):
    [f] = findings(EQUATOR_TO_GEO, rule)
    assert "raan to 0 deg" in f.suggestion
    assert float(np.dot(normal(f.suggestion), normal(EQUATOR_TO_GEO))) >= math.cos(1e-7)
    assert reprice(EQUATOR_TO_GEO)["totals"]["dv_m_s"] - \
        reprice(f.suggestion)["totals"]["dv_m_s"] == pytest.approx(f.saves_m_s, abs=1e-6)


@pytest.mark.parametrize("steps, rule", [
    ("transfer geo: circular 35786 km\nburn turn at node: inclination to 30 deg",
     "shared-plane-change"),
    ("burn turn: inclination to 30 deg\ntransfer geo: circular 35786 km",
     "shared-plane-change"),
    (("burn raise: apoapsis to 35786 km, inclination to 30 deg\n"
      "burn circ at apoapsis: circular"), "shared-plane-change"),
    ("transfer out: circular 130000 km, inclination to 30 deg", "bi-elliptic-cheaper"),
    ("transfer geo: circular 35786 km, inclination to 30 deg via apoapsis 90000 km",
     "hohmann-cheaper"),
])
def test_restructured_plane_changes_from_the_equator_keep_their_plane(steps, rule):
    text = plan(f"start circular 300 km anomaly 33 deg\n{steps}\n")
    [f] = findings(text, rule)
    assert "raan to" in f.suggestion and f.saves_m_s > 0
    assert float(np.dot(normal(f.suggestion), normal(text))) >= math.cos(1e-7)


@pytest.mark.parametrize("steps", [
    "burn tilt at node: inclination to 20 deg",  # below the detour's break-even
    "transfer geo: circular 35786 km, inclination to 5 deg",  # split at the optimum
    "burn tilt at node: inclination to 0 deg",  # no turn at all
])
def test_an_optimal_equatorial_plan_gets_no_saving(steps):
    text = plan(f"start circular 400 km\n{steps}\n")
    assert [f for f in findings(text) if f.saves_m_s] == []
