"""Every mistake a `trade` statement can hold is located in the plan: file:line:col, the
line, a caret under the item, and a hint worded for the plan (`tolerance`, not the
command line's `--tolerance`), exit 2."""

from __future__ import annotations

import pytest
from apsidal.compiler.cli import main
from test_sweep import PLAN

ROW = PLAN.count("\n") + 1
HYPERBOLIC = PLAN.replace("start orbit periapsis 350 km apoapsis 420 km inclination 28.5 deg "
                          "raan 40 deg argp 30 deg anomaly 10 deg",
                          "start orbit periapsis 350 km vinf 3 km/s inclination 28.5 deg")
STATISTICAL = PLAN.replace("allow trims 40 m/s", "allow trims 40 m/s statistical")

# (plan, the statement, where the caret stands, words the message and hint hold)
CASES = [
    (PLAN, "trade t:", None, ["unexpected end of line", "vary NAME.FIELD LOW..HIGH UNIT",
                              "disperse NAME.FIELD SIGMA UNIT"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km,", None, ["a trade item: `vary"]),
    (PLAN, "trade t: 5", "5", ["a trade item"]),
    (PLAN, "trade t: vari geo.circular 1..2 km", "vari", ["no item `vari`", "`vary`"]),
    (PLAN, "trade t: vary 1..2 km", "vary", ["needs the quantity as NAME.FIELD"]),
    (PLAN, "trade t: vary geo.circular 5 km", "vary", ["needs a range LOW..HIGH"]),
    (PLAN, "trade t: disperse start.periapsis 1..2 km", "disperse",
     ["needs a 1-sigma figure"]),
    (PLAN, "trade t: vary geo.circular 1..2 kms", "kms", ["unknown unit `kms`"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km points 2.5", "2.5",
     ["takes a whole number"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km 5", "5", ["unexpected `5`"]),
    (PLAN, "trade t: vary geo.circular 3e4..2e4 km", "3e4", ["is empty"]),
    (PLAN, ("trade t: vary geo.circular 2e4..3e4 km points 3, vary main.isp 300..310 s "
     "points 4"), "4", ["the same number of points", "points 3"]),
    (PLAN, "trade t: disperse start.periapsis 0 km", "0", ["must be positive"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, minimise mass", "minimise",
     ["`minimise` takes"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, tolerance km, minimise dv", "tolerance",
     ["`tolerance` takes an amount"]),
    (PLAN, "trade t: disperse main.isp 1 s, samples 1", "1", ["at least 2"]),
    (PLAN, "trade t: disperse main.isp 1 s, seed x", "seed", ["takes a whole number"]),
    (PLAN, "trade t: minimise propellant", "trade", ["neither varies nor disperses"]),
    (PLAN, "trade t: vary gep.circular 1..2 km", "gep.", ["no step", "`geo`"]),
    (PLAN, "trade t: vary geo.circulr 1..2 km", "geo.", ["no quantity `circulr`"]),
    (STATISTICAL, "trade t: vary trims.dv 30..50 m/s", "trims.", ["statistical line"]),
    (PLAN, "trade t: vary geo.circular 20000..30000 s", "geo.", ["is a length"]),
    (PLAN, "trade t: vary geo.circular 20000..30000", "geo.", ["need a unit", "35786 km"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, vary geo.circular 3e4..4e4 km",
     "geo.circular 3e4", ["named twice"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, disperse main.isp 1 s", "trade",
     ["not both"]),
    # the items of a search, placed where they mean nothing, or wrong
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, tolerance 3 s, minimise dv",
     "tolerance", ["tolerance is in `s`, the range in `km`", "give it in `km`"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, tolerance 0 km, minimise dv",
     "tolerance", ["tolerance must be positive"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, tolerance 3 km", "tolerance",
     ["does not minimise", "add `minimise"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, tolerance 3 km km, minimise dv",
     "km, m", ["unexpected `km` in `tolerance`"]),
    (PLAN, "trade t: disperse main.isp 1 s, minimise dv", "minimise",
     ["minimise goes with `vary`"]),
    (PLAN, "trade t: disperse main.isp 1 s, points 5", "points", ["points goes with `vary`"]),
    (PLAN, "trade t: vary main.isp 300..310 s, seed 3", "seed",
     ["seed goes with `disperse`"]),
    (PLAN, "trade t: vary geo.circular 2e4..3e4 km, vary main.isp 300..310 s, minimise dv",
     "minimise", ["minimise searches one quantity; the trade varies 2"]),
    # what the plan's quantities cannot do over the range
    (PLAN.replace("burn kick at apoapsis: apoapsis to 40000 km",
                  "burn kick at apoapsis: sma to 30000 km"),
     "trade t: vary kick.sma 25000..35000 km", "trade", ["non-linearly"]),
    (HYPERBOLIC, "trade t: vary start.periapsis 300..400 km", "trade",
     ["start of a closed orbit"]),
    (PLAN, "trade t: vary geo.circular -6000..-5000 km, minimise dv", "trade",
     ["no value of `geo.circular`", "can be flown"]),
]


@pytest.mark.parametrize("plan, line, at, words", CASES,
                         ids=[c[1][9:40] for c in CASES])
def test_every_mistake_in_a_trade_statement_is_located(tmp_path, capsys, plan, line, at,
                                                        words):
    col = (line.rindex(at) if at is not None else len(line)) + 1
    path = tmp_path / "p.aps"
    path.write_text(plan + line + "\n")
    assert main(["sweep", str(path)]) == 2
    err = capsys.readouterr().err
    row = plan.count("\n") + 1
    assert err.startswith(f"{path}:{row}:{col}: error:"), err
    assert f"{row} | {line}" in err and "^" in err and "Traceback" not in err
    assert "--" not in err.split("\n")[0]  # worded for the plan, not the command line
    for w in words:
        assert w in err, err
