"""Every report names the approximation that priced the plan: a plan flown with finite
burns or drifting under J2 is not told it was priced impulsive point-mass."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from apsidal.compiler.budget import CAUTION, CAUTION_J2, caution
from apsidal.compiler.cli import main

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
PETREL = SAMPLES / "petrel-apogee-burns.aps"  # burns finite
TESSERA = SAMPLES / "tessera-drift.aps"  # gravity j2
RELAY = SAMPLES / "relay-geo.aps"  # impulsive, point-mass


def cli(capsys, *args) -> tuple[int, str]:
    code = main(list(args))
    return code, capsys.readouterr().out


def test_the_caution_names_each_model():
    assert caution() == CAUTION
    assert caution({"gravity": "j2"}) == CAUTION_J2
    finite = caution({"burns": "finite"})
    assert "constant thrust" in finite and "impulsive" not in finite
    both = caution({"burns": "finite"}, {"gravity": "j2"})  # a diff of two such plans
    assert "constant thrust" in both and "J2 drift" in both and "impulsive" not in both


@pytest.mark.parametrize("path, words", [
    (PETREL, ("constant thrust",)), (TESSERA, ("J2 drift",)), (RELAY, ("impulsive",))])
def test_run_check_and_csv_carry_the_plans_caution(capsys, path, words):
    _, out = cli(capsys, "run", str(path), "--format", "json")
    report = json.loads(out)
    assert all(w in report["caution"] for w in words)
    if path == PETREL:  # finite burns are not impulsive
        assert "impulsive" not in report["caution"]
    _, out = cli(capsys, "check", str(path), "--format", "json")
    assert json.loads(out)["caution"] == report["caution"]
    _, out = cli(capsys, "check", str(path), "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(out)))
    assert rows[-1]["record"] == "caution" and rows[-1]["message"] == report["caution"]


def test_a_diff_into_finite_burns_says_so(capsys, tmp_path):
    text = PETREL.read_text(encoding="utf-8")
    old = tmp_path / "old.aps"
    old.write_text(text.replace("burns finite", "burns impulsive"), encoding="utf-8")
    _, out = cli(capsys, "diff", str(old), str(PETREL), "--format", "json")
    assert "constant thrust" in json.loads(out)["caution"]
