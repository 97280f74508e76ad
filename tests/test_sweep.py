"""Trade studies (`apsidal sweep`): every variant is the plan text with its values written
in, priced as `run` prices it; the best value agrees with scipy's optimiser on the closed
form; the dispersion percentiles of a linear case are the normal quantiles.

The closed forms below are the two-body relations every astrodynamics text derives
(vis-viva; the cosine rule for a burn that turns the velocity by an angle and changes its
size, e.g. Curtis, Orbital Mechanics for Engineering Students, 3rd ed., section 6.11,
from memory); they are written out here, not taken from the compiler.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import numpy as np
import pytest
from apsidal.compiler import sweep
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from jsonschema import Draft202012Validator
from strictjson import strict_json

ROOT = Path(__file__).resolve().parent.parent
MU = 398600.4418  # km3/s2, the catalogue's Earth (IERS 2010 conventions)
RE = 6378.1366  # km, the catalogue's Earth equatorial radius (IERS 2010 conventions)

# A scenario of our own with every kind of step a trade can move.
PLAN = """\
plan "Sweep test craft"
around earth
craft kite {
    dry 500 kg
    propellant 2600 kg
    engine main isp 320 s thrust 400 N
    engine trim isp 220 s thrust 20 N
}
margin 3 %
reserve 20 m/s
start orbit periapsis 350 km apoapsis 420 km inclination 28.5 deg raan 40 deg argp 30 deg anomaly 10 deg
transfer geo at node: circular 35786 km, inclination to 5 deg
coast wait for 2 h
burn kick at apoapsis: apoapsis to 40000 km using trim margin 10 %
burn circ at apoapsis: circular 40000 km
drop stage 20 kg
transfer turn: inclination to 12 deg via apoapsis 60000 km
transfer far: circular 42000 km via apoapsis 90000 km
allow trims 40 m/s
"""

# (target, unit, low, high): ranges that lower at both ends; some variants cannot be
# flown (`circ` asks for 40000 km where `kick` may have put the apoapsis elsewhere)
KNOBS = [
    ("geo.circular", "km", 20000.0, 40000.0),
    ("geo.inclination", "deg", 0.0, 20.0),
    ("main.isp", "s", 280.0, 340.0),
    ("trim.thrust", "N", 5.0, 50.0),
    ("craft.dry", "kg", 300.0, 900.0),
    ("craft.propellant", "kg", 1000.0, 4000.0),
    ("start.periapsis", "km", 250.0, 400.0),
    ("start.apoapsis", "km", 420.0, 2000.0),
    ("start.inclination", "deg", 0.0, 60.0),
    ("start.anomaly", "deg", -180.0, 180.0),
    ("plan.margin", "%", 0.0, 10.0),
    ("plan.reserve", "m/s", 0.0, 500.0),
    ("kick.apoapsis", "km", 39000.0, 41000.0),
    ("kick.margin", "%", 0.0, 20.0),
    ("wait.for", "min", 1.0, 600.0),
    ("stage.mass", "kg", 1.0, 100.0),
    ("turn.via", "km", 45000.0, 80000.0),
    ("turn.inclination", "deg", 0.0, 40.0),
    ("far.via", "km", 50000.0, 120000.0),
    ("trims.dv", "m/s", 0.0, 100.0),
]


# Goals of other kinds: an eccentricity, explicit components, a phasing transfer, an
# energy goal written as C3 (energy = C3 / 2: affine in the value).
PLAN_B = """\
plan "Sweep test craft, other goals"
around earth
craft kite {
    dry 500 kg
    propellant 2600 kg
    engine main isp 320 s thrust 400 N
}
start orbit periapsis 350 km apoapsis 420 km inclination 28.5 deg
burn shape at periapsis: ecc to 0.1
burn nudge: along 5 m/s, cross -2 m/s, radial 1 m/s
transfer hop at periapsis: phase 30 deg in 2 rev
burn energy: c3 to -20 km2/s2
coast spin 1.5 rev
"""
KNOBS_B = [
    ("shape.ecc", "", 0.01, 0.3),
    ("nudge.along", "m/s", -10.0, 10.0),
    ("nudge.cross", "m/s", -10.0, 10.0),
    ("nudge.radial", "m/s", -5.0, 5.0),
    ("hop.phase", "deg", -60.0, 60.0),
    ("energy.c3", "km2/s2", -25.0, -15.0),
    ("start.inclination", "deg", 0.0, 90.0),
]
# A craft that loads fuel and oxidiser apart, a fuel-only thruster beside the main engine
# (a dual-mode craft): the stores are followed per variant, and some variants run one dry.
PLAN_C = """\
plan "Sweep test craft, two stores"
around earth
craft duo {
    dry 900 kg
    fuel 700 kg
    oxidiser 1100 kg
    residual 2 %
    engine main isp 318 s thrust 450 N mixture 1.65
    engine rcs isp 225 s thrust 22 N
}
reserve 20 m/s
start orbit periapsis 250 km apoapsis 35786 km inclination 12 deg
burn lift at apoapsis: periapsis to 20000 km, inclination to 4 deg
burn circ at apoapsis: circular, inclination to 0 deg
burn trim: along 30 m/s using rcs
allow keeping 60 m/s using rcs
"""
KNOBS_C = [
    ("craft.fuel", "kg", 500.0, 900.0),
    ("craft.oxidiser", "kg", 800.0, 1400.0),
    ("main.mixture", "", 1.2, 2.0),
    ("trim.along", "m/s", 0.0, 200.0),
    ("keeping.dv", "m/s", 0.0, 300.0),
    ("lift.periapsis", "km", 10000.0, 30000.0),
]
CASES = [(PLAN, KNOBS), (PLAN_B, KNOBS_B), (PLAN_C, KNOBS_C)]


def separate_run(text: str) -> dict | None:
    """What a separate `run` of the plan text gives: None when it cannot be flown."""
    result = run(load_text(text))
    if not result.ok:
        return None
    f, p = result.final, result.program
    report = budget(result)
    return {"dv_m_s": f.dv[0] * 1000.0, "dv_with_margin_m_s": f.dv_margin[0] * 1000.0,
            "propellant_kg": p.craft.usable - f.propellant[0], "final_mass_kg": f.mass[0],
            "elapsed_s": f.t[0], "feasible": report["feasible"],
            "propellant_left_kg": report["totals"]["propellant_left_kg"],
            "dv_capacity_left_m_s": report["totals"]["dv_capacity_left_m_s"],
            "message": result.error.message if result.error else None}


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(CASES), st.lists(st.floats(0.0, 1.0), min_size=3, max_size=6),
       st.data())
def test_every_variant_is_a_separate_run(case, fractions, data):
    """Random variants of random quantities (one or two at once), in chunks of several
    sizes: each equals a separate run of the plan text with its values written in."""
    text, table = case
    picks = data.draw(st.lists(st.sampled_from(range(len(table))), min_size=1, max_size=2,
                               unique=True))
    program = load_text(text)
    chosen = [table[k] for k in picks]
    knobs = [sweep.locate(program.plan, program, t) for t, *_ in chosen]
    model = sweep.Model(text, "<plan>", knobs, [u for _, u, _, _ in chosen],
                        [(lo, hi) for _, _, lo, hi in chosen])
    cols = [[lo + f * (hi - lo) for f in fractions] for _, _, lo, hi in chosen]
    if len(cols) == 2:  # a second column in another order
        cols[1] = data.draw(st.permutations(cols[1]))
    X = np.array(cols).T
    priced = sweep.price(model, X, chunk=data.draw(st.sampled_from([2, 3, 64])))
    for i in range(X.shape[0]):
        want = separate_run(model.text_with(list(X[i])))
        if want is None:
            assert not priced.flown[i]
            assert priced.reason(i)  # the reason is kept, the variant is not dropped
            continue
        assert priced.flown[i], priced.reason(i)
        for key in ("dv_m_s", "dv_with_margin_m_s", "propellant_kg", "final_mass_kg",
                    "elapsed_s"):
            assert priced.totals[key][i] == pytest.approx(want[key], rel=1e-9, abs=1e-9), key
        for key in ("propellant_left_kg", "dv_capacity_left_m_s"):  # printed to 1e-6
            assert priced.totals[key][i] == pytest.approx(want[key], rel=1e-9, abs=2e-6), key
        assert bool(priced.feasible[i]) == want["feasible"]


def test_values_past_a_bound_of_the_plan_are_rows_not_flown(plan_file, capsys):
    """A range reaching under the surface: those values are no plan (lowering refuses
    them), so their rows say so; the rest are priced."""
    assert main(["sweep", str(plan_file), "--vary", "geo.circular=-7000..30000 km",
                 "--points", "5", "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    under = [v for v in doc["variants"] if v["values"]["geo.circular"] <= 0]
    assert under and all(not v["flown"] and "under the surface" in v["reason"] for v in under)
    above = [v for v in doc["variants"] if v["values"]["geo.circular"] > 2000]
    assert above and all(v["flown"] for v in above)
    want = separate_run(PLAN.replace("circular 35786 km, inclination to 5 deg",
                                     "circular 30000.0 km, inclination to 5 deg"))
    assert above[-1]["totals"]["dv_m_s"] == pytest.approx(want["dv_m_s"], rel=1e-9)


def test_a_variant_that_cannot_be_flown_keeps_its_place_and_reason():
    program = load_text(PLAN)
    knob = sweep.locate(program.plan, program, "kick.apoapsis")
    model = sweep.Model(PLAN, "<plan>", [knob], ["km"], [(39000.0, 41000.0)])
    X = np.array([[39000.0], [40000.0], [41000.0]])
    priced = sweep.price(model, X)
    assert list(priced.flown) == [False, True, False]
    want = run(load_text(model.text_with([39000.0]))).error.message
    assert priced.reason(0).endswith(want.split(": ", 1)[1])
    assert "circ" in priced.reason(0)
    assert math.isnan(priced.totals["dv_m_s"][0])  # no number for it, and none in reports


# --- the best value against scipy on the closed form -----------------------------------


def hohmann_split_cost(i1_deg: float, r0: float, r1: float, i0_deg: float) -> float:
    """Two burns at the nodes: leave r0 turning to inclination i1, arrive at r1 turning
    the rest; the cosine rule on each (km/s)."""
    v0 = math.sqrt(MU / r0)
    vp = math.sqrt(2 * MU * r1 / (r0 * (r0 + r1)))  # vis-viva
    va, vc = vp * r0 / r1, math.sqrt(MU / r1)
    d1, d2 = math.radians(i0_deg - i1_deg), math.radians(i1_deg)
    return (math.sqrt(v0**2 + vp**2 - 2 * v0 * vp * math.cos(d1))
            + math.sqrt(va**2 + vc**2 - 2 * va * vc * math.cos(d2)))


def test_best_plane_change_split_of_a_hohmann_transfer_agrees_with_scipy():
    from scipy.optimize import minimize_scalar

    text = """\
