"""The budget of record: plans priced whatever the load, sizing, allowances, residuals.

Sources beside each check:
* the rocket equation m_prop = m0 (1 - exp(-dv / (Isp g0))) with standard gravity
  g0 = 9.80665 m/s^2 (CGPM 1901, exact; Tsiolkovsky's equation as in any propulsion text,
  e.g. Sutton & Biblarz, Rocket Propulsion Elements, ch. 4);
* the Julian year of 365.25 d (IAU);
* root-sum-square of independent 3-sigma lines, deterministic lines added (common
  practice in delta-v budgets);
* GEO north-south station-keeping of about 50 m/s per year (common practice; the
  luni-solar drift of the inclination is roughly 0.75-0.95 deg per year, from memory).
"""

from __future__ import annotations

import json
import math

import pytest
from apsidal.compiler.budget import budget
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run
from apsidal.compiler.load import load_text
from apsidal.compiler.size import size
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from strictjson import strict_json

G0 = 9.80665e-3  # km/s^2


def plan(*steps, dry=500.0, load=400.0, residual=None, isp=300.0, reserve=None,
         start="start circular 400 km", engines=()) -> str:
    lines = ['plan "record"', "around earth", "craft c {", f"    dry {dry!r} kg",
             f"    propellant {load!r} kg"]
    if residual:
        lines.append(f"    residual {residual}")
    lines.append(f"    engine main isp {isp!r} s thrust 400 N")
    lines += [f"    engine {e}" for e in engines]
    lines.append("}")
    if reserve:
        lines.append(f"reserve {reserve}")
    return "\n".join([*lines, start, *steps]) + "\n"


def report(text: str) -> dict:
    return budget(run(load_text(text)))


# --- a plan that does not fit ---------------------------------------------------------------


def test_the_shortfall_is_the_load_to_add():
    """400 kg, 2000 m/s at 300 s on a 500 kg craft: the load that flies it is
    500 (exp(dv / (Isp g0)) - 1) = 486.75 kg, so 86.75 kg more (rocket equation)."""
    rep = report(plan("burn big: along 2000 m/s"))
    need = 500.0 * math.expm1(2.0 / (300.0 * G0))
    assert need == pytest.approx(486.75, abs=0.005)
    tot = rep["totals"]
    assert rep["feasible"] is False
    assert tot["propellant_needed_kg"] == pytest.approx(need, abs=1e-6)  # JSON: to 1 mg
    assert tot["shortfall_kg"] == pytest.approx(need - 400.0, abs=1e-6)
    assert tot["first_uncovered_step"] == "big"
    assert tot["reserve_met"] is False and tot["expectations_met"] is False


def test_every_step_is_priced_past_the_point_the_load_runs_out():
    """Delta-v does not depend on the mass: the steps after the shortfall keep theirs."""
    steps = ("burn up at periapsis: apoapsis to 35786 km", "burn circ at apoapsis: circular",
             "burn tilt at node: inclination to 0 deg")
    full = report(plan(*steps, load=20000.0))
    short = report(plan(*steps, load=300.0))
    assert [s["dv_m_s"] for s in short["steps"]] == pytest.approx(
        [s["dv_m_s"] for s in full["steps"]], rel=1e-12)
    assert [s["covered"] for s in short["steps"]] == [False, False, False]
    assert short["totals"]["dv_m_s"] == pytest.approx(full["totals"]["dv_m_s"], rel=1e-12)
    # the sized load does not depend on the load carried
    assert short["totals"]["propellant_needed_kg"] == pytest.approx(
        full["totals"]["propellant_needed_kg"], abs=1e-6)


