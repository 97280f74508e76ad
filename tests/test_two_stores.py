"""A craft that loads fuel and oxidiser apart, out of its burns' ratio: what to add is
the store that limits it, topped up with the other as carried, and that amount is
exactly what makes the plan fit (scenario of our own)."""

from __future__ import annotations

import json

import pytest
from apsidal.compiler.cli import main
from test_sweep import PLAN_C as PLAN  # the plan the sweep property test trades


def priced(tmp_path, capsys, fuel: float, ox: float) -> tuple[int, dict]:
    path = tmp_path / "duo.aps"
    path.write_text(PLAN.replace("fuel 700 kg", f"fuel {fuel!r} kg")
                    .replace("oxidiser 1100 kg", f"oxidiser {ox!r} kg"))
    code = main(["run", str(path), "--format", "json"])
    return code, json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("fuel, ox, store", [(300.0, 1100.0, "fuel"),
                                             (500.0, 420.0, "oxidiser")])
def test_the_limiting_store_topped_up_is_what_fits(tmp_path, capsys, fuel, ox, store):
    code, doc = priced(tmp_path, capsys, fuel, ox)
    tot = doc["totals"]
    assert code == 1 and not doc["feasible"]
    assert tot["topped_up_store"] == store
    add = tot[f"{store}_shortfall_kg"]
    assert add > 0 and tot["shortfall_kg"] == pytest.approx(add)
    other = "oxidiser" if store == "fuel" else "fuel"
    assert tot[f"{other}_shortfall_kg"] == 0.0
    message = next(f["message"] for f in doc["findings"] if f["rule"] == "propellant-exhausted")
    assert f"add {add:,.3f} kg of {store}" in message
    # the amount said is the amount that fits: a gram less does not
    more = (fuel + add + 1e-3, ox) if store == "fuel" else (fuel, ox + add + 1e-3)
    less = (fuel + add - 1e-3, ox) if store == "fuel" else (fuel, ox + add - 1e-3)
    assert priced(tmp_path, capsys, *more)[1]["feasible"]
    assert not priced(tmp_path, capsys, *less)[1]["feasible"]


def test_a_craft_in_ratio_keeps_the_split_of_the_least_load(tmp_path, capsys):
    """Both stores short in proportion: the split of the least load says what to add."""
    code, doc = priced(tmp_path, capsys, 200.0, 330.0)
    tot = doc["totals"]
    assert code == 1 and "topped_up_store" not in tot
    assert tot["fuel_shortfall_kg"] > 0 and tot["oxidiser_shortfall_kg"] > 0