plan "split"
around earth
craft kite {
    dry 500 kg
    propellant 9000 kg
    engine main isp 320 s thrust 400 N
}
start circular 400 km inclination 28.5 deg
burn leave: periapsis to 400 km, apoapsis to 35786 km, inclination to 20 deg
burn arrive at apoapsis: circular, inclination to 0 deg
"""
    program = load_text(text)
    knob = sweep.locate(program.plan, program, "leave.inclination")
    model = sweep.Model(text, "<plan>", [knob], ["deg"], [(0.0, 28.5)])
    _, best = sweep.minimise(model, sweep.grid([(0.0, 28.5, 15)]), "dv", 1e-7)
    r0, r1 = RE + 400.0, RE + 35786.0
    ref = minimize_scalar(hohmann_split_cost, bounds=(0.0, 28.5), args=(r0, r1, 28.5),
                          method="bounded", options={"xatol": 1e-9})
    assert best.value == pytest.approx(ref.x, abs=2e-5)  # degrees; a flat minimum
    assert best.objective == pytest.approx(ref.fun * 1000.0, rel=1e-9)
    assert not best.at_end
    # an interior optimum: a couple of degrees at the fast end, the rest where the craft
    # is slow (about 2.2 deg first for this transfer, from memory)
    assert 1.0 < 28.5 - ref.x < 4.0


def bielliptic_cost(rb: float, r0: float, r2: float, di_deg: float) -> float:
    """Bi-elliptic transfer r0 -> rb -> r2 with the whole plane change at rb (km/s)."""
    v0, vc2 = math.sqrt(MU / r0), math.sqrt(MU / r2)
    vp1 = math.sqrt(2 * MU * rb / (r0 * (r0 + rb)))
    va1 = math.sqrt(2 * MU * r0 / (rb * (r0 + rb)))
    va2 = math.sqrt(2 * MU * r2 / (rb * (rb + r2)))
    vp2 = math.sqrt(2 * MU * rb / (r2 * (rb + r2)))
    turn = math.sqrt(va1**2 + va2**2 - 2 * va1 * va2 * math.cos(math.radians(di_deg)))
    return (vp1 - v0) + turn + (vp2 - vc2)


def test_best_intermediate_apoapsis_of_a_bielliptic_transfer_agrees_with_scipy():
    """With a plane change at the far apoapsis the cost has an interior minimum: a higher
    apoapsis makes the turn cheaper and the raise and the lowering dearer (without a
    plane change the coplanar cost only falls toward the parabolic limit past the
    break-even ratio, so the best is at the end of any range)."""
    from scipy.optimize import minimize_scalar

    text = """\