@pytest.mark.parametrize("fmt", ["table", "json", "markdown", "csv"])
def test_a_plan_that_does_not_fit_in_every_format(tmp_path, capsys, fmt):
    path = tmp_path / "short.aps"
    path.write_text(plan("burn big: along 2000 m/s", "coast c for 1 h",
                         "burn more: along 100 m/s"))
    code = main(["run", str(path), "--format", fmt])
    out, err = capsys.readouterr()
    assert code == 1 and "does not fit its load" in err and "Traceback" not in err
    short = 500.0 * math.expm1(2.1 / (300.0 * G0)) - 400.0  # the rocket equation
    if fmt == "json":
        rep = strict_json(out)
        assert [s["name"] for s in rep["steps"]] == ["big", "c", "more"]
        assert rep["totals"]["shortfall_kg"] == pytest.approx(short, abs=1e-6)
    else:
        assert f"add {short:,.3f} kg" in " ".join(out.split())
        assert "more" in out


# --- sizing ---------------------------------------------------------------------------------

CHAINS = [
    ("burn up at periapsis: apoapsis to 35786 km", "drop kick 40 kg",
     "burn circ at apoapsis: circular, inclination to 0 deg using trim",
     "allow keep 50 m/s per year for 5 yr using trim margin 10 %"),
    ("burn a: along 300 m/s", "drop one 20 kg", "drop two 30 kg", "burn b: along 500 m/s"),
]


@pytest.mark.parametrize("residual", [None, "2 %", "12 kg"])
@pytest.mark.parametrize("steps", CHAINS)
def test_sized_load_ends_exactly_at_the_reserve_and_a_gram_less_does_not(steps, residual):
    """The backward pass against a forward run with that load (to 1 g)."""
    kw = {"residual": residual, "reserve": "25 m/s", "engines": ("trim isp 220 s thrust 20 N",)}
    need = report(plan(*steps, load=100.0, **kw))["totals"]["propellant_needed_kg"]
    exact = report(plan(*steps, load=need, **kw))
    assert exact["feasible"] is True
    assert exact["totals"]["dv_capacity_left_m_s"] == pytest.approx(25.0, abs=1e-5)
    less = report(plan(*steps, load=need - 0.001, **kw))
    assert less["feasible"] is False
    assert less["totals"]["shortfall_kg"] == pytest.approx(0.001, abs=1e-6)


def test_dry_max_is_the_heaviest_craft_the_load_flies():
    steps = CHAINS[1]
    rep = report(plan(*steps, load=400.0, reserve="10 m/s"))
    dry_max = rep["totals"]["dry_max_kg"]
    at = report(plan(*steps, load=400.0, dry=dry_max, reserve="10 m/s"))
    assert at["totals"]["dv_capacity_left_m_s"] == pytest.approx(10.0, abs=1e-6)
    assert report(plan(*steps, load=400.0, dry=dry_max + 0.001,
                       reserve="10 m/s"))["feasible"] is False


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.one_of(st.floats(1.0, 1500.0).map(lambda dv: f"along {dv:.3f} m/s"),
                          st.floats(1.0, 50.0).map(lambda kg: f"drop {kg:.3f} kg")),
                min_size=1, max_size=6),
       st.floats(0.0, 0.2), st.floats(0.0, 50.0))
def test_sizing_property_forward_run_lands_on_the_reserve(items, share, reserve):
    steps = [f"burn b{i}: {x}" if x.startswith("along") else f"drop d{i} {x[5:]}"
             for i, x in enumerate(items)]
    kw = {"dry": 800.0, "residual": f"{share * 100:.4f} %", "reserve": f"{reserve:.4f} m/s"}
    first = report(plan(*steps, load=10.0, **kw))
    need = first["totals"]["propellant_needed_kg"]
    if need is None:  # the residual share is more than the mass ratio allows: said so
        assert first["feasible"] is False and "residual" in first["totals"]["no_load_fits"]
        return
    rep = report(plan(*steps, load=need + 1e-6, **kw))
    assert rep["feasible"]
    assert rep["totals"]["dv_capacity_left_m_s"] == pytest.approx(reserve, abs=1e-4)


