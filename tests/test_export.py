"""`apsidal export --format opm`: the plan's start state and every burn as a CCSDS Orbit
Parameter Message, read back to the same numbers.

The structure rules checked here are those of CCSDS 502.0-B-3, Orbit Data Messages
(Blue Book, issue 3, April 2023), section 3.2 (the OPM's header, metadata and data:
tables 3-1, 3-2 and 3-3, the mandatory keywords and their order, the units the tables
give; 3.2.4.7: MAN_DELTA_MASS negative; 3.2.4.8: every manoeuvre keyword in each block,
in the table's order; 3.2.4.9: MASS when a manoeuvre is given) and section 7 (KVN: one
`KEYWORD = value [unit]` per line, COMMENT lines, times as YYYY-MM-DDThh:mm:ss[.d]).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.opm import build, plan_lines, read, write

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
EPOCH = "epoch 2027-03-01T00:00:00 UTC"


def with_epoch(text: str, epoch: str = EPOCH) -> str:
    """A plan with an `epoch` line above its start orbit (kept where it has one)."""
    if re.search(r"(?m)^epoch ", text):
        return text
    return re.sub(r"(?m)^start ", epoch + "\nstart ", text, count=1)


def sample(name: str) -> str:
    return with_epoch((SAMPLES / f"{name}.aps").read_text())


def export_text(text: str, **kw) -> str:
    program = load_text(text, "plan.aps")
    return write(build(program, run(program), **kw))


def rel(a, b) -> float:
    a, b = np.asarray(a, float), np.asarray(b, float)
    return float(np.linalg.norm(a - b) / max(np.linalg.norm(b), 1e-300))


def run_json(path: Path, capsys) -> dict:
    assert main(["run", str(path), "--format", "json"]) in (0, 1)
    return json.loads(capsys.readouterr().out)


# --- round trip ------------------------------------------------------------------------

ROUND_TRIP = [("relay-geo", None), ("geo-fifteen-years", None), ("mars-capture", None),
              ("weft-slots", None), ("lunar-polar", "ICRF")]


@pytest.mark.parametrize(("name", "frame"), ROUND_TRIP)
def test_round_trip_start_state_and_every_burn(name, frame, tmp_path, capsys):
    plan = tmp_path / f"{name}.aps"
    plan.write_text(sample(name))
    args = ["export", str(plan), "--format", "opm"] + (["--ref-frame", frame] if frame else [])
    assert main(args) in (0, 1)
    message = read(capsys.readouterr().out)
    program = load_text(plan.read_text(), str(plan))
    # the start state, to 1e-9 relative
    assert rel(message.r, program.start_r) < 1e-9
    assert rel(message.v, program.start_v) < 1e-9
    assert message.epoch.isoformat() == "2027-03-01T00:00:00"
    assert message.metadata["TIME_SYSTEM"] == "UTC"
    report = run_json(plan, capsys)
    burns = [s for s in report["steps"] if s["kind"] == "burn" and s["propellant_kg"] > 0]
    flown = [m for m in message.maneuvers if m.kind == "burn"]
    assert [m.name for m in flown] == [s["name"] for s in burns]
    rows = [r for r in run(program).rows if r.kind == "burn" and r.propellant[0] > 0]
    for m, step, row in zip(flown, burns, rows):
        # delta-v (no margin): the evaluator's to 1e-9 relative, and the JSON's to the
        # digits it prints (six decimals)
        dv = np.linalg.norm(m.dv)
        assert abs(dv - float(row.dv[0])) <= 1e-9 * float(row.dv[0])
        assert dv * 1000.0 == pytest.approx(step["dv_m_s"], rel=1e-9, abs=5e-7)
        rtn = step["vector_rtn_m_s"]
        assert rel(np.array(m.dv) * 1000.0, [rtn["radial"], rtn["transverse"],
                                              rtn["normal"]]) < 1e-6
        # the impulse is the middle of the burn; the mass is the budget's propellant
        impulse = (m.impulse - message.epoch).total_seconds()
        assert impulse == pytest.approx(float(row.after.t[0]), abs=2e-6)  # microseconds
        assert m.duration == pytest.approx(float(row.burn_time[0]), rel=1e-9)
        assert m.duration == pytest.approx(step["burn_time_s"], abs=5e-7)
        assert -m.delta_mass == pytest.approx(step["propellant_kg"], rel=1e-9, abs=5e-7)
    assert message.mass == pytest.approx(report["craft"]["dry_kg"]
                                         + report["craft"]["propellant_kg"], rel=1e-12)


@pytest.mark.parametrize("name", ["relay-geo", "mars-capture", "geo-fifteen-years"])
def test_plan_lines_fly_the_same_burns(name):
    """The message read back as plan lines (start orbit, coasts, rtn burns), with the
    plan's own craft and body, flies the same delta-v to the same final orbit."""
    text = sample(name)
    program = load_text(text, "plan.aps")
    result = run(program)
    message = read(write(build(program, result)))
    head = text[:text.index("\nepoch ")]  # title, body, craft and settings
    replay = load_text(head + "\n" + "\n".join(plan_lines(message)) + "\n", "replay.aps")
    again = run(replay)
    assert again.ok, again.error
    burns = lambda r: [float(row.dv[0]) for row in r.rows if row.kind == "burn"
                       and float(row.dv[0]) > 0]
    assert np.allclose(burns(again), burns(result), rtol=1e-9, atol=0)
    assert rel(again.final.r[0], result.final.r[0]) < 1e-6
    assert rel(again.final.v[0], result.final.v[0]) < 1e-6