plan "bi-elliptic"
around earth
craft kite {
    dry 500 kg
    propellant 9000 kg
    engine main isp 320 s thrust 400 N
}
start circular 400 km inclination 50 deg
transfer go: circular 3000 km, inclination to 0 deg via apoapsis 30000 km
"""
    program = load_text(text)
    knob = sweep.locate(program.plan, program, "go.via")
    lo, hi = 5000.0, 200000.0
    model = sweep.Model(text, "<plan>", [knob], ["km"], [(lo, hi)])
    _, best = sweep.minimise(model, sweep.grid([(lo, hi, 25)]), "dv", 1e-3)
    r0, r2 = RE + 400.0, RE + 3000.0
    ref = minimize_scalar(lambda a: bielliptic_cost(RE + a, r0, r2, 50.0), bounds=(lo, hi),
                          method="bounded", options={"xatol": 1e-6})
    assert lo + 1000 < ref.x < hi - 1000  # interior
    assert best.value == pytest.approx(ref.x, rel=1e-4)
    assert best.objective == pytest.approx(ref.fun * 1000.0, rel=1e-9)


# --- dispersions -----------------------------------------------------------------------


def test_dispersion_percentiles_of_a_linear_case_are_the_normal_quantiles():
    """An allowance's delta-v adds to the total one for one: the total is normal with the
    allowance's sigma, so its percentiles are the normal quantiles (scipy.stats.norm)."""
    from scipy.stats import norm

    program = load_text(PLAN)
    knob = sweep.locate(program.plan, program, "trims.dv")
    n, sigma = 40000, 4.0
    X = sweep.samples([40.0], [sigma], n, seed=7)
    model = sweep.Model(PLAN, "<plan>", [knob], ["m/s"], [(X.min(), X.max())])
    priced = sweep.price(model, X)
    base = separate_run(PLAN)["dv_m_s"] - 40.0
    total = sweep.statistics(priced.totals["dv_m_s"][priced.flown])
    assert total["mean"] == pytest.approx(base + 40.0, abs=5 * sigma / math.sqrt(n))
    assert total["std"] == pytest.approx(sigma, rel=5 * math.sqrt(2.0 / n))
    for p in sweep.PERCENTILES:
        q = p / 100
        z = norm.ppf(q)
        # standard error of a sample quantile: sqrt(q (1 - q) / n) / pdf(z), times sigma
        se = sigma * math.sqrt(q * (1 - q) / n) / norm.pdf(z)
        got = total[sweep._pct_key(p)]
        assert got == pytest.approx(base + 40.0 + sigma * z, abs=5 * se), p


