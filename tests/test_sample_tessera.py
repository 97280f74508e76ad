"""samples/tessera-drift.aps: a constellation plane placed by the differential J2 drift.

Its facts are worked out here from the classical secular node rate and vis-viva, not read
back from the compiler (the body constants are the ones the report states it used).
"""

from __future__ import annotations

import math

import pytest
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.state import elements_from_state
from test_samples import SAMPLES, close, report, step, vis_viva

J2 = 1.0826359e-3  # IERS Conventions (2010) Table 1.1 (the catalogue's Earth)
DAY = 86400.0


def node_rate(mu, radius, a, e, inc_deg):
    """-(3/2) n J2 (R/p)^2 cos i (Curtis, 3rd ed., Eq. 4.52; Vallado, 4th ed., Sec. 9.6 -
    from memory)."""
    p = a * (1 - e * e)
    return -1.5 * math.sqrt(mu / a**3) * J2 * (radius / p) ** 2 * math.cos(math.radians(inc_deg))


def scene():
    rep = report("tessera-drift")
    return rep, rep["body"]["gm_km3_s2"], rep["body"]["radius_km"]


def test_tessera_is_priced_with_j2():
    rep, _, _ = scene()
    assert rep["gravity"] == "j2"


def test_tessera_drift_rates_are_the_classical_ones():
    rep, mu, R = scene()
    deg_day = lambda rate: math.degrees(rate) * DAY
    drop = {c["kind"]: c for c in step(rep, "drop-off")["checks"]}["raan drift"]
    work = {c["kind"]: c for c in step(rep, "working")["checks"]}["raan drift"]
    assert drop["actual"] == pytest.approx(deg_day(node_rate(mu, R, R + 400, 0, 53)), rel=1e-9)
    assert work["actual"] == pytest.approx(deg_day(node_rate(mu, R, R + 600, 0, 53)), rel=1e-9)


def test_tessera_climb_is_a_hohmann_transfer():
    rep, mu, R = scene()
    r1, r2 = R + 400, R + 600
    a = (r1 + r2) / 2
    one = (vis_viva(mu, r1, a) - math.sqrt(mu / r1)) * 1000
    two = (math.sqrt(mu / r2) - vis_viva(mu, r2, a)) * 1000
    assert step(rep, "climb/1")["dv_m_s"] == close(one)
    assert step(rep, "climb/2")["dv_m_s"] == close(two)


def test_tessera_node_after_the_drift_and_the_climb():
    # 120 deg, plus the node rate at 400 km for the wait, plus the transfer ellipse's
    # node rate for its half revolution (the J2 change of its period is a part in a
    # thousand of a few minutes' drift: far under the tolerance)
    rep, mu, R = scene()
    wait = step(rep, "drift-low")["duration_s"]
    r1, r2 = R + 400, R + 600
    a, e = (r1 + r2) / 2, (r2 - r1) / (r2 + r1)
    half = math.pi * math.sqrt(a**3 / mu)
    raan = 120 + math.degrees(node_rate(mu, R, r1, 0, 53) * wait
                              + node_rate(mu, R, a, e, 53) * half)
    assert step(rep, "climb/2")["orbit_after"]["raan_deg"] == pytest.approx(raan % 360,
                                                                            abs=1e-3)


def test_tessera_plane_c_is_thirty_degrees_west_of_plane_a():
    # Plane A is the same craft climbing at once and coasting at 600 km for the wait (to
    # the same moment); the differential drift over the wait gives the spacing (worked
    # here), and the priced twin agrees.
    rep, mu, R = scene()
    wait = step(rep, "drift-low")["duration_s"]
    spacing = math.degrees((node_rate(mu, R, R + 400, 0, 53) - node_rate(mu, R, R + 600, 0, 53))
                           * wait)
    assert spacing == pytest.approx(-30.0, abs=0.005)
    text = (SAMPLES / "tessera-drift.aps").read_text()
    twin = text.replace("coast drift-low for 63.96 d\n", "").replace(
        "transfer climb: circular 600 km\n",
        f"transfer climb: circular 600 km\ncoast settle for {wait} s\n")
    twin = "\n".join(line for line in twin.splitlines() if not line.startswith("expect"))
    a = run(load_text(twin), strict=True)
    plane_a = math.degrees(elements_from_state(a.final.r, a.final.v, mu).raan[0])
    plane_c = step(rep, "climb/2")["orbit_after"]["raan_deg"]
    assert (plane_c - plane_a + 180) % 360 - 180 == pytest.approx(-30.0, abs=0.01)
