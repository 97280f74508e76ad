"""`apsidal plot`: the pictures are read back, not only found on disk.

The chain's burn markers are counted and turned back into kilometres with the scale the
picture carries (the body, drawn to scale) and compared with the burn positions the
evaluator's rows hold; the waterfall's bars are measured against the value axis's own
ticks and must add up to the total `apsidal run --format json` reports.  What is checked
is the drawing against the evaluator (an independent projection: distances within the
start orbit's plane), not the drawing against itself.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
import svgread
from apsidal.compiler.cli import main
from apsidal.compiler.evaluate import run as evaluate
from apsidal.compiler.load import load, load_text
from hypothesis import HealthCheck, given, settings
from plangen import plan_texts

SAMPLES = sorted((Path(__file__).resolve().parent.parent / "samples").glob("*.aps"))
IDS = [p.stem for p in SAMPLES]


def cli(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(args))
    return code, out.getvalue(), err.getvalue()


def run_json(path) -> dict:
    code, out, err = cli("run", str(path), "--format", "json")
    assert code in (0, 1), err
    return json.loads(out)


def plot(tmp_path: Path, plan, kind: str, ext: str = "svg", *more: str) -> Path:
    target = tmp_path / f"{Path(str(plan)).stem}-{kind}.{ext}"
    code, _, err = cli("plot", str(plan), "--kind", kind, "-o", str(target), *more)
    assert code in (0, 1), err
    assert target.exists()
    return target


def in_plane(r: np.ndarray, h0: np.ndarray) -> np.ndarray:
    """The part of a position in the start orbit's plane (what a view from above it shows)."""
    return r - np.outer(r @ h0, h0)


@pytest.mark.parametrize("path", SAMPLES, ids=IDS)
def test_chain_has_one_marker_per_burn_at_the_burn_position(tmp_path, path):
    """Every burn has its marker where the evaluator puts it, in the panel of its phase:
    a plan of several bodies is drawn around each (ids of panel k > 0 lead `phaseK-`)."""
    report = run_json(path)
    program = load(str(path))
    rows = evaluate(program).rows
    root = svgread.parse(plot(tmp_path, path, "chain").read_bytes())
    legs = [s["index"] for s in report["steps"] if s["kind"] == "leg"]
    bounds = [0, *legs, 10**9]
    every = svgread.ids_like(root, r"(phase\d+-)?burn-\d+")
    assert sorted(every) == sorted(
        ("" if k == 0 else f"phase{k}-") + f"burn-{s['index']}"
        for s in report["steps"] if s["kind"] == "burn"
        for k in [sum(s["index"] > b for b in legs)])
    for k in range(len(bounds) - 1):
        prefix = "" if k == 0 else f"phase{k}-"
        burns = [s for s in report["steps"]
                 if s["kind"] == "burn" and bounds[k] < s["index"] < bounds[k + 1]]
        if k == 0:
            r0, v0, radius = program.start_r, program.start_v, report["body"]["radius_km"]
        else:  # the phase starts on the leg's arrival state
            leg = rows[bounds[k] - 1]
            r0, v0 = leg.after.r[0], leg.after.v[0]
            radius = program.steps[leg.step].body.radius
        check_panel(root, prefix, burns, rows, r0, v0, radius)


