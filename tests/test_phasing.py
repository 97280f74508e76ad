"""Phasing transfers against published worked examples, explicit burns and integration.

`transfer NAME: phase ANGLE in N rev` comes back to the point of its first burn after N
revolutions of a phasing orbit, where a companion that flew ANGLE of true anomaly ahead
of the craft (behind, for a negative angle) at the first burn then stands.  Checked here:

* the textbook examples, each flown around a body with the book's own constants, their
  printed answers (from memory, as marked) and the same numbers worked out in this file
  from Kepler's equation, Kepler's third law and vis-viva;
* each of the two burns against the same burn written as explicit components;
* the timing with scipy's DOP853 integrator: the craft is back at the point at the time
  the report states, where the companion is, ANGLE ahead of the unperturbed craft.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from test_textbook import CURTIS_MU, CURTIS_RE, VALLADO_MU, VALLADO_RE

POSITION_TOL = 1e-3  # km: 1 m
VELOCITY_TOL = 1e-6  # km/s: 1 mm/s


def period(mu: float, a: float) -> float:
    return 2 * math.pi * math.sqrt(a**3 / mu)


def sma_of(mu: float, t: float) -> float:
    """Kepler's third law."""
    return (mu * (t / (2 * math.pi)) ** 2) ** (1 / 3)


def vis_viva(mu: float, r: float, a: float) -> float:
    return math.sqrt(mu * (2 / r - 1 / a))


def time_from_periapsis(a: float, e: float, mu: float, nu: float) -> float:
    """Kepler's equation: E from the true anomaly, M = E - e sin E (nu in [0, 2 pi))."""
    E = 2 * math.atan(math.sqrt((1 - e) / (1 + e)) * math.tan(nu / 2))
    return ((E - e * math.sin(E)) % (2 * math.pi)) * math.sqrt(a**3 / mu)


def phasing_pair(plans, text: str):
    result = plans.result(text)
    burns = [r for r in result.rows if r.kind == "burn"]
    assert [b.name for b in burns][-2:] == ["p/1", "p/2"]
    return result, burns[-2], burns[-1]


# --- published worked examples -------------------------------------------------------


def test_curtis_phasing_on_an_ellipse(plans):
    # Source: Curtis, Orbital Mechanics for Engineering Students, 3rd ed., Example 6.8
    # (the number and the printed answer from memory): two craft on one orbit of perigee
    # radius 6800 km and apogee radius 13 600 km; the chaser at perigee, the target 90 deg
    # of true anomaly ahead; the chaser meets it back at perigee after one revolution of a
    # phasing orbit.  Total delta-v about 0.497 km/s (from memory; the last printed digit
    # is not recalled, and the book rounds its intermediate figures).
    rp, ra = 6800.0, 13600.0
    text = plans.text(f"start orbit periapsis {rp - CURTIS_RE!r} km apoapsis {ra - CURTIS_RE!r} km",
                      "transfer p: phase 90 deg in 1 rev", gm=CURTIS_MU, radius=CURTIS_RE)
    result, first, second = phasing_pair(plans, text)
    total = (first.dv[0] + second.dv[0]) * 1000.0
    assert total == pytest.approx(497.0, abs=0.5)  # the book's figure
    # the same worked out here: the target's lead is the time from perigee to 90 deg
    a, e = (rp + ra) / 2, (ra - rp) / (ra + rp)
    t_orbit = period(CURTIS_MU, a)
    lead = time_from_periapsis(a, e, CURTIS_MU, math.pi / 2)
    t_phase = t_orbit - lead
    a2 = sma_of(CURTIS_MU, t_phase)
    dv = abs(vis_viva(CURTIS_MU, rp, a) - vis_viva(CURTIS_MU, rp, a2))
    assert first.dv[0] == pytest.approx(dv, abs=1e-9)
    assert second.dv[0] == pytest.approx(dv, abs=1e-9)
    assert float(second.coast_time[0]) == pytest.approx(t_phase, abs=1e-6)
    assert first.dv_vec[0][0] < 0  # a retro-burn: the faster, smaller orbit
    # the phasing orbit's apogee is 2 a2 - rp from the centre
    from apsidal.compiler.state import elements_from_state

    el = elements_from_state(first.after.r, first.after.v, CURTIS_MU)
    assert el.apoapsis[0] == pytest.approx(2 * a2 - rp, abs=1e-6)
    assert el.periapsis[0] == pytest.approx(rp, abs=1e-6)
    # and the craft is back on its own orbit, at perigee, one phasing period later
    after = elements_from_state(second.after.r, second.after.v, CURTIS_MU)
    assert after.periapsis[0] == pytest.approx(rp, abs=1e-6)
    assert after.apoapsis[0] == pytest.approx(ra, abs=1e-6)
    assert float(result.final.t[0]) == pytest.approx(t_phase, abs=1e-6)


