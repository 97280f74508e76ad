"""`apsidal export` of plans priced with the other models: `burns finite` (the blocks are
the thrust arcs the plan flew), `gravity j2` (the epochs after drifting coasts), both
together, and plans with legs (refused: an OPM has one centre).

The message is CCSDS 502.0-B-3 (Orbit Data Messages, April 2023), section 3: a
manoeuvre's MAN_EPOCH_IGNITION, MAN_DURATION and MAN_DELTA_MASS (3.2.4).  Every check
here is against the plan's own report (`run --format json`) and a replay of the message
read back; the plans are scenarios of our own.
"""

from __future__ import annotations

from datetime import timedelta

import numpy as np
import pytest
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.opm import build, plan_lines, read, write
from test_combined_models import COURIER, run_json
from test_export import rel, sample

J2_FINITE = """\
plan "Apogee burns under J2"
around earth
gravity j2
burns finite
craft petrel {
    dry 1450 kg
    propellant 2300 kg
    engine main isp 321 s thrust 445 N
    engine rcs isp 225 s thrust 22 N
}
margin 3 %
epoch 2027-03-01T00:00:00 UTC
start orbit periapsis 250 km apoapsis 35786 km inclination 7 deg raan 40 deg argp 10 deg
coast wait for 3 d
burn lift-1 at apoapsis: periapsis to 9000 km
coast settle 2 rev
burn lift-2 at apoapsis: periapsis to 22000 km
burn trim at periapsis: apoapsis to 35800 km using rcs
"""


def message_and_report(tmp_path, capsys, text):
    path = tmp_path / "plan.aps"
    path.write_text(text)
    assert main(["export", str(path)]) in (0, 1)
    message = read(capsys.readouterr().out)
    _, report = run_json(tmp_path, capsys, text)
    return message, report


@pytest.mark.parametrize("which", ["petrel-apogee-burns", "j2-finite"])
def test_a_finite_plan_exports_the_thrust_arcs_it_flew(which, tmp_path, capsys):
    """Each block is the finite burn the plan flew: ignition half the arc before the
    impulse point (the arc's end less its whole length), the arc's own duration, the
    budget's propellant, and the delta-v the engine gave along the impulsive direction
    in RTN at the impulse point.  The message used to date the burn from the end of the
    arc, give the margined burn time, and take the velocity change from the arc's end
    (an apogee burn came out half radial)."""
    text = sample("petrel-apogee-burns") if which != "j2-finite" else J2_FINITE
    message, report = message_and_report(tmp_path, capsys, text)
    burns = [s for s in report["steps"] if s["kind"] == "burn"]
    assert [m.name for m in message.maneuvers] == [s["name"] for s in burns]
    for m, step in zip(message.maneuvers, burns):
        arc = step["finite"]["thrust_time_s"]
        assert m.duration == pytest.approx(arc, abs=1e-6)
        ignition = (m.ignition - message.epoch).total_seconds()
        assert ignition == pytest.approx(step["elapsed_s"] - arc, abs=2e-6)
        assert -m.delta_mass == pytest.approx(step["propellant_kg"], abs=1e-6)
        rtn = step["vector_rtn_m_s"]
        assert rel(np.array(m.dv) * 1000.0,
                   [rtn["radial"], rtn["transverse"], rtn["normal"]]) < 1e-6
        assert np.linalg.norm(m.dv) * 1000.0 == pytest.approx(step["dv_m_s"], abs=1e-5)
        assert m.engine == ("" if step["engine"] == "main" else step["engine"])


def test_the_message_names_the_models_that_priced_the_plan(tmp_path, capsys):
    message, _ = message_and_report(tmp_path, capsys, J2_FINITE)
    said = " ".join(message.comments)
    assert "constant thrust" in said and "J2 drift" in said  # budget.caution, both models
    assert "impulsive two-body approximation" not in said
    assert "mean elements" in said  # the state is the secular theory's


def test_an_impulsive_message_of_a_finite_plan_is_refused_at_burns_finite(tmp_path, capsys):
    path = tmp_path / "plan.aps"
    path.write_text(J2_FINITE)
    assert main(["export", str(path), "--impulsive"]) == 2
    err = capsys.readouterr().err
    assert "plan.aps:4:1" in err and "burns finite" in err and "without --impulsive" in err