# --- the command line ------------------------------------------------------------------


@pytest.fixture
def plan_file(tmp_path):
    path = tmp_path / "kite.aps"
    path.write_text(PLAN)
    return path


def test_json_carries_every_variant_and_meets_its_schema(plan_file, capsys):
    code = main(["sweep", str(plan_file), "--vary", "kick.apoapsis=39000..41000 km",
                 "--points", "5", "--format", "json"])
    assert code == 0
    doc = strict_json(capsys.readouterr().out)
    schema = json.loads((ROOT / "docs" / "schema" / "sweep.schema.json").read_text())
    Draft202012Validator.check_schema(schema)
    Draft202012Validator(schema).validate(doc)
    assert [v["values"]["kick.apoapsis"] for v in doc["variants"]] == [
        39000.0, 39500.0, 40000.0, 40500.0, 41000.0]
    flown = [v for v in doc["variants"] if v["flown"]]
    assert len(flown) == 1 and flown[0]["values"]["kick.apoapsis"] == 40000.0
    assert all(v["reason"] and v["totals"] is None for v in doc["variants"] if not v["flown"])


def test_minimise_reports_the_value_and_the_plan_text_with_it(plan_file, capsys):
    code = main(["sweep", str(plan_file), "--vary", "geo.inclination=0..28.5 deg",
                 "--minimise", "propellant", "--points", "7", "--format", "json"])
    doc = strict_json(capsys.readouterr().out)
    schema = json.loads((ROOT / "docs" / "schema" / "sweep.schema.json").read_text())
    Draft202012Validator(schema).validate(doc)
    best = doc["best"]
    assert best["objective"] == "propellant"
    again = separate_run(best["plan_text"])
    assert again["propellant_kg"] == pytest.approx(best["propellant_kg"], rel=1e-12)
    assert f"inclination to {best['value']!r} deg" in best["plan_text"]
    # the plan with the best value fits its load or not as its run says, and the exit
    # code follows (this craft's tank is too small for the whole plan)
    assert best["feasible"] == again["feasible"]
    assert code == (0 if best["feasible"] and best["expectations_met"] else 1)