def test_size_command(tmp_path, capsys):
    path = tmp_path / "p.aps"
    path.write_text(plan("burn big: along 2000 m/s"))
    assert main(["size", str(path), "--format", "json"]) == 1
    rep = json.loads(capsys.readouterr().out)
    assert rep["propellant_needed_kg"] == pytest.approx(500.0 * math.expm1(2.0 / (300 * G0)))
    assert rep["shortfall_kg"] == pytest.approx(rep["propellant_needed_kg"] - 400.0)
    # 400 kg fly 500 kg dry at most to 2000 m/s: dry (e^x - 1) = 400
    assert rep["dry_max_kg"] == pytest.approx(400.0 / math.expm1(2.0 / (300 * G0)))
    assert main(["size", str(path)]) == 1
    out = capsys.readouterr().out
    assert "short by" in out and "Caution" in out


# --- allowances and residuals ----------------------------------------------------------------


def test_station_keeping_per_year_uses_the_julian_year():
    """15 years at 50 m/s per year of north-south keeping: 750 m/s (common practice)."""
    rep = report(plan("allow ns 50 m/s per year for 5478.75 d", load=2000.0,
                      start="start circular 35786 km"))
    (line,) = rep["steps"]
    assert line["dv_m_s"] == pytest.approx(750.0, rel=1e-12)
    same = report(plan("allow ns 50 m/s per year for 15 yr", load=2000.0,
                       start="start circular 35786 km"))
    assert same["steps"][0]["dv_m_s"] == pytest.approx(750.0, rel=1e-12)
    # priced by the rocket equation at its place, the orbit unchanged
    assert line["propellant_kg"] == pytest.approx(2500.0 * -math.expm1(-0.75 / (300 * G0)),
                                                  abs=1e-6)
    assert line["orbit_after"]["periapsis_alt_km"] == pytest.approx(35786.0)


def test_statistical_lines_combine_by_root_sum_square():
    """30 and 40 m/s at 3 sigma make 50 m/s; a deterministic 10 m/s adds."""
    rep = report(plan("allow a 30 m/s statistical", "allow det 10 m/s",
                      "allow b 40 m/s statistical", load=500.0))
    allow = rep["totals"]["allowances"]
    assert allow["statistical_rss_m_s"] == pytest.approx(50.0)
    assert allow["deterministic_m_s"] == pytest.approx(10.0)
    assert rep["totals"]["dv_m_s"] == pytest.approx(60.0)
    assert [s["dv_m_s"] for s in rep["steps"]] == pytest.approx([30 * 50 / 70, 10, 40 * 50 / 70])


def test_residual_is_carried_but_never_burnt():
    """With 10 % of 400 kg unusable the capacity is that of 360 kg."""
    rep = report(plan(load=400.0, residual="10 %"))
    tot = rep["totals"]
    assert tot["residual_kg"] == pytest.approx(40.0) and tot["usable_kg"] == pytest.approx(360.0)
    assert tot["dv_capacity_left_m_s"] == pytest.approx(
        300 * G0 * 1000 * math.log(900.0 / 540.0), abs=1e-6)
    # a burn the whole load would cover but the usable part does not
    dv = 300 * G0 * math.log(900.0 / 520.0) * 1000
    assert report(plan(f"burn b: along {dv:.3f} m/s", load=400.0,
                       residual="10 %"))["feasible"] is False
    assert report(plan(f"burn b: along {dv:.3f} m/s", load=400.0))["feasible"] is True


def test_allowance_is_a_barrier_to_the_reorder_search():
    from apsidal.compiler.reorder import is_barrier

    program = load_text(plan("allow a 5 m/s", "allow b 5 m/s movable"))
    assert [is_barrier(s) for s in program.steps] == [True, False]


def test_sizing_needs_every_step_flown():
    res = run(load_text(plan("burn big: along 2000 m/s")))
    assert size(res).load == pytest.approx(500.0 * math.expm1(2.0 / (300 * G0)))


# --- two-component engines ------------------------------------------------------------------

BIPROP = """plan "biprop"
around earth
craft c {
    dry 1000 kg
    LOAD
    engine main isp 320 s thrust 400 N mixture 1.65
    engine rcs isp 220 s thrust 10 N
}
reserve 10 m/s
start circular 400 km
burn a: along 1500 m/s
burn b: along 20 m/s using rcs
"""