def check_panel(root, prefix: str, burns: list[dict], rows, r0, v0, radius: float) -> None:
    marks = svgread.ids_like(root, rf"{prefix}burn-\d+")
    assert sorted(marks) == sorted(f"{prefix}burn-{s['index']}" for s in burns)
    if not burns:
        return
    # the evaluator's burn positions (the chain's rows) and the phase's start orbit normal
    h0 = np.cross(r0, v0)
    h0 = h0 / np.linalg.norm(h0)
    want = in_plane(np.array([rows[s["index"] - 1].after.r[0] for s in burns]), h0)
    scale = svgread.body_scale(root, radius, prefix)
    got = np.array([svgread.to_km(svgread.marker_positions(marks[f"{prefix}burn-{s['index']}"]),
                                  scale)[0] for s in burns])
    km_per_pt = 1.0 / scale[2]
    tol = 0.01 * km_per_pt  # a hundredth of a point: the SVG's own precision is 1e-6 pt
    # from the body's centre: the distance within the start orbit's plane
    assert np.allclose(np.linalg.norm(got, axis=1), np.linalg.norm(want, axis=1), atol=tol)
    # between burns: the same distances (so the same figure up to a turn of the view)
    d_got = np.linalg.norm(got[:, None] - got[None], axis=-1)
    d_want = np.linalg.norm(want[:, None] - want[None], axis=-1)
    assert np.allclose(d_got, d_want, atol=2 * tol)
    # each burn's marker sits on the orbit it starts (drawn from that very point), and
    # the coast that leads to it (the wait for its place) ends there; a finite burn is
    # marked at its cutoff, its thrust arc drawn from the coast's end (ignition) to it
    orbits = svgread.ids_like(root, rf"{prefix}orbit-\d+")
    coasts = svgread.ids_like(root, rf"{prefix}coast-\d+")
    thrust = svgread.ids_like(root, rf"{prefix}thrust-\d+")
    assert sorted(thrust) == sorted(f"{prefix}thrust-{s['index']}" for s in burns
                                    if "finite" in s)
    for s, xy in zip(burns, got):
        path_km = svgread.to_km(svgread.path_points(orbits[f"{prefix}orbit-{s['index']}"]),
                                scale)
        assert np.min(np.linalg.norm(path_km - xy, axis=1)) < tol
        end = xy
        if "finite" in s:
            arc = svgread.to_km(svgread.path_points(thrust[f"{prefix}thrust-{s['index']}"]),
                                scale)
            assert np.linalg.norm(arc[-1] - xy) < tol
            end = arc[0]
        if s["coast_before_s"] > 0:
            arc = svgread.to_km(svgread.path_points(coasts[f"{prefix}coast-{s['index']}"]),
                                scale)
            assert np.linalg.norm(arc[-1] - end) < tol


@pytest.mark.parametrize("path", SAMPLES, ids=IDS)
def test_waterfall_bars_add_up_to_the_reported_total(tmp_path, path):
    report = run_json(path)
    root = svgread.parse(plot(tmp_path, path, "waterfall").read_bytes())
    offset, slope = svgread.y_axis(root)

    def height(el) -> float:
        ys = svgread.path_points(el)[:, 1]
        return abs(slope) * (ys.max() - ys.min())

    def top(el) -> float:
        return offset + slope * svgread.path_points(el)[:, 1].min()

    ids = svgread.by_id(root)
    priced = [s for s in report["steps"] if s["kind"] in ("burn", "allow")]
    assert len(svgread.ids_like(root, r"bar-\d+-dv")) == len(priced)
    total = report["totals"]["dv_with_margin_m_s"]
    tol = 1e-4 * max(total, 1.0)  # drawing precision: 1e-6 pt on a few hundred points
    drawn = 0.0
    for s in priced:
        dv, margin = height(ids[f"bar-{s['index']}-dv"]), height(ids[f"bar-{s['index']}-margin"])
        assert dv == pytest.approx(s["dv_m_s"], abs=tol)
        assert dv + margin == pytest.approx(s["dv_with_margin_m_s"], abs=tol)
        drawn += dv + margin
        assert top(ids[f"bar-{s['index']}-margin"]) == pytest.approx(drawn, abs=len(priced) * tol)
    assert drawn == pytest.approx(total, abs=len(priced) * tol)
    assert height(ids["bar-total"]) == pytest.approx(total, abs=tol)
    capacity = total + report["totals"]["dv_capacity_left_m_s"]
    assert top(ids["capacity"]) == pytest.approx(capacity, abs=tol)
    if report["totals"]["reserve_m_s"]:
        assert top(ids["reserve"]) == pytest.approx(capacity - report["totals"]["reserve_m_s"],
                                                    abs=tol)


@pytest.mark.parametrize("path", SAMPLES, ids=IDS)
def test_mass_picture_starts_full_and_ends_at_the_final_mass(tmp_path, path):
    report = run_json(path)
    root = svgread.parse(plot(tmp_path, path, "mass").read_bytes())
    offset, slope = svgread.y_axis(root)
    ids = svgread.by_id(root)
    mass = offset + slope * svgread.path_points(ids["mass"])[:, 1]
    left = offset + slope * svgread.path_points(ids["propellant"])[:, 1]
    craft, tot = report["craft"], report["totals"]
    tol = 1e-4 * (craft["dry_kg"] + craft["propellant_kg"])
    assert mass[0] == pytest.approx(craft["dry_kg"] + craft["propellant_kg"], abs=tol)
    assert mass[-1] == pytest.approx(tot["final_mass_kg"], abs=tol)
    assert left[0] == pytest.approx(tot["usable_kg"], abs=tol)
    assert left[-1] == pytest.approx(tot["usable_kg"] - tot["propellant_kg"], abs=tol)
    assert np.all(np.diff(mass) <= tol)  # mass only ever falls