def test_curtis_geostationary_longitude_shift(plans):
    # Source: Curtis, Orbital Mechanics for Engineering Students, 3rd ed., Example 6.9
    # (number and answer from memory): shift a geostationary satellite 12 deg of longitude
    # westward in three revolutions of its phasing orbit.  Westward is behind the Earth's
    # rotation, which the unperturbed satellite keeps pace with: 12 deg behind.  The book
    # takes the sidereal day, 86 164 s, as the period; total delta-v 0.02253 km/s.
    t_geo = 86164.0
    r_geo = sma_of(CURTIS_MU, t_geo)
    text = plans.text(f"start circular radius {r_geo!r} km",
                      "transfer p: phase -12 deg in 3 rev", gm=CURTIS_MU, radius=CURTIS_RE)
    _, first, second = phasing_pair(plans, text)
    total = (first.dv[0] + second.dv[0]) * 1000.0
    assert total == pytest.approx(22.53, abs=0.005)
    # worked out here: each revolution loses (12 / 360) T / 3
    t_phase = t_geo + (12 / 360) * t_geo / 3
    dv = vis_viva(CURTIS_MU, r_geo, sma_of(CURTIS_MU, t_phase)) - math.sqrt(CURTIS_MU / r_geo)
    assert first.dv[0] == pytest.approx(dv, abs=1e-10)
    assert first.dv_vec[0][0] > 0  # speeds up into the larger, slower orbit
    assert float(second.coast_time[0]) == pytest.approx(3 * t_phase, abs=1e-5)


@pytest.mark.parametrize(("angle", "revs"), [(20, 1), (-20, 1), (45, 2), (-90, 3), (5, 7),
                                             (170, 4), (-300, 1)])
def test_circular_same_orbit_phasing_relation(plans, angle, revs):
    # Source: the circular coplanar phasing relation of Vallado, Fundamentals of
    # Astrodynamics and Applications, 4th ed., Sec. 6.6 (from memory) and Curtis, 3rd ed.,
    # Sec. 6.6: to arrive theta ahead after N revolutions of the phasing orbit its period
    # is T' = T - (theta / 360 deg) T / N; tangential burns at the same point, equal and
    # opposite.  Vallado's example radius, two Earth radii (12 756.274 km, from memory).
    a = 2 * VALLADO_RE
    text = plans.text(f"start circular radius {a!r} km inclination 28.5 deg anomaly 33 deg",
                      f"transfer p: phase {angle} deg in {revs} rev",
                      gm=VALLADO_MU, radius=VALLADO_RE)
    _, first, second = phasing_pair(plans, text)
    t = period(VALLADO_MU, a)
    t_phase = t - (angle / 360) * t / revs
    dv = abs(vis_viva(VALLADO_MU, a, sma_of(VALLADO_MU, t_phase)) - math.sqrt(VALLADO_MU / a))
    assert first.dv[0] == pytest.approx(dv, rel=1e-9, abs=1e-12)
    assert second.dv[0] == pytest.approx(dv, rel=1e-9, abs=1e-12)
    assert float(second.coast_time[0]) == pytest.approx(revs * t_phase, rel=1e-12)
    # equal and opposite, along the flight path
    np.testing.assert_allclose(first.after.v[0] - first.v_before[0],
                               -(second.after.v[0] - second.v_before[0]), atol=1e-12)
    assert abs(first.dv_vec[0][1]) < 1e-12 and abs(first.dv_vec[0][2]) < 1e-12