def biprop(load: str) -> dict:
    return report(BIPROP.replace("LOAD", load))


def test_mixture_splits_each_burn_into_fuel_and_oxidiser():
    """Oxidiser-to-fuel MR: fuel m/(1+MR), oxidiser m MR/(1+MR) (the definition of the
    mixture ratio); a one-component engine of a single-store craft reports no split."""
    rep = biprop("propellant 900 kg")
    a, b = rep["steps"]
    assert a["fuel_kg"] == pytest.approx(a["propellant_kg"] / 2.65, abs=1e-6)
    assert a["oxidiser_kg"] == pytest.approx(a["propellant_kg"] * 1.65 / 2.65, abs=1e-6)
    assert "fuel_kg" not in b
    assert rep["totals"]["fuel_kg"] + rep["totals"]["oxidiser_kg"] == pytest.approx(
        a["propellant_kg"], abs=1e-5)


def test_loaded_components_size_each_and_fly_exactly():
    need = biprop("fuel 400 kg\n    oxidiser 500 kg")["totals"]
    f, o = need["fuel_needed_kg"], need["oxidiser_needed_kg"]
    assert f + o == pytest.approx(need["propellant_needed_kg"], abs=1e-5)
    exact = biprop(f"fuel {f!r} kg\n    oxidiser {o!r} kg")
    assert exact["feasible"] is True
    assert exact["totals"]["dv_capacity_left_m_s"] == pytest.approx(10.0, abs=1e-4)
    for less in (f"fuel {f - 0.001!r} kg\n    oxidiser {o!r} kg",
                 f"fuel {f!r} kg\n    oxidiser {o - 0.001!r} kg"):
        assert biprop(less)["feasible"] is False


def test_the_component_that_runs_out_first_is_named_with_what_it_strands():
    rep = biprop("fuel 400 kg\n    oxidiser 300 kg")
    tot = rep["totals"]
    assert rep["feasible"] is False and tot["exhausted_component"] == "oxidiser"
    assert tot["first_uncovered_step"] == "a"
    # burn a uses fuel at 1/1.65 of its oxidiser: 300 kg of oxidiser take 181.82 kg of fuel
    assert tot["stranded_kg"] == pytest.approx(400.0 - 300.0 / 1.65, abs=1e-6)
    assert tot["oxidiser_shortfall_kg"] == pytest.approx(tot["oxidiser_needed_kg"] - 300.0,
                                                         abs=1e-6)
    assert tot["fuel_shortfall_kg"] == 0.0


def test_a_one_component_engine_of_a_two_store_craft_draws_the_fuel():
    """A dual-mode craft: the thrusters burn the main engine's fuel (docs/language.md)."""
    rep = biprop("fuel 400 kg\n    oxidiser 500 kg")
    b = rep["steps"][1]
    assert b["fuel_kg"] == pytest.approx(b["propellant_kg"], abs=1e-9)
    assert b["oxidiser_kg"] == 0.0


def test_check_runs_every_rule_on_a_plan_that_does_not_fit_and_names_the_rewrite_that_fits(
        tmp_path, capsys):
    """The low plane change flown before the raise: the reordered plan needs less than
    the load carried, the original more; check says which rewrite makes it fit, and the
    rewrite, re-parsed and re-priced, does fit."""
    steps = ("burn plane at node: inclination to 0 deg",
             "burn raise at periapsis: apoapsis to 35786 km", "burn circ at apoapsis: circular")
    reordered = (steps[1], steps[2], "burn plane at node: inclination to 0 deg")
    start = "start circular 300 km inclination 28.5 deg"
    kw = {"start": start, "isp": 320.0}
    high = report(plan(*steps, **kw))["totals"]["propellant_needed_kg"]
    low = report(plan(*reordered, **kw))["totals"]["propellant_needed_kg"]
    assert low < high
    path = tmp_path / "tight.aps"
    path.write_text(plan(*steps, load=(low + high) / 2, **kw))
    assert main(["check", str(path), "--format", "json"]) == 1
    found = json.loads(capsys.readouterr().out)["plans"][0]["findings"]
    rules = [f["rule"] for f in found]
    assert "propellant-exhausted" in rules
    fits = [f for f in found if "with this rewrite the plan fits its load" in f["notes"]]
    assert fits
    for f in fits:
        assert report(f["suggestion"])["feasible"] is True


