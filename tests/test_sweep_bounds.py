"""`apsidal sweep` where the values reach past a bound of the plan that two quantities
share: dispersed apsides of a near-circular start that cross (flown as the same ellipse
turned half a turn, each sample equal to a separate run of its plan text), and grid
corners past a shared bound (rows not flown, the rest priced)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from apsidal.compiler import sweep
from apsidal.compiler.cli import main
from apsidal.compiler.load import load_text
from apsidal.lang.parse import parse
from strictjson import strict_json
from test_sweep import PLAN, separate_run

ROOT = Path(__file__).resolve().parent.parent
MU = 398600.4418  # km3/s2, the catalogue's Earth (IERS 2010 conventions)
RE = 6378.1366  # km, the catalogue's Earth equatorial radius (IERS 2010 conventions)


@pytest.mark.parametrize("trade", ["altitude", "drop-off", "specific-impulse"])
def test_the_samples_own_trades_all_run(trade, capsys):
    code = main(["sweep", str(ROOT / "samples" / "marten-shell.aps"), "--trade", trade,
                 "--format", "json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    doc = strict_json(out)
    if trade == "drop-off":
        assert doc["samples"] == 20000 and doc["total"]["dv_m_s"]["mean"] is not None
    else:
        assert all(v["flown"] for v in doc["variants"])


# a near-circular start whose dispersed apsides cross in about a third of the samples;
# one with its argp and anomaly given, one without (they are written in when turned)
NEAR = [PLAN.replace("periapsis 350 km apoapsis 420 km", "periapsis 400 km apoapsis 403 km"),
        PLAN.replace("periapsis 350 km apoapsis 420 km", "periapsis 400 km apoapsis 403 km")
        .replace(" argp 30 deg anomaly 10 deg", "")]


@pytest.mark.parametrize("text", NEAR)
def test_crossed_apsides_are_the_ellipse_turned_and_each_sample_a_separate_run(text):
    program = load_text(text)
    targets = [("start.periapsis", 5.0), ("start.apoapsis", 5.0), ("start.inclination", 0.05)]
    knobs = [sweep.locate(program.plan, program, t) for t, _ in targets]
    units = ["km", "km", "deg"]
    bases = [k.base(u) for k, u in zip(knobs, units)]
    X = sweep.samples(bases, [s for _, s in targets], 24, seed=5)
    crossed = X[:, 0] > X[:, 1]
    assert 3 <= crossed.sum() < len(X)  # both kinds are drawn
    held, refused = sweep.admissible(text, "<plan>", knobs, units, X, bases, mirror=True)
    assert refused.ok.all() and (held == X).all()  # no sample past a bound
    extremes = [(float(X[:, j].min()), float(X[:, j].max())) for j in range(3)]
    model = sweep.Model(text, "<plan>", knobs, units, extremes, mirror=True)
    priced = sweep.price(model, X, chunk=7)
    for i in range(len(X)):
        variant = model.text_with(list(X[i]))
        start = next(s for s in parse(variant, "<v>").statements if s.__class__.__name__
                     == "Start")
        f = {x.key: x.value.quantity.internal() if hasattr(x.value, "quantity")
             else x.value.internal() for x in start.fields}
        assert f["periapsis"] <= f["apoapsis"]  # the variant is a plan `run` takes
        if crossed[i]:
            assert "180" in variant or f["anomaly"] > math.pi
        want = separate_run(variant)
        assert want is not None and priced.flown[i], priced.reason(i)
        for key in ("dv_m_s", "dv_with_margin_m_s", "propellant_kg", "final_mass_kg",
                    "elapsed_s"):
            assert priced.totals[key][i] == pytest.approx(want[key], rel=1e-9, abs=1e-9), key
    # the craft stands where it was drawn: the ellipse through the two radii drawn, with
    # the anomaly counted from the apsis drawn as the periapsis (a signed eccentricity,
    # e = (ra - rp) / (ra + rp), so the orbit equation and vis-viva hold across the swap)
    nu = math.radians(10.0 if "anomaly 10 deg" in text else 0.0)
    prog = model.program(X)
    r = np.linalg.norm(prog.start_r, axis=-1)
    v = np.linalg.norm(prog.start_v, axis=-1)
    rp, ra = X[:, 0] + RE, X[:, 1] + RE
    a, e = 0.5 * (rp + ra), (ra - rp) / (ra + rp)
    p = a * (1 - e * e)
    assert r == pytest.approx(p / (1 + e * np.cos(nu)), rel=1e-12)
    assert v == pytest.approx(np.sqrt(MU * (2 / r - 1 / a)), rel=1e-12)
    radial = np.einsum("ij,ij->i", prog.start_r, prog.start_v) / r
    assert radial == pytest.approx(np.sqrt(MU / p) * e * np.sin(nu), abs=1e-12)


def test_a_near_circular_dispersion_flies_every_sample(tmp_path, capsys):
    path = tmp_path / "near.aps"
    path.write_text(NEAR[1])
    assert main(["sweep", str(path), "--disperse", "start.periapsis=±5 km",
                 "--disperse", "start.apoapsis=±5 km", "--samples", "2000",
                 "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    assert doc["not_flown"] == 0


def test_a_grid_past_a_shared_bound_gives_rows_not_flown(tmp_path, capsys):
    """Both ends of a bi-elliptic transfer varied: the combinations with the intermediate
    apoapsis under the target are no plan (rows not flown, `run`'s reason); the rest
    equal separate runs of their plan text."""
    path = tmp_path / "p.aps"
    path.write_text(PLAN)
    assert main(["sweep", str(path), "--vary", "far.circular=42000..80000 km",
                 "--vary", "far.via=50000..120000 km", "--points", "4",
                 "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    for v in doc["variants"]:
        c, via = v["values"]["far.circular"], v["values"]["far.via"]
        text = PLAN.replace("circular 42000 km via apoapsis 90000 km",
                            f"circular {c!r} km via apoapsis {via!r} km")
        if via <= c:
            assert not v["flown"] and "must lie beyond the target" in v["reason"]
            assert f"far.via = {via!r} km" in v["reason"]
            continue
        want = separate_run(text)
        assert v["flown"]
        assert v["totals"]["dv_m_s"] == pytest.approx(want["dv_m_s"], rel=1e-9)
    assert doc["not_flown"] == sum(1 for v in doc["variants"]
                                   if v["values"]["far.via"] <= v["values"]["far.circular"])


def test_a_grid_of_crossed_start_apsides_gives_rows_not_flown(tmp_path, capsys):
    """A grid states plans: a variant with its periapsis above its apoapsis is the plan
    `run` refuses, so its row says so (a dispersion, which draws orbits, turns it)."""
    path = tmp_path / "p.aps"
    path.write_text(PLAN)
    assert main(["sweep", str(path), "--vary", "start.periapsis=350..450 km",
                 "--vary", "start.apoapsis=380..420 km", "--points", "3",
                 "--format", "json"]) == 0
    doc = strict_json(capsys.readouterr().out)
    for v in doc["variants"]:
        crossed = v["values"]["start.periapsis"] > v["values"]["start.apoapsis"]
        assert v["flown"] == (not crossed)
        if crossed:
            assert "the periapsis is above the apoapsis" in v["reason"]


def test_a_dispersion_that_does_not_fit_or_cannot_be_flown_says_so(tmp_path, capsys):
    """A script reading the CSV, and a reader of the table, learn the share of samples
    that cannot be flown (with why) and the share that does not fit the load."""
    import csv
    import io

    short = tmp_path / "short.aps"
    short.write_text(PLAN.replace("propellant 2600 kg", "propellant 1000 kg"))
    assert main(["sweep", str(short), "--disperse", "main.isp=±2 s", "--samples", "50"]) == 0
    assert "do not fit the load or miss the reserve: 100.00%" in capsys.readouterr().out
    main(["sweep", str(short), "--disperse", "main.isp=±2 s", "--samples", "50",
          "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    share = {r["quantity"]: r for r in rows if r["record"] == "share"}
    assert float(share["not_feasible_share"]["value"]) == 1.0
    assert float(share["not_flown_share"]["value"]) == 0.0
    path = tmp_path / "p.aps"
    path.write_text(PLAN)
    main(["sweep", str(path), "--disperse", "kick.apoapsis=±3000 km", "--samples", "40",
          "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    share = {r["quantity"]: r for r in rows if r["record"] == "share"}
    assert float(share["not_flown_share"]["value"]) == 1.0
    assert "circ:" in share["not_flown_share"]["message"]


def test_rows_past_one_bound_share_one_note_in_the_table(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "100")
    path = tmp_path / "p.aps"
    path.write_text(PLAN)
    main(["sweep", str(path), "--vary", "far.circular=42000..80000 km",
          "--vary", "far.via=50000..120000 km", "--points", "6"])
    out = capsys.readouterr().out
    notes = [line for line in out.splitlines() if "must lie beyond the target" in line]
    assert len(notes) == 1 and notes[0].startswith("[")
    assert max(len(line) for line in out.splitlines()) <= 100