def replay(text: str, head_end: str = "\nepoch "):
    program = load_text(text, "plan.aps")
    result = run(program)
    message = read(write(build(program, result)))
    head = text[:text.index(head_end)]  # title, body, craft and settings
    lines = plan_lines(message)
    again = run(load_text(head + "\n" + "\n".join(lines) + "\n", "replay.aps"))
    assert again.ok, again.error
    return result, again, lines


def burn_rows(result):
    return [row for row in result.rows if row.kind == "burn"]


@pytest.mark.parametrize("which", ["petrel-apogee-burns", "j2-finite"])
def test_a_finite_message_read_back_flies_the_same_arcs(which):
    """Read back, the lines say to fly them `burns finite`, count each coast from the end
    of the arc before, and name the engine where it is not the default; flown so, every
    burn gives the same delta-v over an arc of the same length, centred on the same
    instant.  A burn along the velocity ends where the plan's did; one that turns the
    plane points its thrust from the mean of its own impulse's velocities, which the
    components shift by the gravity loss's share (tens of metres after 370 m/s)."""
    text = sample("petrel-apogee-burns") if which != "j2-finite" else J2_FINITE
    result, again, lines = replay(text)
    assert lines[0].startswith("# ") and "`burns finite`" in " ".join(lines[:2])
    assert any("using rcs" in ln for ln in lines)
    for a, b in zip(burn_rows(result), burn_rows(again), strict=True):
        assert float(b.dv[0]) == pytest.approx(float(a.dv[0]), rel=1e-9)
        assert float(b.finite_time[0]) == pytest.approx(float(a.finite_time[0]), rel=1e-9)
        assert float(b.after.t[0]) == pytest.approx(float(a.after.t[0]), abs=1e-5)
    first = burn_rows(result)[0], burn_rows(again)[0]  # along the velocity
    assert rel(first[1].after.r[0], first[0].after.r[0]) < 1e-9
    assert rel(again.final.r[0], result.final.r[0]) < 1e-3


def test_a_j2_message_read_back_flies_the_same_plan():
    """The burns of a plan priced `gravity j2` are dated after drifting coasts; read back
    (the lines say to fly them `gravity j2`) they give the same burns and final state."""
    text = sample("tessera-drift")
    result, again, lines = replay(text)
    assert any("`gravity j2`" in ln for ln in lines if ln.startswith("#"))
    assert [float(b.after.t[0]) for b in burn_rows(again)] == pytest.approx(
        [float(a.after.t[0]) for a in burn_rows(result)], abs=1e-5)
    assert rel(again.final.r[0], result.final.r[0]) < 1e-9
    assert rel(again.final.v[0], result.final.v[0]) < 1e-9


def test_a_plan_with_a_leg_flown_finite_is_refused_at_its_leg(tmp_path, capsys):
    path = tmp_path / "plan.aps"
    path.write_text(COURIER.replace("start circular", "epoch 2027-03-01T00:00:00 TT\n"
                                    "start circular"))
    assert main(["export", str(path)]) == 2
    err = capsys.readouterr().err
    assert "plan.aps:15:1" in err and "one central body" in err


def test_a_phasing_burn_of_a_finite_plan_is_an_impulsive_block(tmp_path, capsys):
    """A finite plan keeps its phasing burns impulsive: the message writes them so
    (duration 0, ignition at the impulse), beside the thrust arcs of the others."""
    text = J2_FINITE.replace("coast settle 2 rev\n", "transfer hop: phase 20 deg in 3 rev\n")
    message, report = message_and_report(tmp_path, capsys, text)
    steps = {s["name"]: s for s in report["steps"]}
    blocks = {m.name: m for m in message.maneuvers}
    for name in ("hop/1", "hop/2"):
        assert "finite" not in steps[name]
        assert blocks[name].duration == 0.0
        ignition = (blocks[name].ignition - message.epoch).total_seconds()
        assert ignition == pytest.approx(steps[name]["elapsed_s"], abs=2e-6)
    assert blocks["lift-2"].duration == pytest.approx(
        steps["lift-2"]["finite"]["thrust_time_s"], abs=1e-6)