def test_hyperbolic_start_keeps_a_negative_semi_major_axis():
    message = read(export_text(sample("mars-capture")))
    assert message.elements["ECCENTRICITY"] > 1
    assert message.elements["SEMI_MAJOR_AXIS"] < 0
    assert message.metadata["CENTER_NAME"] == "MARS"
    assert message.metadata["REF_FRAME"] == "MCI"


def test_equatorial_circular_start_reads_back():
    """On the equator and circular, raan and argp are 0 and the anomaly is the true
    longitude (compiler/state.py); the state still round-trips."""
    text = with_epoch(PLAN.replace("inclination 28.5 deg", "inclination 0 deg"))
    program = load_text(text)
    message = read(export_text(text))
    assert message.elements["INCLINATION"] == 0.0
    assert message.elements["RA_OF_ASC_NODE"] == 0.0
    assert rel(message.r, program.start_r) < 1e-12
    replay = load_text(PLAN.split("start")[0] + "\n".join(plan_lines(message)) + "\n")
    assert rel(replay.start_r, program.start_r) < 1e-9
    assert rel(replay.start_v, program.start_v) < 1e-9


PLAN = """plan "Tug"
around earth
craft tug {
    dry 500 kg
    propellant 400 kg
    engine main isp 310 s thrust 400 N
}
start circular 500 km inclination 28.5 deg
transfer up: circular 1200 km
coast wait for 3 h
drop panel 12 kg
burn trim: along 2 m/s
"""


# --- the structure rules of the standard ------------------------------------------------

HEADER = ["CCSDS_OPM_VERS", "CREATION_DATE", "ORIGINATOR"]
METADATA = ["OBJECT_NAME", "OBJECT_ID", "CENTER_NAME", "REF_FRAME", "TIME_SYSTEM"]
STATE = ["EPOCH", "X", "Y", "Z", "X_DOT", "Y_DOT", "Z_DOT"]
KEPLER = ["SEMI_MAJOR_AXIS", "ECCENTRICITY", "INCLINATION", "RA_OF_ASC_NODE",
          "ARG_OF_PERICENTER", "TRUE_ANOMALY", "GM"]
MANEUVER = ["MAN_EPOCH_IGNITION", "MAN_DURATION", "MAN_DELTA_MASS", "MAN_REF_FRAME",
            "MAN_DV_1", "MAN_DV_2", "MAN_DV_3"]
# Units as tables 3-3 of CCSDS 502.0-B-3 writes them; keywords not here take none.
UNITS = {"X": "km", "Y": "km", "Z": "km", "X_DOT": "km/s", "Y_DOT": "km/s", "Z_DOT": "km/s",
         "SEMI_MAJOR_AXIS": "km", "INCLINATION": "deg", "RA_OF_ASC_NODE": "deg",
         "ARG_OF_PERICENTER": "deg", "TRUE_ANOMALY": "deg", "GM": "km**3/s**2",
         "MASS": "kg", "MAN_DURATION": "s", "MAN_DELTA_MASS": "kg", "MAN_DV_1": "km/s",
         "MAN_DV_2": "km/s", "MAN_DV_3": "km/s"}