MISSES = """\
plan "minimise against an expectation"
around earth
craft c { dry 500 kg propellant 3000 kg engine main isp 320 s thrust 40 kN }
start circular 400 km inclination 30 deg
transfer t: circular 2000 km via apoapsis 5000 km
expect high apoapsis 2000 km within 1 km
"""


def test_a_best_value_that_misses_the_plans_expectations_says_so_and_exits_1(tmp_path,
                                                                             capsys):
    """The least propellant lies at the top of the range, where the plan's own `expect`
    fails: the optimum is offered as a plan, so it is held to `run`'s rules."""
    path = tmp_path / "misses.aps"
    path.write_text(MISSES)
    code = main(["sweep", str(path), "--vary", "t.circular=1500..2500 km", "--minimise",
                 "propellant", "--format", "json"])
    best = strict_json(capsys.readouterr().out)["best"]
    assert code == 1 and best["feasible"] and not best["expectations_met"]
    assert main(["run", str(tmp_path / "misses.aps")]) == 0  # the plan as written is fine
    capsys.readouterr()
    assert main(["sweep", str(path), "--vary", "t.circular=1500..2500 km", "--minimise",
                 "propellant"]) == 1
    assert "does NOT meet its own expectations" in capsys.readouterr().out
    # where the best value meets them, exit 0
    assert main(["sweep", str(path), "--vary", "t.via=3000..40000 km", "--minimise",
                 "propellant", "--format", "json"]) == 0
    assert strict_json(capsys.readouterr().out)["best"]["expectations_met"]