def test_the_fewest_revolutions_that_clear_the_surface(plans):
    # Worked out here: from a circle of radius r, arriving theta ahead needs N T' = N T -
    # (theta/360) T, and the lowest phasing orbit allowed has its periapsis on the surface,
    # sma (R + r) / 2 (Kepler's third law, from memory); so N > (theta/360) T / (T - T_min).
    from apsidal.compiler.evaluate import run
    from apsidal.compiler.load import load_text

    radius, r = 6378.137, 6378.137 + 400.0
    mu = 398600.4418
    t, t_min = period(mu, r), period(mu, (radius + r) / 2)
    fewest = math.floor((150 / 360) * t / (t - t_min)) + 1
    for revs, flies in ((fewest - 1, False), (fewest, True)):
        text = plans.text("start circular 400 km", f"transfer p: phase 150 deg in {revs} rev")
        result = run(load_text(text))
        assert result.ok is flies
        if not flies:
            assert f"`phase 150 deg in {fewest} rev`" in result.error.hint
            assert "under the surface" in result.error.message
    # behind never dips: a larger orbit
    assert run(load_text(plans.text("start circular 400 km",
                                    "transfer p: phase -150 deg in 1 rev"))).ok


@pytest.mark.parametrize("at", ["apoapsis", "anomaly 120 deg", "anomaly 250 deg"])
def test_the_fewest_revolutions_are_the_fewest_on_an_ellipse(plans, at):
    # the hint's count flies, one fewer is refused (the refusal's own arithmetic is the
    # tangential burn to a periapsis on the surface; here the plans themselves decide)
    from apsidal.compiler.evaluate import run
    from apsidal.compiler.load import load_text

    start = "start orbit periapsis 300 km apoapsis 3000 km inclination 20 deg"
    refused = run(load_text(plans.text(start, f"transfer p at {at}: phase 120 deg in 1 rev")))
    assert not refused.ok and "under the surface" in refused.error.message
    fewest = int(re.search(r"`phase 120 deg in (\d+) rev`", refused.error.hint).group(1))
    assert fewest > 1
    ok = run(load_text(plans.text(start, f"transfer p at {at}: phase 120 deg in {fewest} rev")))
    assert ok.ok, ok.error
    from apsidal.compiler.state import elements_from_state

    low = elements_from_state(ok.rows[0].after.r, ok.rows[0].after.v, ok.program.body.gm)
    assert low.periapsis[0] >= ok.program.body.radius
    fewer = run(load_text(plans.text(start,
                                     f"transfer p at {at}: phase 120 deg in {fewest - 1} rev")))
    assert not fewer.ok and "under the surface" in fewer.error.message


def test_an_elliptic_orbit_away_from_the_apsides(plans):
    # Worked out here: at true anomaly 50 deg of a 500 x 9000 km orbit the burn keeps the
    # flight direction and sets the speed vis-viva gives for the period T - tau / N, tau
    # the time from 50 deg to 50 + 35 deg (Kepler's equation); the phasing orbit passes
    # through the point with the same flight direction.
    mu, re = 398600.4418, 6378.137
    rp, ra = re + 500.0, re + 9000.0
    text = plans.text("start orbit periapsis 500 km apoapsis 9000 km inclination 63.4 deg "
                      "raan 40 deg argp 270 deg anomaly 50 deg",
                      "transfer p: phase 35 deg in 2 rev")
    _, first, second = phasing_pair(plans, text)
    a, e = (rp + ra) / 2, (ra - rp) / (ra + rp)
    tau = (time_from_periapsis(a, e, mu, math.radians(85))
           - time_from_periapsis(a, e, mu, math.radians(50)))
    t_phase = period(mu, a) - tau / 2
    r = float(np.linalg.norm(first.after.r[0]))
    v_new = vis_viva(mu, r, sma_of(mu, t_phase))
    assert float(np.linalg.norm(first.after.v[0])) == pytest.approx(v_new, abs=1e-12)
    cos = first.after.v[0] @ first.v_before[0] / (np.linalg.norm(first.after.v[0])
                                                  * np.linalg.norm(first.v_before[0]))
    assert cos == pytest.approx(1.0, abs=1e-15)
    assert float(second.coast_time[0]) == pytest.approx(2 * t_phase, abs=1e-6)