TIME = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(\.\d+)?Z?")
KVN = re.compile(r"([A-Z][A-Z0-9_]*) *= *(\S(?:.*\S)?)")


@pytest.mark.parametrize("text", [sample("relay-geo"), sample("geo-fifteen-years"),
                                  sample("mars-capture"), with_epoch(PLAN)])
def test_kvn_structure_follows_the_standard(text):
    lines = [ln for ln in export_text(text).splitlines() if ln.strip()]
    assert KVN.fullmatch(lines[0]) and lines[0].startswith("CCSDS_OPM_VERS")
    assert KVN.fullmatch(lines[0]).group(2) == "3.0"
    keys = []
    for ln in lines:
        if ln.startswith("COMMENT"):
            assert ln == "COMMENT" or ln.startswith("COMMENT ")
            continue
        m = KVN.fullmatch(ln)
        assert m, f"not KEYWORD = value: {ln!r}"
        key, value = m.groups()
        unit = re.fullmatch(r"(.*?) \[(.*)\]", value)
        if key in UNITS:
            assert unit and unit.group(2) == UNITS[key], f"{key} needs [{UNITS[key]}]: {ln}"
            value = unit.group(1)
            assert np.isfinite(float(value)), ln
        else:
            assert unit is None, f"{key} takes no unit: {ln}"
        if key in ("CREATION_DATE", "EPOCH", "MAN_EPOCH_IGNITION"):
            assert TIME.fullmatch(value), ln
        keys.append(key)
    # every mandatory keyword, once, in the order of tables 3-1, 3-2 and 3-3
    body = [k for k in keys if not k.startswith("MAN_")]
    assert body == HEADER + METADATA + STATE + KEPLER + ["MASS"]
    assert keys[:len(body)] == body  # manoeuvres come last
    man = keys[len(body):]
    assert len(man) % len(MANEUVER) == 0 and man == MANEUVER * (len(man) // len(MANEUVER))
    # comments only where the standard allows them: after the version line and at the
    # start of a block (never between two keywords of one block)
    raw = export_text(text).splitlines()
    for i, ln in enumerate(raw):
        if ln.startswith("COMMENT") and i > 0:
            prev = raw[i - 1]
            assert prev == "" or prev.startswith(("COMMENT", "CCSDS_OPM_VERS")), raw[i - 1:i + 1]
    message = read(export_text(text))
    for m in message.maneuvers:
        assert m.delta_mass < 0  # 3.2.4.7
        assert m.duration >= 0
        assert m.frame == "RTN"  # 3.2.4.11


def test_no_epoch_is_refused_with_its_line(tmp_path, capsys):
    plan = tmp_path / "p.aps"
    plan.write_text(PLAN)
    assert main(["export", str(plan)]) == 2
    err = capsys.readouterr().err
    assert f"{plan}:8:1: error: the plan has no `epoch`" in err
    assert "epoch 2027-03-01T00:00:00 UTC" in err
    assert "Traceback" not in err


def test_a_body_without_a_known_frame_needs_one(tmp_path, capsys):
    plan = tmp_path / "moon.aps"
    plan.write_text(sample("lunar-polar"))
    assert main(["export", str(plan)]) == 2
    assert "--ref-frame" in capsys.readouterr().err
    assert main(["export", str(plan), "--ref-frame", "ICRF"]) == 0
    assert "REF_FRAME          = ICRF" in capsys.readouterr().out


def test_output_file_and_a_plan_that_does_not_fit(tmp_path, capsys):
    out = tmp_path / "tug.opm"
    plan = tmp_path / "tug.aps"
    plan.write_text(with_epoch(PLAN.replace("propellant 400 kg", "propellant 20 kg")))
    assert main(["export", str(plan), "-o", str(out)]) == 1  # priced in full, exit 1
    assert "does not fit its load" in capsys.readouterr().err
    message = read(out.read_text())
    assert [m.name for m in message.maneuvers] == ["up/1", "up/2", "panel", "trim"]


def test_a_message_with_other_keywords_of_the_standard_reads():
    """Keywords of the standard apsidal has no use for (drag and radiation parameters, a
    covariance line, user-defined ones) are passed over; an unknown keyword is not."""
    text = export_text(with_epoch(PLAN)).replace(
        "MASS               = 900.0 [kg]",
        "MASS = 900.0 [kg]\nSOLAR_RAD_AREA = 4.0 [m**2]\nSOLAR_RAD_COEFF = 1.3\n"
        "DRAG_AREA = 4.0 [m**2]\nDRAG_COEFF = 2.2\nCOV_REF_FRAME = RTN\nCX_X = 1e-3 [km**2]\n"
        "USER_DEFINED_TANK = A")
    assert "SOLAR_RAD_AREA" in text
    assert read(text).mass == 900.0
    from apsidal.compiler.opm import OpmError

    with pytest.raises(OpmError, match="MASS_RATIO"):
        read(text.replace("DRAG_COEFF", "MASS_RATIO"))


def test_impulsive_burns_have_no_duration_and_ignite_at_the_impulse(tmp_path, capsys):
    plan = tmp_path / "relay.aps"
    plan.write_text(sample("relay-geo"))
    assert main(["export", str(plan), "--impulsive"]) == 0
    text = capsys.readouterr().out
    message = read(text)
    program = load_text(plan.read_text())
    rows = [r for r in run(program).rows if r.kind == "burn"]
    burns = [m for m in message.maneuvers if m.kind == "burn"]
    assert [m.duration for m in burns] == [0.0] * len(rows)
    for m, row in zip(burns, rows):
        assert (m.ignition - message.epoch).total_seconds() == pytest.approx(
            float(row.after.t[0]), abs=1e-6)
    assert "ignites" not in text and "Burns are impulsive" in text


def test_a_burn_before_the_epoch_is_said(tmp_path):
    text = export_text(sample("relay-geo"))
    assert "COMMENT burn raise ignites" in text  # the first burn fires at the epoch


def test_bad_epochs_are_located():
    from apsidal.lang.errors import PlanError

    for epoch, expected in [("epoch 2027-02-30T00:00:00 UTC", "not a date and time"),
                            ("epoch 2027-02-03T00:00:00", "needs its time scale"),
                            ("epoch 2027-02-03T00:00:00 UTX", "did you mean `UTC`")]:
        with pytest.raises(PlanError) as err:
            load_text(with_epoch(PLAN, epoch))
        assert expected in err.value.render()
        assert err.value.span is not None


def test_read_back_on_the_command_line(tmp_path, capsys):
    plan = tmp_path / "tug.aps"
    plan.write_text(with_epoch(PLAN))
    message = tmp_path / "tug.opm"
    assert main(["export", str(plan), "-o", str(message)]) == 0
    assert main(["export", "--read", str(message)]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[1] == "epoch 2027-03-01T00:00:00.000000 UTC"
    assert out[2].startswith("start orbit sma ")
    assert [ln.split()[1].rstrip(":") for ln in out[3:] if ln.startswith(("burn", "drop"))] == \
        ["up-1", "up-2", "panel", "trim"]
    broken = tmp_path / "broken.opm"
    broken.write_text(message.read_text().replace("X_DOT", "X_SPEED"))
    assert main(["export", "--read", str(broken)]) == 2
    err = capsys.readouterr().err
    assert "X_SPEED" in err and "line" in err


def test_a_plan_with_a_leg_is_refused_at_the_leg(tmp_path, capsys):
    """An OPM has one centre; a plan that changes body is refused, located at its leg."""
    text = (SAMPLES / "venus-courier.aps").read_text()
    plan = tmp_path / "venus.aps"
    plan.write_text(re.sub(r"(?m)^start ", EPOCH + "\nstart ", text, count=1))
    assert main(["run", str(plan)]) == 0
    capsys.readouterr()
    assert main(["export", str(plan)]) == 2
    err = capsys.readouterr().err
    line = next(k for k, ln in enumerate(plan.read_text().splitlines(), 1)
                if ln.startswith("leg "))
    assert f"{plan}:{line}:1: error: an OPM has one central body" in err