def test_a_finite_burn_at_the_epoch_says_it_ignites_before_it(tmp_path, capsys):
    text = J2_FINITE.replace("coast wait for 3 d\nburn lift-1 at apoapsis:",
                             "burn lift-1:").replace("argp 10 deg", "argp 10 deg anomaly 180 deg")
    message, report = message_and_report(tmp_path, capsys, text)
    half = 0.5 * report["steps"][0]["finite"]["thrust_time_s"]
    assert (message.maneuvers[0].ignition - message.epoch).total_seconds() == pytest.approx(
        -half, abs=2e-6)
    assert any(f"burn lift-1 ignites {half:.3f} s before the epoch" in c
               for c in message.comments)


def test_burns_whose_centred_arcs_overlap_are_said(tmp_path, capsys):
    """Two finite burns back to back at one point: each is centred on its impulse, so
    the second ignites before the first cuts off; the message and the command say so."""
    text = J2_FINITE.replace("burn trim at periapsis: apoapsis to 35800 km using rcs\n",
                             "burn trim: along 5 m/s\n")
    path = tmp_path / "plan.aps"
    path.write_text(text)
    assert main(["export", str(path)]) == 0
    captured = capsys.readouterr()
    message = read(captured.out)
    last, trim = message.maneuvers[-2:]
    overlap = (last.ignition + timedelta(seconds=last.duration) - trim.ignition).total_seconds()
    assert overlap > 0
    assert any(f"burn trim ignites {overlap:.3f} s before burn lift-2 cuts off" in c
               for c in message.comments)
    assert "the two overlap" in captured.err and "put a coast between them" in captured.err


def test_the_epochs_of_a_j2_plan_follow_the_drifting_mean_motion():
    """Tessera climbs from 400 to 600 km after 63.96 d: the transfer's second burn is at
    the apoapsis of the transfer orbit, half an anomalistic period after the first, pi /
    n_bar with J2's mean motion (Vallado, 4th ed., Sec. 9.6, written out here; Earth's
    constants IERS 2010), not the two-body half period."""
    program = load_text(sample("tessera-drift"), "plan.aps")
    message = read(write(build(program, run(program))))
    first, second = (m for m in message.maneuvers if m.kind == "burn")
    assert (first.impulse - message.epoch).total_seconds() == pytest.approx(63.96 * 86400,
                                                                            abs=1e-6)
    mu, re, j2 = 398600.4418, 6378.1366, 1.0826359e-3
    r1, r2 = re + 400.0, re + 600.0
    a, e, i = 0.5 * (r1 + r2), (r2 - r1) / (r1 + r2), np.radians(53.0)
    n = np.sqrt(mu / a**3)
    p = a * (1 - e**2)
    n_bar = n * (1 + 0.75 * j2 * (re / p) ** 2 * np.sqrt(1 - e**2) * (3 * np.cos(i)**2 - 1))
    half = (second.impulse - first.impulse).total_seconds()
    assert half == pytest.approx(np.pi / n_bar, abs=1e-4)
    assert abs(half - np.pi / n) > 0.1  # at 53 deg J2 moves it 0.17 s, resolved here


def test_an_epoch_before_the_year_1000_reads_back(tmp_path, capsys):
    """The year is written in four digits (`%Y` gave `999`, which the reader refused)."""
    text = J2_FINITE.replace("epoch 2027-03-01T00:00:00 UTC", "epoch 0999-03-01T00:00:00 TT")
    message, _ = message_and_report(tmp_path, capsys, text)
    assert message.epoch.year == 999 and message.maneuvers[0].ignition.year == 999


def test_a_burn_before_the_year_1_is_refused_at_the_epoch(tmp_path, capsys):
    text = J2_FINITE.replace("epoch 2027-03-01T00:00:00 UTC", "epoch 0001-01-01T00:00:00 TT")
    text = text.replace("coast wait for 3 d\nburn lift-1 at apoapsis:", "burn lift-1:")
    text = text.replace("argp 10 deg", "argp 10 deg anomaly 180 deg")
    path = tmp_path / "plan.aps"
    path.write_text(text)
    assert main(["export", str(path)]) == 2
    err = capsys.readouterr().err
    assert "plan.aps:12:1" in err and "outside the years 1 to 9999" in err