# --- the same burns as explicit components -------------------------------------------


@pytest.mark.parametrize("start", [
    "start circular 700 km inclination 51.6 deg raan 10 deg anomaly 100 deg",
    ("start orbit periapsis 300 km apoapsis 4000 km inclination 98 deg argp 30 deg "
    "anomaly 140 deg"),
])
@pytest.mark.parametrize("phase", ["20 deg in 3 rev", "-75 deg in 2 rev"])
def test_phasing_burns_are_the_explicit_burns_they_report(plans, start, phase):
    text = plans.text(start, f"transfer p at anomaly 200 deg: phase {phase}")
    result, first, second = phasing_pair(plans, text)
    parts = lambda row: ", ".join(f"{k} {float(x) * 1000.0!r} m/s"
                                  for k, x in zip(("along", "cross", "radial"), row.dv_vec[0]))
    explicit = plans.text(start, "coast to anomaly 200 deg", f"burn one: {parts(first)}",
                          f"coast for {float(second.coast_time[0])!r} s",
                          f"burn two: {parts(second)}")
    again = plans.result(explicit)
    assert np.linalg.norm(again.final.r[0] - result.final.r[0]) < POSITION_TOL
    assert np.linalg.norm(again.final.v[0] - result.final.v[0]) < VELOCITY_TOL
    assert float(again.final.t[0]) == pytest.approx(float(result.final.t[0]), abs=1e-6)
    assert float(again.final.dv[0]) == pytest.approx(float(result.final.dv[0]), abs=1e-9)
    # and it is back where it started the phasing, on its own orbit
    assert np.linalg.norm(result.final.r[0] - first.after.r[0]) < 1e-9
    assert np.linalg.norm(result.final.v[0] - first.v_before[0]) < 1e-12


# --- the timing, integrated --------------------------------------------------------------


@pytest.mark.parametrize("start", [
    "start circular 550 km inclination 53 deg raan 120 deg anomaly 10 deg",
    ("start orbit periapsis 400 km apoapsis 20000 km inclination 30 deg argp 60 deg "
    "anomaly 300 deg"),
])
@pytest.mark.parametrize(("angle", "revs"), [(30, 3), (-120, 3), (8, 1)])
def test_phasing_timing_against_integration(plans, numeric, start, angle, revs):
    text = plans.text(start, f"transfer p: phase {angle} deg in {revs} rev")
    result, first, second = phasing_pair(plans, text)
    mu = result.program.body.gm
    r0, v0 = first.after.r[0], first.v_before[0]  # the point, before the first burn
    t_phase = float(second.coast_time[0])
    # the craft on its phasing orbit is back at the point after the stated time
    r1, v1 = numeric(r0, first.after.v[0], mu, t_phase)
    assert np.linalg.norm(r1 - r0) < POSITION_TOL
    assert np.linalg.norm(v1 - first.after.v[0]) < VELOCITY_TOL
    # a companion ANGLE of true anomaly ahead (behind) at the first burn is there too:
    # it is where the unperturbed craft is after the time the companion leads by
    h = np.cross(r0, v0)
    e_vec = np.cross(v0, h) / mu - r0 / np.linalg.norm(r0)
    e = np.linalg.norm(e_vec)
    a = 1 / (2 / np.linalg.norm(r0) - v0 @ v0 / mu)
    if e > 1e-9:
        nu0 = math.atan2(np.cross(e_vec, r0) @ h / np.linalg.norm(h), e_vec @ r0)
        lead = (time_from_periapsis(a, e, mu, (nu0 + math.radians(angle)) % (2 * math.pi))
                - time_from_periapsis(a, e, mu, nu0 % (2 * math.pi)))
        lead %= period(mu, a)
    else:
        lead = (math.radians(angle) % (2 * math.pi)) / (2 * math.pi) * period(mu, a)
    companion = numeric(r0, v0, mu, lead)
    swept = math.atan2(np.cross(r0, companion[0]) @ h / np.linalg.norm(h), r0 @ companion[0])
    assert math.degrees(swept) % 360 == pytest.approx(angle % 360, abs=1e-7)
    met = numeric(*companion, mu, t_phase)
    assert np.linalg.norm(met[0] - r0) < POSITION_TOL
    assert np.linalg.norm(met[1] - v0) < VELOCITY_TOL
    # on a circle that is the unperturbed craft's angle behind the point
    if e <= 1e-9:
        alone = numeric(r0, v0, mu, t_phase)[0]
        behind = math.atan2(np.cross(alone, r0) @ h / np.linalg.norm(h), alone @ r0)
        assert math.degrees(behind) % 360 == pytest.approx(angle % 360, abs=1e-7)
    # and the report's elapsed time is the phasing orbit's N periods
    assert float(result.final.t[0]) == pytest.approx(
        float(first.coast_time[0]) + t_phase, abs=1e-9)