def test_diff_shows_reserve_and_allowances_and_a_fit_lost(tmp_path, capsys):
    text = plan("burn a: along 300 m/s", "allow keep 20 m/s per year for 2 yr",
                load=400.0, reserve="25 m/s")
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(text)
    new.write_text(text.replace("reserve 25 m/s", "reserve 1500 m/s")
                   .replace("for 2 yr", "for 3 yr"))
    code = main(["diff", str(old), str(new), "--format", "json", "--no-findings"])
    d = json.loads(capsys.readouterr().out)
    assert code == 1 and d["feasible"] == {"old": True, "new": False}
    assert d["change"]["reserve_m_s"] == pytest.approx(1475.0)
    assert d["change"]["allowances_m_s"] == pytest.approx(20.0)
    main(["diff", str(old), str(new), "--format", "markdown", "--no-findings"])
    out = capsys.readouterr().out
    assert "no longer fits" in out and "reserve +1,475 m/s" in out
    assert "| reserve |" in out and "| allowances (priced) |" in out


def test_a_transfer_that_runs_out_names_its_burn_and_keeps_its_split():
    """The split of a shared plane change is geometry: the same whatever the load."""
    steps = ("transfer t at node: circular 35786 km, inclination to 0 deg",)
    kw = {"start": "start circular 300 km inclination 28.5 deg"}
    full = report(plan(*steps, load=20000.0, **kw))
    short = report(plan(*steps, load=full["totals"]["propellant_needed_kg"] * 0.995, **kw))
    assert short["totals"]["first_uncovered_step"] == "t/2"
    assert [s["covered"] for s in short["steps"]] == [True, False]
    for a, b in zip(full["steps"], short["steps"]):
        assert b["dv_m_s"] == pytest.approx(a["dv_m_s"], abs=1e-6)
        assert b["vector_m_s"] == pytest.approx(a["vector_m_s"], abs=1e-6)


@pytest.mark.parametrize("command", ["run", "size"])
def test_a_mass_ratio_past_any_load_is_reported_not_a_crash(tmp_path, capsys, command):
    # 2000 m/s at 0.01 s of specific impulse: exp(dv / (Isp g0)) = e^20394 overflows a
    # float (the rocket equation; found by the fuzz test): the plan is priced, does not
    # fit, and says why, in finite numbers
    path = tmp_path / "ratio.aps"
    path.write_text(plan("burn big: along 2000 m/s", isp=0.01))
    assert main([command, str(path), "--format", "json"]) == 1
    out = strict_json(capsys.readouterr().out)
    assert out["feasible"] is False
    why = out["totals"]["no_load_fits"] if command == "run" else out["why"]
    ratio = 2.0 / (0.01 * G0)
    assert f"e^{ratio:.6g}" in why and "specific impulse" in why


def test_a_plan_out_of_its_load_that_then_cannot_be_flown_is_a_located_error(tmp_path, capsys):
    # the load runs out at the first burn, and the second cannot be flown (an apoapsis
    # below the craft): the geometry error is the answer (exit 2), the load finding says
    # the shortfall is not sized for a plan that stops part-way, and nothing crashes
    path = tmp_path / "stops.aps"
    path.write_text(plan("burn big: along 2000 m/s",
                         "burn low at periapsis: apoapsis to 300 km"))
    assert main(["run", str(path)]) == 2
    out = capsys.readouterr()
    assert "stops.aps:10:1" in out.err and "apoapsis 300.000 km" in out.err
    assert "the load runs out at big, before the step the plan cannot fly" in " ".join(
        out.out.split())
