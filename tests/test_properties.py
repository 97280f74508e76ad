"""Invariants of the two-body model and of the budget, checked with hypothesis.

* a coast conserves the specific orbital energy and the angular-momentum vector, on
  closed and open orbits alike;
* elements -> state -> elements gives the elements back, in the conventions state.py
  states for circular and equatorial orbits (tested apart from the general case);
* kepler.time_of_flight and kepler.sweep_for_time invert each other within a revolution;
* no plan a user can write, flyable or not, puts a NaN or an infinity in the budget: the
  only empty (None) numbers are an open orbit's apoapsis and period, and the location of
  an error.

Plans come from two generators: the one below, which writes any goal at any place (so
most plans stop at some step with a located error), and tests/plangen.py, which writes
plans that fly to the end.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from apsidal.compiler import kepler
from apsidal.compiler.budget import budget
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.state import CIRCULAR_ECC, elements_from_state, state_from_elements
from apsidal.lang.errors import PlanError
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

# tests/plangen.py (flyable plans, written for the formatter's tests), importable under
# --import-mode=importlib once this folder is on the path
plangen = pytest.importorskip("plangen")

MU = 398600.4418
TWO_PI = 2.0 * math.pi
FAST = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])

angles = st.floats(0.0, TWO_PI, exclude_max=True)
inclinations = st.floats(1e-3, math.pi - 1e-3)
periapses = st.floats(6600.0, 60000.0)


def wrap(a: float) -> float:
    """An angle difference brought into [-pi, pi)."""
    return (a + math.pi) % TWO_PI - math.pi


@st.composite
def closed_orbits(draw, ecc=None):
    e = draw(st.floats(0.0, 0.95) if ecc is None else ecc)
    a = draw(periapses) / (1.0 - e)
    return a, e, draw(inclinations), draw(angles), draw(angles), draw(angles)


@st.composite
def open_orbits(draw):
    e = draw(st.floats(1.05, 6.0))
    a = -draw(periapses) / (e - 1.0)
    limit = math.acos(-1.0 / e)
    nu = draw(st.floats(-0.95 * limit, 0.95 * limit))
    return a, e, draw(inclinations), draw(angles), draw(angles), nu


def state_of(elements):
    r, v = state_from_elements(MU, *(np.array([x]) for x in elements))
    return r, v


def period_of(a: float) -> float:
    return TWO_PI * math.sqrt(a**3 / MU)


# --- coasts conserve energy and angular momentum ------------------------------------


def _assert_conserved(r, v, r1, v1, mu=MU):
    energy = lambda r, v: 0.5 * float(v[0] @ v[0]) - mu / float(np.linalg.norm(r[0]))
    assert energy(r1, v1) == pytest.approx(energy(r, v), rel=1e-10)
    h0, h1 = np.cross(r[0], v[0]), np.cross(r1[0], v1[0])
    assert np.linalg.norm(h1 - h0) <= 1e-10 * np.linalg.norm(h0)


@FAST
@given(closed_orbits(), st.floats(0.0, 20.0))
def test_coast_conserves_energy_and_momentum_closed(elements, revs):
    r, v = state_of(elements)
    r1, v1, ok = kepler.propagate(r, v, MU, np.array([revs * period_of(elements[0])]))
    assert ok[0]
    _assert_conserved(r, v, r1, v1)


@FAST
@given(open_orbits(), st.floats(0.0, 2e6))
def test_coast_conserves_energy_and_momentum_open(elements, dt):
    r, v = state_of(elements)
    r1, v1, ok = kepler.propagate(r, v, MU, np.array([dt]))
    assert ok[0]
    _assert_conserved(r, v, r1, v1)


@FAST
@given(closed_orbits(), st.floats(0.0, 4.0 * math.pi))
def test_coast_to_a_place_conserves_energy_and_momentum(elements, dtheta):
    r, v = state_of(elements)
    r1, v1, ok = kepler.place(r, v, MU, np.array([dtheta]))
    assert ok[0]
    _assert_conserved(r, v, r1, v1)


# --- elements -> state -> elements ---------------------------------------------------


def _assert_elements(el, a, e, i, raan, argp, nu, angle_tol=1e-8):
    assert el.sma[0] == pytest.approx(a, rel=1e-10)
    assert el.ecc[0] == pytest.approx(e, abs=1e-10)
    assert el.inclination[0] == pytest.approx(i, abs=1e-10)
    for got, want in ((el.raan[0], raan), (el.argp[0], argp), (el.anomaly[0], nu)):
        assert abs(wrap(got - want)) < angle_tol


@FAST
@given(st.one_of(closed_orbits(ecc=st.floats(1e-4, 0.95)), open_orbits()))
def test_elements_round_trip_general(elements):
    r, v = state_of(elements)
    _assert_elements(elements_from_state(r, v, MU), *elements)


@FAST
@given(periapses, inclinations, angles, angles)
def test_elements_round_trip_circular(radius, i, raan, u):
    # circular: argp is 0 and the anomaly is the argument of latitude
    r, v = state_of((radius, 0.0, i, raan, 0.0, u))
    el = elements_from_state(r, v, MU)
    assert el.ecc[0] < CIRCULAR_ECC
    _assert_elements(el, radius, 0.0, i, raan, 0.0, u)


@FAST
@given(st.floats(0.0, 0.95), st.sampled_from([0.0, math.pi]), angles, angles)
def test_elements_round_trip_equatorial(e, i, argp, nu):
    # equatorial (prograde or retrograde): raan is 0 and angles run from the x axis in
    # the direction of motion; circular and equatorial: the anomaly is the true longitude
    if e < 1e-4:
        e, nu, argp = 0.0, (argp + nu) % TWO_PI, 0.0
    a = 9000.0 / (1.0 - e)
    r, v = state_of((a, e, i, 0.0, argp, nu))
    el = elements_from_state(r, v, MU)
    assert bool(el.equatorial[0])
    _assert_elements(el, a, e, i, 0.0, argp, nu)


def test_retrograde_equatorial_angles_run_with_the_motion():
    # a retrograde equatorial craft a quarter turn along from the x axis sits at -y
    r, v = state_of((8000.0, 0.0, math.pi, 0.0, 0.0, math.pi / 2))
    assert r[0] == pytest.approx([0.0, -8000.0, 0.0], abs=1e-9)
    el = elements_from_state(r, v, MU)
    assert el.anomaly[0] == pytest.approx(math.pi / 2, abs=1e-12)


# --- time of flight and sweep for time invert each other ------------------------------


@FAST
@given(closed_orbits(), st.floats(0.0, TWO_PI, exclude_max=True))
def test_sweep_for_time_inverts_time_of_flight(elements, dtheta):
    r, v = state_of(elements)
    dt, ok = kepler.time_of_flight(r, v, MU, np.array([dtheta]))
    assert ok[0] and 0.0 <= dt[0] < period_of(elements[0]) * (1 + 1e-12)
    back, ok = kepler.sweep_for_time(r, v, MU, dt)
    assert ok[0]
    assert abs(wrap(back[0] - dtheta)) < 1e-7


@FAST
@given(closed_orbits(), st.floats(0.0, 1.0, exclude_max=True))
def test_time_of_flight_inverts_sweep_for_time(elements, fraction):
    r, v = state_of(elements)
    period = period_of(elements[0])
    dtheta, ok = kepler.sweep_for_time(r, v, MU, np.array([fraction * period]))
    assert ok[0] and 0.0 <= dtheta[0] <= TWO_PI  # 2 pi for 0: see the test below
    dt, ok = kepler.time_of_flight(r, v, MU, dtheta)
    assert ok[0]
    miss = (dt[0] - fraction * period + 0.5 * period) % period - 0.5 * period
    assert abs(miss) < 1e-7 * period


def test_sweep_for_no_time_is_no_angle():
    r, v = state_of((6600.0, 0.0, 1.0, 1.0, 0.0, 1.0))
    dtheta, ok = kepler.sweep_for_time(r, v, MU, np.array([0.0]))
    assert ok[0] and dtheta[0] == pytest.approx(0.0, abs=1e-12)


@FAST
@given(open_orbits(), st.floats(0.0, 0.9))
def test_time_of_flight_and_sweep_invert_on_open_orbits(elements, share):
    _, e, *_, nu = elements
    r, v = state_of(elements)
    dtheta = share * (0.95 * math.acos(-1.0 / e) - nu)
    dt, ok = kepler.time_of_flight(r, v, MU, np.array([dtheta]))
    assert ok[0] and dt[0] >= 0.0
    back, ok = kepler.sweep_for_time(r, v, MU, dt)
    assert ok[0]
    assert back[0] == pytest.approx(dtheta, abs=1e-7)


# --- no NaN or infinity in any budget ------------------------------------------------


def num(x: float) -> str:
    return f"{x:.4f}"


@st.composite
def places(draw):
    kind = draw(st.sampled_from(["periapsis", "apoapsis", "ascending node",
                                 "descending node", "node", "anomaly", None]))
    if kind == "anomaly":
        return f" at anomaly {num(draw(st.floats(0.0, 359.0)))} deg"
    return "" if kind is None else f" at {kind}"


# Steps that usually fly (an apsis raised at periapsis, a plane turned at a node, ...),
# mixed with any goal at any place, so that plans get past their first step as well as
# failing in every way a plan can fail.
USUAL = ["raise", "lower", "circular", "turn", "hohmann", "coast-for", "coast-rev"]
ANY = ["apoapsis", "periapsis", "circular-at", "inclination", "raan", "shape-plane",
       "vector", "hohmann-plane", "bielliptic", "detour", "coast-to", "drop", "expect"]


@st.composite
def step_lines(draw, radius: float, dry: float):
    alt = lambda lo=0.02, hi=12.0: num(radius * draw(st.floats(lo, hi)))
    deg = lambda hi=180.0: num(draw(st.floats(0.0, hi)))
    where = draw(places())
    kind = draw(st.sampled_from(USUAL) if draw(st.booleans()) else st.sampled_from(ANY))
    if kind == "raise":
        return f"burn at periapsis: apoapsis to {alt(4.0, 12.0)} km"
    if kind == "lower":
        return f"burn at apoapsis: periapsis to {alt(0.02, 0.3)} km"
    if kind == "turn":
        node = draw(st.sampled_from(["node", "ascending node", "descending node"]))
        return f"burn at {node}: inclination to {deg()} deg"
    if kind in ("apoapsis", "periapsis"):
        return f"burn{where}: {kind} to {alt()} km"
    if kind == "circular":
        return f"burn{where}: circular"
    if kind == "circular-at":
        return f"burn{where}: circular {alt()} km"
    if kind in ("inclination", "raan"):
        return f"burn{where}: {kind} to {deg(180.0 if kind == 'inclination' else 359.0)} deg"
    if kind == "shape-plane":
        return f"burn{where}: periapsis to {alt()} km, apoapsis to {alt()} km, " \
               f"inclination to {deg()} deg"
    if kind == "vector":
        parts = [f"{c} {num(draw(st.floats(-3000.0, 3000.0)))} m/s"
                 for c in draw(st.lists(st.sampled_from(["along", "cross", "radial"]),
                                        min_size=1, max_size=3, unique=True))]
        return f"burn{where}: " + ", ".join(parts)
    if kind == "hohmann":
        return f"transfer{where}: circular {alt()} km"
    if kind == "hohmann-plane":
        return f"transfer{where}: circular {alt()} km, inclination to {deg()} deg"
    if kind == "bielliptic":
        low, high = sorted(radius * draw(st.floats(0.02, 12.0)) for _ in range(2))
        return f"transfer{where}: circular {num(low)} km via apoapsis {num(high * 2)} km"
    if kind == "detour":
        return f"transfer{where}: inclination to {deg()} deg via apoapsis {alt()} km"
    if kind == "coast-for":
        return f"coast for {num(draw(st.floats(0.01, 100.0)))} h"
    if kind == "coast-to":
        if where == "":
            where = " at periapsis"
        return f"coast to{where[3:]}"
    if kind == "coast-rev":
        return f"coast {draw(st.integers(1, 3))} rev"
    if kind == "drop":
        return f"drop {num(dry * draw(st.floats(0.001, 1.2)))} kg"
    return (f"expect apoapsis {alt()} km within 1 km, inclination at most {deg()} deg, "
            f"propellant at least {num(draw(st.floats(0.0, 100.0)))} kg")


@st.composite
def plan_texts(draw):
    radius = draw(st.floats(200.0, 70000.0))
    surface_speed = draw(st.floats(0.3, 12.0))  # km/s, circular speed at the surface
    gm = surface_speed**2 * radius
    rp = radius * draw(st.floats(0.02, 3.0))
    angles = (f"inclination {num(draw(st.floats(0.0, 180.0)))} deg raan "
              f"{num(draw(st.floats(0.0, 359.0)))} deg argp {num(draw(st.floats(0.0, 359.0)))}"
              f" deg anomaly {num(draw(st.floats(-60.0, 60.0)))} deg")
    shape = draw(st.sampled_from(["circular", "circular", "apsides", "apsides", "ecc", "vinf"]))
    if shape == "circular":
        start = f"start circular {num(rp)} km " + angles.replace(" argp", " raan").split(
            " raan")[0] + f" anomaly {num(draw(st.floats(0.0, 359.0)))} deg"
    elif shape == "apsides":
        start = (f"start orbit periapsis {num(rp)} km apoapsis "
                 f"{num(rp + radius * draw(st.floats(0.0, 20.0)))} km {angles}")
    elif shape == "ecc":
        start = f"start orbit periapsis {num(rp)} km ecc {draw(st.floats(0.0, 1.6)):.4f} {angles}"
    else:
        start = f"start orbit periapsis {num(rp)} km vinf {num(draw(st.floats(0.01, 5.0)))} " \
                f"km/s {angles}"
    dry = draw(st.floats(50.0, 3000.0))
    steps = draw(st.lists(step_lines(radius, dry), min_size=1, max_size=6))
    lines = ['plan "generated"', f"body rock {{ gm {gm:.6g} km3/s2 radius {num(radius)} km }}",
             "around rock", "craft probe {", f"    dry {num(dry)} kg",
             f"    propellant {num(draw(st.floats(0.0, 40000.0)))} kg",
             (f"    engine main isp {num(draw(st.floats(150.0, 460.0)))} s thrust "
              f"{num(draw(st.floats(0.5, 5000.0)))} N"), "}",
             f"margin {num(draw(st.floats(0.0, 20.0)))} %", start, *steps]
    return "\n".join(lines) + "\n"


# Numbers that may be empty (None), and when.
MAY_BE_NONE = {"apoapsis_alt_km", "period_s", "line", "column", "hint", "tolerance", "actual",
               "actual_apoapsis", "reason", "first_uncovered_step", "propellant_needed_kg",
               "shortfall_kg", "dry_max_kg", "no_load_fits", "exhausted_component", "stranded_kg"}


def _walk(node, path=()):
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _walk(value, path + (key,))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _walk(value, path + (i,))
    else:
        yield path, node


def assert_clean_budget(report: dict) -> None:
    json.dumps(report, allow_nan=False)
    for path, value in _walk(report):
        if value is None:
            assert path[-1] in MAY_BE_NONE, path
        elif isinstance(value, float):
            assert math.isfinite(value), path
    for step in report["steps"]:
        orbit = step["orbit_after"]
        open_orbit = orbit["ecc"] >= 1.0
        assert (orbit["apoapsis_alt_km"] is None) == open_orbit, step["name"]
        assert (orbit["period_s"] is None) == open_orbit, step["name"]
        for check in step.get("checks", []):
            if check["actual"] is None:
                assert check["kind"] in ("apoapsis", "circular", "period") and open_orbit
                # an open orbit has no such value: the check fails, and says why
                assert not check["passed"] and "open" in check["reason"]
            else:
                assert check["reason"] is None
    assert report["totals"]["propellant_left_kg"] >= -1e-9


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(plan_texts())
def test_no_plan_puts_nan_or_inf_in_the_budget(text):
    try:
        program = load_text(text)
    except PlanError:
        return  # rejected with a located message: fine
    result = run(program)
    assert result.error is None or isinstance(result.error, PlanError)
    assert_clean_budget(budget(result))


def test_coast_to_node():
    text = ("around earth\ncraft c {\n dry 100 kg\n propellant 10 kg\n"
            " engine m isp 300 s thrust 10 N\n}\nstart circular 500 km inclination 30 deg\n"
            "coast to node\n")
    result = run(load_text(text))
    assert result.error is None
    assert result.rows[0].coast_time[0] == 0.0  # the start is at the ascending node
    # a quarter turn on: the next node is the descending one, half a period after it
    later = run(load_text(text.replace("inclination 30 deg",
                                       "inclination 30 deg anomaly 90 deg")))
    period = 2 * np.pi * np.sqrt((6378.1366 + 500) ** 3 / 398600.4418)
    assert later.rows[0].coast_time[0] == pytest.approx(period / 4, rel=1e-12)


def test_the_generator_reaches_flyable_and_unflyable_plans():
    # the property above is only worth something if both outcomes occur
    outcomes = set()

    @settings(max_examples=40, deadline=None, database=None)
    @given(plan_texts())
    def sample(text):
        try:
            outcomes.add("ok" if run(load_text(text)).error is None else "error")
        except PlanError:
            outcomes.add("rejected")

    sample()
    assert {"ok", "error"} <= outcomes


# --- the same on plans that fly to the end (tests/plangen.py) -------------------------


@settings(max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(plangen.plan_texts(tidy=True))
def test_flyable_plans_budget_is_clean_and_coasts_conserve(text):
    result = run(load_text(text))
    assert result.error is None, result.error
    assert_clean_budget(budget(result))
    mu = result.program.body.gm
    r, v = result.program.start_r[None], result.program.start_v[None]
    for row in result.rows:
        if row.kind == "coast":
            _assert_conserved(r, v, row.after.r, row.after.v, mu)
        r, v = row.after.r, row.after.v