# --- check and diff ----------------------------------------------------------------------


def test_check_never_moves_or_rewrites_a_phasing_transfer(plans):
    from apsidal.compiler.check import check_program
    from apsidal.compiler.load import load_text
    from apsidal.compiler.reorder import blocks

    # an eccentric orbit: the descending node is slower, so a Hohmann-type rewrite there
    # would be cheaper, but another node is another phasing
    text = plans.text("start orbit periapsis 400 km apoapsis 6000 km inclination 40 deg "
                      "argp 60 deg",
                      "burn tilt at node: inclination to 41 deg",
                      "burn up at periapsis: apoapsis to 7000 km",
                      "transfer p at ascending node: phase 20 deg in 3 rev",
                      "burn a at periapsis: apoapsis to 7500 km",
                      "burn b at node: inclination to 42 deg")
    program = load_text(text)
    assert blocks(program) == [[0, 1], [3, 4]]
    for finding in check_program(program):
        if finding.rule != "long-burn":  # a long burn is a long burn, phasing or not
            assert not {"p", "p/1", "p/2"} & set(finding.steps), finding
        if finding.suggestion is not None:
            assert "transfer p at ascending node: phase 20 deg in 3 rev" in finding.suggestion


def test_diff_matches_phasing_burns_and_the_entry_by_name(plans):
    from pathlib import Path

    from apsidal.compiler.diff import diff_reports

    sample = (Path(__file__).parent.parent / "samples" / "weft-slots.aps").read_text()
    revised = sample.replace("phase -120 deg in 15 rev\ndrop weft-b",
                             "phase -120 deg in 12 rev\ndrop weft-b")
    revised = revised.replace("periapsis to -30 km", "periapsis to 20 km")
    assert revised.count("in 12 rev") == 1 and "to 20 km" in revised
    old, new = plans.budget(sample), plans.budget(revised)
    d = diff_reports(old, new)
    status = {e["name"]: e["status"] for e in d["steps"]}
    entry = {e["name"]: e for e in d["steps"]}
    assert status["slot-b/1"] == status["slot-b/2"] == "changed"  # fewer revolutions, dearer
    assert entry["slot-b/1"]["new"]["dv_m_s"] > entry["slot-b/1"]["old"]["dv_m_s"]
    # slot-c flies the same burns, at another mass
    assert entry["slot-c/1"]["new"]["dv_m_s"] == pytest.approx(
        entry["slot-c/1"]["old"]["dv_m_s"], abs=1e-9)
    assert status["weft-a"] == status["weft-c"] == "same"
    assert status["deorbit"] == status["reentry"] == "changed"
    assert d["change"]["dv_m_s"] == pytest.approx(
        new["totals"]["dv_m_s"] - old["totals"]["dv_m_s"], abs=1e-9)
