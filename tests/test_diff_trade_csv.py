"""`apsidal diff --format csv` carries the trade studies a revision changed, as JSON,
the table and Markdown do: strict CSV, the same columns on every record."""

from __future__ import annotations

import csv
import io

from apsidal.compiler.cli import main
from strictjson import strict_json
from test_sweep import PLAN

OLD = PLAN + ("trade size: vary geo.circular 20000..40000 km points 3\n"
              "trade gone: vary main.isp 300..320 s\n")
NEW = PLAN + ("trade size: vary geo.circular 20000..40000 km points 5\n"
              "trade launch: disperse start.periapsis 5 km, samples 400\n")


def test_diff_csv_carries_trade_changes_like_json(tmp_path, capsys):
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(OLD)
    new.write_text(NEW)
    main(["diff", str(old), str(new), "--format", "json"])
    trades = strict_json(capsys.readouterr().out)["trades"]
    main(["diff", str(old), str(new), "--format", "csv"])
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out), strict=True))
    head, body = rows[0], rows[1:]
    assert all(len(r) == len(head) for r in body)
    got = [dict(zip(head, r)) for r in body if r[0] == "trade"]
    assert [(g["name"], g["status"]) for g in got] == [(t["name"], t["status"])
                                                       for t in trades]
    assert {g["name"]: g["status"] for g in got} == {"size": "changed", "gone": "removed",
                                                     "launch": "added"}
    for g, t in zip(got, trades):
        assert g["quantity"] == "text"
        assert g["old"] == (t["old"] or "") and g["new"] == (t["new"] or "")
    assert got[0]["new"] == "trade size: vary geo.circular 20000..40000 km points 5"