def test_pictures_regenerate_byte_for_byte(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    first = plot(tmp_path / "a", SAMPLES[0], "chain")
    second = plot(tmp_path / "b", SAMPLES[0], "chain")
    assert first.read_bytes() == second.read_bytes()
    text = first.read_text()
    assert "<dc:date>" not in text and "Matplotlib v" not in text
    a = plot(tmp_path / "a", SAMPLES[0], "waterfall", "png").read_bytes()
    b = plot(tmp_path / "b", SAMPLES[0], "waterfall", "png").read_bytes()
    assert a == b and a.startswith(b"\x89PNG")


def test_png_pictures_are_drawn(tmp_path):
    from matplotlib.image import imread

    for kind in ("chain", "waterfall", "mass"):
        img = imread(plot(tmp_path, SAMPLES[0], kind, "png"))
        assert img.shape[0] > 300 and img.shape[1] > 600
        assert img[..., :3].std() > 0.05  # not a blank page


def test_three_d_view_marks_every_burn(tmp_path):
    path = next(p for p in SAMPLES if p.stem == "lunar-polar")
    report = run_json(path)
    root = svgread.parse(plot(tmp_path, path, "chain", "svg", "--view", "3d").read_bytes())
    burns = [s["index"] for s in report["steps"] if s["kind"] == "burn"]
    assert sorted(svgread.ids_like(root, r"burn-\d+")) == sorted(f"burn-{i}" for i in burns)


PLAN_OUT_OF_PROPELLANT = """plan "Short tank"
around earth
craft c { dry 500 kg propellant 40 kg engine e isp 300 s thrust 400 N }
start circular 400 km
burn up at periapsis: apoapsis to 20000 km
burn round at apoapsis: circular
"""


def test_a_plan_that_does_not_fit_is_drawn_with_its_shortfall(tmp_path):
    plan = tmp_path / "short.aps"
    plan.write_text(PLAN_OUT_OF_PROPELLANT)
    out = tmp_path / "w.svg"
    code, _, err = cli("plot", str(plan), "--kind", "waterfall", "-o", str(out))
    assert code == 1 and "does not fit its load" in err
    root = svgread.parse(out.read_bytes())
    ids = svgread.by_id(root)
    assert "capacity" not in ids  # no capacity to draw: the load runs out part-way
    report = run_json(plan)
    assert report["totals"]["dv_with_margin_m_s"] > 0  # priced in full, never 0 m/s
    _offset, slope = svgread.y_axis(root)
    ys = svgread.path_points(ids["bar-total"])[:, 1]
    assert abs(slope) * (ys.max() - ys.min()) == pytest.approx(
        report["totals"]["dv_with_margin_m_s"], rel=1e-4)
    texts = " ".join(t.text or "" for t in root.iter(f"{svgread.SVG}text"))
    assert "runs out at up" in texts or "runs out at round" in texts
    code, _, _ = cli("plot", str(plan), "--kind", "mass", "-o", str(tmp_path / "m.svg"))
    assert code == 1


@pytest.mark.parametrize("args, words", [
    (["--kind", "chain", "-o", "OUT.pdf"], ".svg or .png"),
    (["--kind", "waterfall", "-o", "NOWHERE/x.svg"], "does not exist"),
    (["--kind", "mass", "--view", "3d", "-o", "OUT.svg"], "--view is for --kind chain"),
    (["--kind", "chain", "--metric", "propellant_kg", "-o", "OUT.svg"], "--metric is for"),
])
def test_plot_usage_mistakes_exit_2(tmp_path, args, words):
    args = [a.replace("OUT", str(tmp_path / "p")).replace("NOWHERE", str(tmp_path / "none"))
            for a in args]
    code, _, err = cli("plot", str(SAMPLES[0]), *args)
    assert code == 2 and words in err
    assert not list(tmp_path.glob("p.*"))


def test_a_plan_that_cannot_be_flown_writes_nothing(tmp_path):
    plan = tmp_path / "bad.aps"
    plan.write_text("around earth\ncraft c { dry 100 kg propellant 50 kg engine e isp 300 s "
                    "thrust 10 N }\nstart circular 400 km\nburn low: periapsis to -3000 km\n")
    out = tmp_path / "c.svg"
    code, _, err = cli("plot", str(plan), "-o", str(out))
    assert code == 2 and "bad.aps:4:" in err and "^" in err and "Traceback" not in err
    assert not out.exists()


def test_run_does_not_load_the_drawing_code():
    code = ("import sys; from apsidal.compiler.cli import main; main(['run', sys.argv[1]]); "
            "print(sorted(m for m in sys.modules if m.startswith(('matplotlib', "
            "'apsidal.compiler.draw', 'apsidal.compiler.pictures', "
            "'apsidal.compiler.report_html', 'apsidal.compiler.picture_cli'))), "
            "file=sys.stderr)")
    done = subprocess.run([sys.executable, "-c", code, str(SAMPLES[0])], capture_output=True,
                          text=True, env={**os.environ, "COLUMNS": "100"}, check=True)
    assert done.stderr.strip() == "[]"


def test_a_long_plan_draws(tmp_path):
    steps = []
    for k in range(60):  # 180 burns and coasts, up and down between two orbits
        steps += [f"burn up{k} at periapsis: apoapsis to {2000 + 10 * k} km",
                  f"coast c{k} 1 rev", f"burn down{k} at periapsis: apoapsis to 400 km"]
    plan = tmp_path / "long.aps"
    plan.write_text("around earth\ncraft c { dry 100 kg propellant 50000 kg engine e isp 300 s "
                    "thrust 1000 N }\nstart circular 400 km\n" + "\n".join(steps) + "\n")
    for kind in ("chain", "waterfall", "mass"):
        root = svgread.parse(plot(tmp_path, plan, kind).read_bytes())
        if kind == "chain":
            assert len(svgread.ids_like(root, r"burn-\d+")) == 120
        if kind == "waterfall":
            assert len(svgread.ids_like(root, r"bar-\d+-dv")) == 120


# --- a trade study -------------------------------------------------------------------

RELAY = next(p for p in SAMPLES if p.stem == "relay-geo")


def priced_variants(parking: list[float]) -> dict:
    """A sweep's JSON, in the contract of `apsidal sweep --format json`
    (docs/pictures.md), built by pricing edited copies of a sample with the evaluator:
    the parking orbit's altitude varied.  An altitude under the surface cannot be flown:
    its variant has no totals, as a sweep reports it."""
    from apsidal.compiler.budget import budget
    from apsidal.lang.errors import PlanError

    text = RELAY.read_text()
    variants = []
    for alt in parking:
        edited = text.replace("periapsis 250 km apoapsis 250 km",
                              f"periapsis {alt:g} km apoapsis {alt:g} km")
        assert edited != text
        try:
            result = evaluate(load_text(edited, "relay.aps"))
        except PlanError as err:
            variants.append({"values": {"start.circular": float(alt)}, "totals": None,
                             "flown": False, "feasible": False, "reason": err.message})
            continue
        report = budget(result)
        variants.append({"values": {"start.circular": float(alt)},
                         "totals": report["totals"] if result.ok else None,
                         "flown": result.ok, "feasible": report["feasible"]})
    return {"plan": "relay-geo", "source": str(RELAY),
            "axes": [{"name": "start.circular", "unit": "km", "low": min(parking),
                      "high": max(parking), "points": len(parking)}],
            "variants": variants, "not_flown": sum(not v["flown"] for v in variants),
            "caution": "estimates"}


def sweep_picture(tmp_path: Path, data: dict, *more: str):
    source = tmp_path / "sweep.json"
    source.write_text(json.dumps(data))
    out = tmp_path / "sweep.svg"
    code, _, err = cli("plot", str(source), "--kind", "sweep", "-o", str(out), *more)
    assert code == 0, err
    return svgread.parse(out.read_bytes())


def test_sweep_curve_has_every_flown_variant_and_marks_the_best(tmp_path):
    data = priced_variants([-100, 200, 300, 500, 800, 1200])
    assert data["not_flown"] == 1  # 100 km under the surface
    root = sweep_picture(tmp_path, data)
    ids = svgread.by_id(root)
    assert len(svgread.marker_positions(ids["curve-0"])) == 5
    offset, slope = svgread.y_axis(root)
    drawn = offset + slope * svgread.marker_positions(ids["curve-0"])[:, 1]
    flown = [v for v in data["variants"] if v["flown"]]
    want = [v["totals"]["dv_with_margin_m_s"] for v in flown]
    assert np.allclose(drawn, want, atol=1e-4 * max(want))
    best = offset + slope * svgread.marker_positions(ids["best"])[0, 1]
    feasible = [w for w, v in zip(want, flown) if v["feasible"]]
    assert best == pytest.approx(min(feasible), abs=1e-4 * max(want))
    texts = " ".join(t.text or "" for t in root.iter(f"{svgread.SVG}text"))
    assert "1 variants not flown" in texts and "start.circular, km" in texts


def test_sweep_best_is_the_sweeps_own_minimum(tmp_path):
    data = priced_variants([200, 400, 600])
    # a --minimise result: the value found between the grid's points and its objective
    data["best"] = {"name": "start.circular", "unit": "km", "value": 512.5,
                    "tolerance": 0.1, "objective": "propellant", "propellant_kg": 2000.0,
                    "at_end_of_range": False, "evaluations": 30, "plan_text": ""}
    root = sweep_picture(tmp_path, data)
    offset, slope = svgread.y_axis(root)
    x0, xs = svgread.axis(root, "x")
    best = svgread.marker_positions(svgread.by_id(root)["best"])[0]
    assert x0 + xs * best[0] == pytest.approx(512.5, abs=0.01)  # km
    assert offset + slope * best[1] == pytest.approx(2000.0, abs=0.05)  # propellant: kg
    drawn = offset + slope * svgread.marker_positions(svgread.by_id(root)["curve-0"])[:, 1]
    assert np.allclose(drawn, [v["totals"]["propellant_kg"] for v in data["variants"]],
                       atol=0.05)
    # another metric than the one minimised: the best value as a line, not a point
    root = sweep_picture(tmp_path, data, "--metric", "dv_m_s")
    x0, xs = svgread.axis(root, "x")
    line = svgread.path_points(svgread.by_id(root)["best"])
    assert line.shape[0] == 2 and np.allclose(x0 + xs * line[:, 0], 512.5, atol=0.01)


def test_real_sweep_output_draws_with_its_best_value(tmp_path):
    # `apsidal sweep --minimise` on a sample: every flown variant on the curve at its
    # value and total, the value the sweep found starred at its objective
    code, out, err = cli("sweep", str(RELAY), "--vary", "raise.apoapsis=30000..42000 km",
                         "--minimise", "propellant", "--format", "json")
    data = json.loads(out)
    # the least propellant is at the top of the range, where the sample's own `expect`
    # (a circular orbit) fails: sweep says so and exits 1; the curve draws all the same
    assert not data["best"]["expectations_met"] and code == 1, err
    root = sweep_picture(tmp_path, data)
    ids = svgread.by_id(root)
    x0, xs = svgread.axis(root, "x")
    y0, ys = svgread.y_axis(root)
    flown = sorted((v for v in data["variants"] if v["flown"]),
                   key=lambda v: v["values"]["raise.apoapsis"])
    drawn = svgread.marker_positions(ids["curve-0"])
    assert len(drawn) == len(flown) > 2
    assert np.allclose(x0 + xs * drawn[:, 0], [v["values"]["raise.apoapsis"] for v in flown],
                       atol=1.0)  # km, on a 12 000 km axis
    assert np.allclose(y0 + ys * drawn[:, 1], [v["totals"]["propellant_kg"] for v in flown],
                       atol=0.01)
    star = svgread.marker_positions(ids["best"])[0]
    assert x0 + xs * star[0] == pytest.approx(data["best"]["value"], abs=1.0)
    assert y0 + ys * star[1] == pytest.approx(data["best"]["propellant_kg"], abs=0.01)
    texts = " ".join(t.text or "" for t in root.iter(f"{svgread.SVG}text"))
    if data["not_flown"]:
        assert f"{data['not_flown']} variants not flown" in texts


def test_a_plans_own_trade_statement_draws(tmp_path):
    plan = next(p for p in SAMPLES if p.stem == "marten-shell")
    code, out, err = cli("sweep", str(plan), "--trade", "altitude", "--format", "json")
    assert code == 0, err
    data = json.loads(out)
    root = sweep_picture(tmp_path, data)
    ids = svgread.by_id(root)
    assert len(svgread.marker_positions(ids["curve-0"])) == sum(
        v["flown"] for v in data["variants"])
    y0, ys = svgread.y_axis(root)
    best = y0 + ys * svgread.marker_positions(ids["best"])[0, 1]
    fits = [v["totals"]["dv_with_margin_m_s"] for v in data["variants"]
            if v["flown"] and v["feasible"]]
    assert best == pytest.approx(min(fits), abs=0.01)


def test_sweep_file_mistakes_exit_2(tmp_path):
    bad = tmp_path / "bad.json"
    cases = [('{"variants": [', "bad.json:1:"), ('{"steps": []}', "variants"),
             ('{"dispersions": [], "steps": []}', "--disperse"),
             (json.dumps({"variants": [{"values": {"a": 1.0}, "totals": None,
                                        "flown": False, "feasible": False}]}),
              "no variant of the sweep could be flown")]
    for text, words in cases:
        bad.write_text(text)
        code, _, err = cli("plot", str(bad), "--kind", "sweep", "-o", str(tmp_path / "s.svg"))
        assert code == 2 and words in err, (text, err)
    bad.write_text(json.dumps(priced_variants([300, 400])))
    code, _, err = cli("plot", str(bad), "--kind", "sweep", "--metric", "nonsense",
                       "-o", str(tmp_path / "s.svg"))
    assert code == 2 and "dv_with_margin_m_s" in err


def test_open_orbits_reach_past_the_arcs_flown_on_them(tmp_path):
    # a flyby: the hyperbolas are drawn out past where the craft coasts (3 h after the
    # burn), both ways from the burn, and the coast is drawn along its own orbit
    plan = tmp_path / "flyby.aps"
    plan.write_text("around mars\ncraft c { dry 100 kg propellant 50 kg engine e isp 300 s "
                    "thrust 10 N }\nstart orbit periapsis 400 km vinf 2.65 km/s inclination "
                    "75 deg anomaly -40 deg\nburn kick at periapsis: along 50 m/s\n"
                    "coast out for 3 h\n")
    report = run_json(plan)
    root = svgread.parse(plot(tmp_path, plan, "chain").read_bytes())
    scale = svgread.body_scale(root, report["body"]["radius_km"])
    ids = svgread.by_id(root)
    orbit = svgread.to_km(svgread.path_points(ids["orbit-1"]), scale)
    coast = svgread.to_km(svgread.path_points(ids["coast-2"]), scale)
    assert np.linalg.norm(orbit, axis=1).max() > np.linalg.norm(coast, axis=1).max()
    # every point of the coast lies on the drawn orbit (to the sampling's chord error)
    step = np.linalg.norm(np.diff(orbit, axis=0), axis=1).max()
    for p in coast:
        assert np.min(np.linalg.norm(orbit - p, axis=1)) < step


# --- any plan draws ------------------------------------------------------------------

@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(plan_texts(max_steps=6))
def test_every_generated_plan_draws_its_burns_and_its_total(text):
    from apsidal.compiler import draw
    from apsidal.compiler.budget import budget
    from apsidal.compiler.picture_cli import picture

    result = evaluate(load_text(text, "gen.aps"))
    report = budget(result)
    burns = sorted(f"burn-{s['index']}" for s in report["steps"] if s["kind"] == "burn")
    chain = svgread.parse(draw.render(picture("chain", result, report), "svg"))
    assert sorted(svgread.ids_like(chain, r"burn-\d+")) == burns
    assert "nan" not in ET.tostring(chain, encoding="unicode").lower()
    fall = svgread.parse(draw.render(picture("waterfall", result, report), "svg"))
    ids = svgread.by_id(fall)
    ys = svgread.path_points(ids["bar-total"])[:, 1]
    total = report["totals"]["dv_with_margin_m_s"]
    if total > 0:
        _, slope = svgread.y_axis(fall)
        # to 1e-4, or to the drawing's own precision (coordinates to 1e-6 pt, so a bar a
        # hundredth of a point tall on a long axis reads a few 1e-6 pt off)
        assert abs(slope) * (ys.max() - ys.min()) == pytest.approx(
            total, rel=1e-4, abs=abs(slope) * 2e-5)