def test_csv_is_strict_with_one_row_per_variant(plan_file, capsys):
    main(["sweep", str(plan_file), "--vary", "main.isp=300..330", "s",
          "--vary", "craft.dry=400..600 kg", "--points", "3", "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    assert [r["record"] for r in rows] == ["variant"] * 9 + ["caution"]
    rows = rows[:-1]
    assert {r["main.isp_s"] for r in rows} == {"300.0", "315.0", "330.0"}
    assert all(float(r["dv_m_s"]) > 0 and r["flown"] == "true" for r in rows)


def test_the_statistical_line_of_a_linear_case_is_three_sigma(plan_file, capsys):
    """An allowance dispersed by 4 m/s (1-sigma) adds one for one to the total: the line
    that covers it beside the plan as written is 3 sigma, 12 m/s, to sampling error."""
    assert main(["sweep", str(plan_file), "--disperse", "trims.dv=±4 m/s", "--samples",
                 "40000", "--seed", "5", "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    schema = json.loads((ROOT / "docs" / "schema" / "sweep.schema.json").read_text())
    Draft202012Validator(schema).validate(doc)
    n = 40000
    # mean within 5 standard errors, std within 5 of its standard errors (normal theory)
    assert doc["statistical_line_m_s"] == pytest.approx(
        12.0, abs=5 * 4 / math.sqrt(n) + 15 * 4 / math.sqrt(2 * n))
    assert doc["nominal"]["dv_m_s"] == pytest.approx(separate_run(PLAN)["dv_m_s"], rel=1e-12)


def test_minimise_and_dispersion_csv_are_strict(plan_file, capsys):
    main(["sweep", str(plan_file), "--vary", "geo.inclination=0..28.5 deg", "--minimise",
          "dv", "--points", "5", "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    assert [r["record"] for r in rows] == ["variant"] * 5 + ["best", "caution"]
    best = rows[5]
    assert float(best["dv_m_s"]) <= min(float(r["dv_m_s"]) for r in rows[:5] if r["dv_m_s"])
    main(["sweep", str(plan_file), "--disperse", "main.isp=±2 s", "--samples", "50",
          "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    assert {r["record"] for r in rows} == {"step", "total", "share", "caution"}
    assert all(float(r["p99_7"]) >= float(r["p50"]) for r in rows
               if r["record"] in ("step", "total"))


def test_dispersion_table_fits_and_names_the_statistical_line(plan_file, capsys):
    code = main(["sweep", str(plan_file), "--disperse", "start.periapsis=±5 km",
                 "--samples", "500", "--seed", "3"])
    assert code == 0
    out = capsys.readouterr().out
    assert "p99.7" in out and "statistical" in out and "total" in out
    assert max(len(line) for line in out.splitlines()) <= 100


def test_table_fits_80_columns(plan_file, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "80")
    main(["sweep", str(plan_file), "--vary", "geo.circular=20000..40000 km", "--points", "4"])
    out = capsys.readouterr().out
    assert max(len(line) for line in out.splitlines()) <= 80
    assert "geo.circular km" in out


@pytest.mark.parametrize("argv, words", [
    (["--vary", "nosuch.circular=1..2 km"], ["no step, engine or setting named `nosuch`"]),
    (["--vary", "geo.circulr=1..2 km"], ["has no quantity `circulr`", "did you mean `circular`"]),
    (["--vary", "geo.circular=20000..30000 s"], ["is a length", "give the values in `km`"]),
    (["--vary", "geo.circular=30000..20000 km"], ["range of `geo.circular` is empty"]),
    (["--vary", "geo.circular 1-2 km"], ["is not NAME.FIELD=LOW..HIGH UNIT"]),
    (["--vary", "geo.circular=20000..30000 km", "--disperse", "main.isp=±3 s"],
     ["not both"]),
    (["--disperse", "main.isp=±0 s"], ["must be positive"]),
    (["--vary", "geo.circular=2e4..3e4 km", "--vary", "main.isp=300..320 s",
      "--minimise", "dv"], ["searches one quantity"]),
    ([], ["nothing to sweep"]),
    # (a grid corner past a bound two quantities share gives rows not flown:
    # tests/test_sweep_bounds.py)
])
def test_bad_input_exits_2_with_a_clear_message(plan_file, capsys, argv, words):
    code = main(["sweep", str(plan_file), *argv])
    err = capsys.readouterr().err
    assert code == 2
    assert err.startswith("apsidal: error:") and "Traceback" not in err
    for w in words:
        assert w in err


def test_a_craft_with_fuel_and_oxidiser_apart_sweeps_as_run_prices_it(capsys):
    """The two stores are followed in every variant: each row's totals are `run`'s."""
    sample = ROOT / "samples" / "geo-fifteen-years.aps"
    code = main(["sweep", str(sample), "--vary", "craft.dry=1800..2000 kg", "--points", "3",
                 "--format", "json"])
    assert code == 0
    doc = strict_json(capsys.readouterr().out)
    text = sample.read_text(encoding="utf-8")
    for v in doc["variants"]:
        dry = v["values"]["craft.dry"]
        want = budget(run(load_text(text.replace("dry 1850 kg", f"dry {dry!r} kg"))))
        for key in ("dv_m_s", "propellant_kg", "propellant_left_kg", "dv_capacity_left_m_s"):
            assert v["totals"][key] == pytest.approx(want["totals"][key], rel=1e-9, abs=2e-6)
        assert v["feasible"] == want["feasible"]


def test_a_non_linear_quantity_is_refused_by_name(tmp_path, capsys):
    path = tmp_path / "p.aps"
    path.write_text(PLAN.replace("burn kick at apoapsis: apoapsis to 40000 km",
                                 "burn kick at apoapsis: sma to 30000 km"))
    code = main(["sweep", str(path), "--vary", "kick.sma=25000..35000 km"])
    assert code == 2
    assert "non-linearly" in capsys.readouterr().err


# --- the trade statement ----------------------------------------------------------------

TRADES = """\
trade size: vary geo.circular 20000..40000 km points 3
trade split: vary geo.inclination 0..28.5 deg, minimise propellant, points 7
trade launch: disperse start.periapsis 5 km, disperse main.isp 1 s, samples 400, seed 9
"""


def test_a_trade_in_the_plan_is_read_by_sweep_and_ignored_by_run(tmp_path, capsys):
    plain, traded = tmp_path / "a.aps", tmp_path / "b.aps"
    plain.write_text(PLAN)
    traded.write_text(PLAN + TRADES)
    main(["run", str(plain), "--format", "json"])
    one = strict_json(capsys.readouterr().out)
    main(["run", str(traded), "--format", "json"])
    two = strict_json(capsys.readouterr().out)
    assert one["totals"] == two["totals"] and one["steps"] == two["steps"]
    assert main(["sweep", str(traded), "--format", "json"]) == 0  # the first trade
    doc = strict_json(capsys.readouterr().out)
    assert [v["values"]["geo.circular"] for v in doc["variants"]] == [20000.0, 30000.0, 40000.0]
    assert main(["sweep", str(traded), "--trade", "launch", "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    assert doc["samples"] == 400 and doc["seed"] == 9
    assert [d["name"] for d in doc["dispersions"]] == ["start.periapsis", "main.isp"]
    code = main(["sweep", str(traded), "--trade", "split", "--format", "json"])
    best = strict_json(capsys.readouterr().out)["best"]
    assert best["objective"] == "propellant"
    assert code == (0 if best["feasible"] and best["expectations_met"] else 1)


# (every mistake a trade statement can hold, located: tests/test_trade_statement_errors.py)


def test_fmt_keeps_a_trade_and_diff_shows_it_changed(tmp_path, capsys):
    from apsidal.lang.format import format_text

    messy = PLAN + "trade   size :vary geo.circular   20000..40000 km points 3,minimise  dv\n"
    text = format_text(messy)
    assert "trade size: vary geo.circular 20000..40000 km points 3, minimise dv\n" in text
    assert format_text(text) == text
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(text)
    new.write_text(text.replace("points 3", "points 5"))
    main(["diff", str(old), str(new), "--format", "json"])
    doc = strict_json(capsys.readouterr().out)
    assert doc["trades"] == [{"name": "size", "status": "changed",
                              "old": "trade size: vary geo.circular 20000..40000 km points 3, "
                                     "minimise dv",
                              "new": "trade size: vary geo.circular 20000..40000 km points 5, "
                                     "minimise dv"}]
    assert all(s["status"] == "same" for s in doc["steps"])  # a trade is no priced step
    main(["diff", str(old), str(new)])
    assert "trade size changed" in capsys.readouterr().out


# --- generated plans ---------------------------------------------------------------------


def _knobs_of(plan, program) -> list[tuple[str, object]]:
    """Every NAME.FIELD of a plan a trade can try, with its quantity."""
    out = []
    owners = [("plan", s) for s in plan.statements if isinstance(s, sweep.ast.Setting)
              and s.key in ("margin", "reserve")]
    for s in plan.statements:
        if isinstance(s, sweep.ast.Start):
            owners.append(("start", s))
        elif isinstance(s, sweep.ast.CraftDef):
            owners.append(("craft", s))
            owners += [(e.name.text, e) for e in s.engines]
    owners += [(step.name, node) for node, step in zip(plan.steps(), program.steps)]
    for name, node in owners:
        for key, value in sweep._fields_of(node).items():
            q = value.quantity if isinstance(value, sweep.ast.Distance) else value
            out.append((f"{name}.{key}", q))
    return out


@settings(max_examples=30, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(st.data())
def test_variants_of_generated_plans_are_separate_runs(data):
    """Any quantity of a generated plan (tests/plangen.py), moved a little either way:
    each variant equals a separate run of its text, or is refused as that run is."""
    from plangen import plan_texts

    text = data.draw(plan_texts(tidy=True))
    assert_nearby_variants_are_runs(data, text, load_text(text), max_size=4)


def assert_nearby_variants_are_runs(data, text: str, program, max_size: int) -> None:
    """Draw a quantity of ``program`` and values a little either side of it: each variant
    equals a separate run of its text, or is refused as that run is."""
    from hypothesis import assume

    knobs = _knobs_of(program.plan, program)
    target, q = data.draw(st.sampled_from(knobs))
    base = q.value
    step = abs(base) * 0.02 if base else 0.5
    values = sorted(data.draw(st.lists(st.floats(base - step, base + step), min_size=2,
                                       max_size=max_size)))
    try:
        knob = sweep.locate(program.plan, program, target)  # a statistical line is refused
        model = sweep.Model(text, "<plan>", [knob], [q.unit], [(values[0], values[-1])])
    except (sweep.UsageError, sweep.PlanError):
        assume(False)  # the range reaches past what lowering accepts, or is not affine
    priced = sweep.price(model, np.array(values)[:, None])
    for i, x in enumerate(values):
        result = run(load_text(model.text_with([x])))
        if not result.ok:
            assert not priced.flown[i]
            continue
        assert priced.flown[i], (target, x, priced.reason(i))
        f = result.final
        assert priced.totals["dv_m_s"][i] == pytest.approx(f.dv[0] * 1000, rel=1e-9, abs=1e-9)
        assert priced.totals["elapsed_s"][i] == pytest.approx(f.t[0], rel=1e-9, abs=1e-6)
        assert priced.totals["final_mass_kg"][i] == pytest.approx(f.mass[0], rel=1e-9)


def test_csv_written_in_blocks_is_the_same_text():
    from apsidal.compiler.sweep_cli import sweep_csv_of

    program = load_text(PLAN)
    knob = sweep.locate(program.plan, program, "kick.apoapsis")
    model = sweep.Model(PLAN, "<plan>", [knob], ["km"], [(39000.0, 41000.0)])
    X = sweep.grid([(39000.0, 41000.0, 9)])
    priced = sweep.price(model, X, chunk=4)
    whole = sweep_csv_of(model, X, priced)
    assert sweep_csv_of(model, X, priced, block=2) == whole
    rows = list(csv.DictReader(io.StringIO(whole), strict=True))
    assert [r["reason"] != "" for r in rows[:-1]] == [not f for f in priced.feasible]


def test_progress_goes_to_a_terminal_only(plan_file, capsys, monkeypatch):
    import sys

    class Tty(io.StringIO):
        def isatty(self):
            return True

    err = Tty()
    monkeypatch.setattr(sys, "stderr", err)
    assert main(["sweep", str(plan_file), "--vary", "main.isp=300..330 s", "--points", "5",
                 "--chunk", "2", "--format", "csv"]) == 0
    text = err.getvalue()
    assert "pricing 2/5 variants" in text and "pricing 5/5 variants" in text
    assert text.endswith("\r\033[K")  # the bar is cleared, nothing left on the screen
    monkeypatch.undo()
    main(["sweep", str(plan_file), "--vary", "main.isp=300..330 s", "--points", "5"])
    assert "pricing" not in capsys.readouterr().err  # not a terminal: no bar


def test_samples_the_plan_refuses_are_counted_not_flown(tmp_path, capsys):
    """An equatorial start dispersed in inclination: the samples below 0 deg are no plan
    (the inclination runs from 0 to 180 deg); they are kept as not flown, with the
    lowering's reason, and their share is the normal probability below 0 (scipy)."""
    from scipy.stats import norm

    path = tmp_path / "eq.aps"
    path.write_text(PLAN.replace("inclination 28.5 deg raan 40 deg", "inclination 0.02 deg "
                                 "raan 40 deg").replace("transfer geo at node:",
                                                        "transfer geo:"))
    n = 4000
    assert main(["sweep", str(path), "--disperse", "start.inclination=±0.05 deg",
                 "--samples", str(n), "--seed", "11", "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    p = norm.cdf(-0.02 / 0.05)
    assert doc["not_flown_share"] == pytest.approx(p, abs=5 * math.sqrt(p * (1 - p) / n))
    assert "is outside 0 to 180 deg" in doc["first_not_flown_reason"]
    assert doc["total"]["dv_m_s"]["mean"] is not None
