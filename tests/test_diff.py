"""`apsidal diff`: budget changes between plan revisions, read from real git history.

Each revision below is committed in a temporary git repository and diffed against the
one before it.  Every test checks the diff against the `run` JSON report of each side:
an entry's old and new steps are the steps of those reports, and every change is the
difference of the two reports' numbers.  The plan is a scenario of our own.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from apsidal.compiler.cli import main
from apsidal.compiler.diff import diff_reports
from apsidal.compiler.review_cli import parse_threshold

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")

BASE = """\
# Kestrel-1, a fictional survey craft: a scenario of our own for the diff tests.
plan "Kestrel-1: parking orbit to survey orbit"

around earth

craft kestrel {
    dry 420 kg
    propellant 380 kg
    engine main isp 318 s thrust 420 N
    engine vernier isp 226 s thrust 18 N
}

margin 5 %
reserve 20 m/s

start circular 500 km inclination 51.6 deg

burn raise at periapsis: apoapsis to 1200 km
burn circ  at apoapsis:  circular
burn plane at node:      inclination to 53 deg
coast settle for 6 h
burn trim: along 1.2 m/s  using vernier
drop cover 3 kg
"""

ENGINES = ("    engine main isp 318 s thrust 420 N\n    engine vernier isp 226 s thrust 18 N\n")

# Each revision: (name, edit of the previous text).  Each edit must change the text.
REVISIONS = [
    ("altitude", lambda t: t.replace("apoapsis to 1200 km", "apoapsis to 1400 km")),
    ("added", lambda t: t.replace("drop cover", "burn boost: along 3 m/s  using vernier\n"
                                                "drop cover")),
    ("removed", lambda t: t.replace("burn plane at node:      inclination to 53 deg\n", "")),
    ("renamed", lambda t: t.replace("burn circ  at", "burn round at")),
    ("engines", lambda t: t.replace(ENGINES, "    engine vernier isp 226 s thrust 18 N\n"
                                             "    engine main isp 318 s thrust 420 N\n")),
    ("margin", lambda t: t.replace("margin 5 %", "margin 8 %")),
    ("moved", lambda t: t.replace("coast settle for 6 h\nburn trim: along 1.2 m/s  using "
                                  "vernier\n", "burn trim: along 1.2 m/s  using vernier\n"
                                               "coast settle for 6 h\n")),
]

GIT_ENV = {"GIT_AUTHOR_NAME": "Test", "GIT_AUTHOR_EMAIL": "test@example.invalid",
           "GIT_COMMITTER_NAME": "Test", "GIT_COMMITTER_EMAIL": "test@example.invalid",
           "GIT_CONFIG_NOSYSTEM": "1", "GIT_CONFIG_GLOBAL": os.devnull}


def git(repo: Path, *args: str) -> str:
    done = subprocess.run(["git", "-c", "commit.gpgsign=false", *args], cwd=repo,
                          env={**os.environ, **GIT_ENV}, capture_output=True, text=True,
                          check=True)
    return done.stdout


def commit(repo: Path, text: str, message: str, name: str = "plan.aps") -> str:
    (repo / name).write_text(text)
    git(repo, "add", name)
    git(repo, "commit", "-q", "-m", message)
    return git(repo, "rev-parse", "HEAD").strip()


@pytest.fixture(scope="module")
def history(tmp_path_factory):
    """A repository with one commit per revision; returns (repo, {name: (commit, text)})."""
    repo = tmp_path_factory.mktemp("repo")
    git(repo, "init", "-q")
    revs = {"base": (commit(repo, BASE, "base plan"), BASE)}
    text = BASE
    for name, edit in REVISIONS:
        new = edit(text)
        assert new != text, f"revision {name} changed nothing"
        revs[name] = (commit(repo, new, name), new)
        text = new
    return repo, revs


def cli(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def run_report(capsys, tmp_path: Path, text: str, name: str) -> dict:
    path = tmp_path / f"{name}.aps"
    path.write_text(text)
    code, out, err = cli(capsys, "run", path, "--format", "json")
    rep = json.loads(out)
    failed = not rep["totals"]["expectations_met"] or any(
        f["severity"] == "error" for f in rep["findings"])
    assert code == (1 if failed else 0), err  # run exits 1 for a failed expectation
    return rep


def rev_diff(capsys, history, old: str, new: str, *extra) -> dict:
    repo, revs = history
    code, out, err = cli(capsys, "diff", repo / "plan.aps", "--rev",
                         f"{revs[old][0]}..{revs[new][0]}", "--format", "json", *extra)
    assert code == 0, err
    return json.loads(out)


def by_name(report: dict) -> dict:
    return {s["name"]: s for s in report["steps"]}


def assert_matches_run_reports(diff: dict, old: dict, new: dict) -> None:
    """The diff is exactly the difference of the two `run` reports."""
    assert diff["old"] == old["totals"] and diff["new"] == new["totals"]
    for key, value in new["totals"].items():
        if not isinstance(value, int | float) or isinstance(value, bool) \
                or old["totals"].get(key) is None:
            continue
        assert diff["change"][key] == pytest.approx(value - old["totals"][key], abs=1e-6)
    old_steps, new_steps = by_name(old), by_name(new)
    for entry in diff["steps"]:
        before = entry["old"] and old_steps[entry["old"]["name"]]
        after = entry["new"] and new_steps[entry["new"]["name"]]
        assert entry["old"] == before and entry["new"] == after
        for key in ("dv_m_s", "dv_with_margin_m_s", "propellant_kg"):
            expect = (after[key] if after else 0.0) - (before[key] if before else 0.0)
            assert entry["change"][key] == pytest.approx(expect, abs=1e-6), (entry, key)
    covered_old = {e["old"]["name"] for e in diff["steps"] if e["old"]}
    covered_new = {e["new"]["name"] for e in diff["steps"] if e["new"]}
    assert covered_old == set(old_steps) and covered_new == set(new_steps)
    # every step's change adds up to the change of the totals
    for key in ("dv_m_s", "dv_with_margin_m_s", "propellant_kg"):
        total = sum(e["change"][key] for e in diff["steps"])
        assert total == pytest.approx(diff["change"][key], abs=1e-5)


def statuses(diff: dict) -> dict:
    return {e["name"]: e["status"] for e in diff["steps"]}


@pytest.fixture()
def reports(history, capsys, tmp_path):
    _, revs = history
    return {name: run_report(capsys, tmp_path, text, name) for name, (_, text) in revs.items()}


def test_changed_target_altitude(history, reports, capsys):
    d = rev_diff(capsys, history, "base", "altitude")
    assert_matches_run_reports(d, reports["base"], reports["altitude"])
    s = statuses(d)
    assert s["raise"] == s["circ"] == "changed" and s["settle"] == s["cover"] == "same"
    steps = {e["name"]: e for e in d["steps"]}
    assert steps["raise"]["change"]["dv_m_s"] > 40 and steps["circ"]["change"]["dv_m_s"] > 40
    assert d["change"]["dv_m_s"] > 0 and d["change"]["propellant_kg"] > 0


def test_a_step_added(history, reports, capsys):
    d = rev_diff(capsys, history, "altitude", "added")
    assert_matches_run_reports(d, reports["altitude"], reports["added"])
    s = statuses(d)
    assert s["boost"] == "added" and list(s).index("boost") == list(s).index("trim") + 1
    assert all(v == "same" for k, v in s.items() if k != "boost")
    boost = next(e for e in d["steps"] if e["name"] == "boost")
    assert boost["old"] is None and boost["change"]["dv_m_s"] == pytest.approx(3.0, abs=1e-6)


def test_a_step_removed(history, reports, capsys):
    d = rev_diff(capsys, history, "added", "removed")
    assert_matches_run_reports(d, reports["added"], reports["removed"])
    s = statuses(d)
    assert s["plane"] == "removed" and list(s)[:4] == ["raise", "circ", "plane", "settle"]
    plane = next(e for e in d["steps"] if e["name"] == "plane")
    assert plane["new"] is None and plane["change"]["dv_m_s"] < -100
    assert d["change"]["dv_m_s"] < -100


def test_a_step_renamed(history, reports, capsys):
    d = rev_diff(capsys, history, "removed", "renamed")
    assert_matches_run_reports(d, reports["removed"], reports["renamed"])
    entry = next(e for e in d["steps"] if e["name"] == "round")
    assert entry["renamed_from"] == "circ" and entry["matched_by"] == "signature"
    assert all(e["status"] == "same" for e in d["steps"])
    assert all(v == 0 for k, v in d["change"].items() if not isinstance(v, bool | None))


def test_engines_swapped(history, reports, capsys):
    d = rev_diff(capsys, history, "renamed", "engines")
    assert_matches_run_reports(d, reports["renamed"], reports["engines"])
    steps = {e["name"]: e for e in d["steps"]}
    for name in ("raise", "round"):
        e = steps[name]
        assert e["status"] == "changed"
        assert (e["old"]["engine"], e["new"]["engine"]) == ("main", "vernier")
        assert e["change"]["dv_m_s"] == pytest.approx(0, abs=1e-6)
        assert e["change"]["propellant_kg"] > 1  # a lower specific impulse burns more
    assert steps["trim"]["old"]["engine"] == steps["trim"]["new"]["engine"] == "vernier"
    assert d["change"]["dv_m_s"] == pytest.approx(0, abs=1e-6)
    assert d["change"]["propellant_kg"] > 0


def test_margin_changed(history, reports, capsys):
    d = rev_diff(capsys, history, "engines", "margin")
    assert_matches_run_reports(d, reports["engines"], reports["margin"])
    for e in d["steps"]:
        if e["new"]["kind"] == "burn":
            assert e["status"] == "changed"
            assert e["change"]["margin_pct"] == pytest.approx(3.0)
            assert e["change"]["dv_m_s"] == pytest.approx(0, abs=1e-6)
            assert e["change"]["dv_with_margin_m_s"] > 0
    assert d["change"]["dv_with_margin_m_s"] == pytest.approx(
        0.03 * reports["margin"]["totals"]["dv_m_s"], rel=1e-6)


def test_a_step_moved(history, reports, capsys):
    d = rev_diff(capsys, history, "margin", "moved")
    assert_matches_run_reports(d, reports["margin"], reports["moved"])
    s = statuses(d)
    assert [k for k, v in s.items() if v == "moved"] in (["trim"], ["settle"])
    assert list(s).index("trim") < list(s).index("settle")


def test_two_plan_files_and_the_working_tree(history, capsys, tmp_path):
    repo, revs = history
    old = tmp_path / "old.aps"
    old.write_text(revs["base"][1])
    code, out, _ = cli(capsys, "diff", old, repo / "plan.aps", "--format", "json",
                       "--no-findings")
    assert code == 0
    by_files = json.loads(out)
    by_git = rev_diff(capsys, history, "base", "moved", "--no-findings")
    assert by_files["change"] == by_git["change"]
    code, out, _ = cli(capsys, "diff", repo / "plan.aps", "--format", "json", "--no-findings")
    assert code == 0  # one plan, no --rev: against HEAD, here the same text
    assert all(e["status"] == "same" for e in json.loads(out)["steps"])


# --- unnamed steps, matched by text and by position ----------------------------------

SCENE = """\
around earth
craft c {
    dry 300 kg
    propellant 400 kg
    engine main isp 300 s thrust 400 N
}
start circular 400 km
"""


def file_diff(capsys, tmp_path, old_steps: str, new_steps: str) -> dict:
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(SCENE + old_steps)
    new.write_text(SCENE + new_steps)
    code, out, err = cli(capsys, "diff", old, new, "--format", "json", "--no-findings")
    assert code == 0, err
    return json.loads(out)


def test_unnamed_steps_that_shift_are_matched_by_their_text(capsys, tmp_path):
    d = file_diff(capsys, tmp_path,
                  "burn at periapsis: apoapsis to 900 km\nburn at apoapsis: circular\n",
                  "burn: along 1 m/s\nburn at periapsis: apoapsis to 900 km\n"
                  "burn at apoapsis: circular\n")
    got = [(e["status"], e["old"] and e["old"]["name"], e["new"] and e["new"]["name"])
           for e in d["steps"]]
    assert got[0] == ("added", None, "burn-1")
    assert [g[1:] for g in got[1:]] == [("burn-1", "burn-2"), ("burn-2", "burn-3")]
    assert not any("renamed_from" in e for e in d["steps"])


def test_unnamed_steps_that_change_are_matched_by_position(capsys, tmp_path):
    d = file_diff(capsys, tmp_path,
                  "burn at periapsis: apoapsis to 900 km\nburn at apoapsis: circular\n",
                  "burn at periapsis: apoapsis to 1100 km\nburn at apoapsis: circular\n")
    first = d["steps"][0]
    assert (first["status"], first["matched_by"]) == ("changed", "position")
    assert first["change"]["dv_m_s"] > 0 and len(d["steps"]) == 2


def test_named_steps_with_new_text_are_not_guessed_renames(capsys, tmp_path):
    d = file_diff(capsys, tmp_path, "burn up at periapsis: apoapsis to 900 km\n",
                  "burn lift at periapsis: apoapsis to 1100 km\n")
    assert statuses(d) == {"up": "removed", "lift": "added"}


def test_transfer_burns_are_matched_as_name_slash_k(capsys, tmp_path):
    d = file_diff(capsys, tmp_path, "transfer geo: circular 2000 km\n",
                  "transfer geo: circular 2000 km via apoapsis 3000 km\n")
    assert statuses(d) == {"geo/1": "changed", "geo/2": "changed", "geo/3": "added"}


# --- findings ------------------------------------------------------------------------


def test_findings_that_appear_and_disappear(capsys, tmp_path):
    old = tmp_path / "old.aps"
    new = tmp_path / "new.aps"
    old.write_text(BASE)
    new.write_text(BASE.replace("burn circ  at apoapsis:  circular\n"
                                "burn plane at node:      inclination to 53 deg\n",
                                "burn circ at apoapsis: circular, inclination to 53 deg\n")
                   + "expect high apoapsis 5000 km within 1 km\n")
    code, out, err = cli(capsys, "diff", old, new, "--format", "json")
    assert code == 0, err
    found = json.loads(out)["findings"]
    assert ("plane-change-at-speed", ["plane"]) in [(f["rule"], f["steps"])
                                                    for f in found["disappeared"]]
    assert ("expectation-not-met", ["high"]) in [(f["rule"], f["steps"])
                                                 for f in found["appeared"]]
    code, out, _ = cli(capsys, "diff", old, new, "--format", "markdown")
    assert "**Findings**" in out and "- appeared: " in out and "- disappeared: " in out


def test_no_findings_skips_the_rules(capsys, tmp_path):
    old = tmp_path / "old.aps"
    old.write_text(BASE)
    code, out, _ = cli(capsys, "diff", old, old, "--format", "json", "--no-findings")
    assert code == 0 and "findings" not in json.loads(out)


# --- the formats ---------------------------------------------------------------------


def test_markdown_is_a_review_comment(history, capsys):
    repo, revs = history
    code, out, _ = cli(capsys, "diff", repo / "plan.aps", "--rev",
                       f"{revs['base'][0]}..{revs['altitude'][0]}", "--format", "markdown",
                       "--no-findings")
    assert code == 0
    first = out.splitlines()[0]
    assert first.startswith("**Delta-v budget: +") and "m/s delta-v with margin, +" in first
    assert "kg propellant**" in first
    assert "| changed | burn `raise` | periapsis |" in out
    assert "| settle" not in out and "other steps unchanged." in out
    assert "| delta-v with margin |" in out and "| elapsed |" in out
    assert "impulsive two-body approximation" in out


def test_table_for_the_terminal(history, capsys):
    repo, revs = history
    code, out, _ = cli(capsys, "diff", repo / "plan.aps", "--rev",
                       f"{revs['removed'][0]}..{revs['renamed'][0]}", "--no-findings")
    assert code == 0
    assert "no change to delta-v or propellant" in out and "round (was circ)" in out


def test_json_contract(history, capsys):
    d = rev_diff(capsys, history, "base", "altitude")
    assert set(d) >= {"old", "new", "change", "steps"}
    assert set(d["change"]) == set(d["old"]) == set(d["new"])
    assert {"dv_m_s", "dv_with_margin_m_s", "propellant_kg", "final_mass_kg",
            "propellant_left_kg", "dv_capacity_left_m_s", "elapsed_s"} <= set(d["change"])
    for e in d["steps"]:
        assert {"name", "status", "old", "new"} <= set(e)
        assert e["status"] in ("added", "removed", "changed", "moved", "same")


# --- thresholds ----------------------------------------------------------------------


@pytest.mark.parametrize("words", [["10m/s"], ["10", "m/s"], ["0.01km/s"], ["10 m/s"]])
def test_fail_over_speed_with_or_without_a_space(history, capsys, words):
    repo, revs = history
    args = ["diff", repo / "plan.aps", "--rev", f"{revs['base'][0]}..{revs['altitude'][0]}",
            "--no-findings", "--format", "json"]
    code, out, err = cli(capsys, *args, "--fail-over", *words)
    grew = json.loads(out)["change"]["dv_with_margin_m_s"]
    assert grew > 10 and code == 1 and "grew past --fail-over" in err
    code, _, _ = cli(capsys, *args[:-2], "--fail-over", "1000", "m/s")
    assert code == 0


def test_fail_over_mass_before_the_plan_files(capsys, tmp_path):
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(BASE)
    new.write_text(BASE.replace("margin 5 %", "margin 8 %"))
    code, _, err = cli(capsys, "diff", "--fail-over", "2", "kg", old, new, "--no-findings")
    assert code == 1 and "kg propellant" in err
    code, _, _ = cli(capsys, "diff", "--fail-over", "2t", old, new, "--no-findings")
    assert code == 0
    code, _, _ = cli(capsys, "diff", "--fail-over", "2kg", new, old, "--no-findings")
    assert code == 0  # the budget shrank


def test_threshold_parsing():
    assert parse_threshold("10m/s").limit == pytest.approx(10.0)
    assert parse_threshold("2 kg").key == "propellant_kg"



def test_fail_over_after_the_plans_takes_one_amount(capsys, tmp_path):
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(BASE)
    new.write_text(BASE.replace("margin 5 %", "margin 8 %"))
    code, _, err = cli(capsys, "diff", old, new, "--no-findings", "--fail-over", "2kg",
                       "--fail-over", "20", "m/s")
    assert code == 1 and "kg propellant" in err
    with pytest.raises(SystemExit) as stop:  # argparse's own exit, worded by us
        cli(capsys, "diff", old, new, "--no-findings", "--fail-over", "5kg", "20m/s")
    err = capsys.readouterr().err
    assert stop.value.code == 2 and err.startswith("usage: apsidal diff")
    assert "unrecognized arguments: 20m/s" in err and "its own option" in err


@pytest.mark.parametrize("words", [["10"], ["10", "s"], ["fast"], ["10", "km"]])
def test_bad_thresholds_are_usage_errors(capsys, tmp_path, words):
    old = tmp_path / "old.aps"
    old.write_text(BASE)
    code, _, err = cli(capsys, "diff", old, old, "--no-findings", "--fail-over", *words)
    assert code == 2 and "--fail-over takes a speed or a mass" in err


# --- errors --------------------------------------------------------------------------


def test_a_revision_that_does_not_exist(history, capsys):
    repo, _ = history
    code, _, err = cli(capsys, "diff", repo / "plan.aps", "--rev", "no-such-rev")
    assert code == 2 and "revision `no-such-rev` does not exist" in err
    assert "Traceback" not in err


def test_a_file_absent_at_that_revision(history, capsys):
    repo, revs = history
    (repo / "other.aps").write_text(BASE)
    try:
        code, _, err = cli(capsys, "diff", repo / "other.aps", "--rev", revs["base"][0])
    finally:
        (repo / "other.aps").unlink()
    assert code == 2 and "`other.aps` does not exist at revision" in err
    assert "plans at that revision: plan.aps" in err


def test_not_a_git_repository(capsys, tmp_path):
    plan = tmp_path / "plan.aps"
    plan.write_text(BASE)
    code, _, err = cli(capsys, "diff", plan, "--rev", "HEAD")
    assert code == 2 and "not inside a git repository" in err


def test_a_bad_range(history, capsys):
    repo, _ = history
    code, _, err = cli(capsys, "diff", repo / "plan.aps", "--rev", "HEAD~1...HEAD")
    assert code == 2 and "two dots" in err
    code, _, err = cli(capsys, "diff", repo / "plan.aps", "--rev", "HEAD..")
    assert code == 2 and "both ends" in err


def test_usage_mistakes(capsys, tmp_path):
    plan = tmp_path / "p.aps"
    plan.write_text(BASE)
    assert cli(capsys, "diff", plan, plan, "--rev", "HEAD")[0] == 2
    code, _, err = cli(capsys, "diff", plan, plan, plan)
    assert code == 2 and "got 3 plans" in err


def test_a_side_that_does_not_parse_still_shows_the_other(tmp_path_factory, capsys):
    repo = tmp_path_factory.mktemp("broken")
    git(repo, "init", "-q")
    good = commit(repo, BASE, "good")
    bad = commit(repo, BASE.replace("apoapsis to 1200 km", "apoapsis 1200 km"), "typo")
    plan = repo / "plan.aps"
    code, out, err = cli(capsys, "diff", plan, "--rev", f"{good}..{bad}", "--no-findings")
    assert code == 2
    assert f"plan.aps@{bad}:18:" in err and "needs `to`" in err and "Traceback" not in err
    assert "raise" in out and "Delta-v budget" in out  # the good side's budget
    code, out, _ = cli(capsys, "diff", plan, "--rev", f"{good}..{bad}", "--format", "json",
                       "--no-findings")
    d = json.loads(out)
    assert code == 2 and d["error"]["side"] == "new" and d["new"] is None
    assert d["old"]["dv_m_s"] > 0 and {e["status"] for e in d["steps"]} == {"removed"}
    code, out, _ = cli(capsys, "diff", plan, "--rev", f"{bad}..{good}", "--format", "markdown",
                       "--no-findings")
    assert code == 2 and out.startswith("**The old plan (") and "| `raise` | burn |" in out


def test_a_new_side_that_no_longer_fits_says_so_and_exits_1(capsys, tmp_path):
    old, new = tmp_path / "old.aps", tmp_path / "new.aps"
    old.write_text(BASE)
    new.write_text(BASE.replace("propellant 380 kg", "propellant 60 kg"))
    code, out, err = cli(capsys, "diff", old, new, "--format", "json", "--no-findings")
    assert code == 1 and "no longer fits" in err
    d = json.loads(out)
    assert d["feasible"] == {"old": True, "new": False}
    assert d["change"]["dv_m_s"] == 0  # the same delta-v: a shortfall is never a saving
    assert d["new"]["shortfall_kg"] > 0
    code, out, _ = cli(capsys, "diff", old, new, "--format", "markdown", "--no-findings")
    assert f"no longer fits: needs {d['new']['shortfall_kg']:,.2f} kg more" in out


# --- git integration -----------------------------------------------------------------


def test_git_diff_shows_the_budget_through_textconv(tmp_path_factory):
    repo = tmp_path_factory.mktemp("textconv")
    git(repo, "init", "-q")
    (repo / ".gitattributes").write_text("*.aps diff=apsidal\n")
    git(repo, "add", ".gitattributes")
    commit(repo, BASE, "base")
    commit(repo, BASE.replace("apoapsis to 1200 km", "apoapsis to 1400 km"), "higher")
    commit(repo, BASE.replace("apoapsis to 1200 km", "apoapsis 1400 km"), "broken")
    command = f'"{sys.executable}" -m apsidal.compiler.cli diff --git-textconv'
    shown = git(repo, "-c", f"diff.apsidal.textconv={command}", "diff", "HEAD~2", "HEAD~1")
    assert "-burn raise at periapsis: apoapsis to 1200 km" in shown  # the text itself
    assert "-# burn raise (periapsis): 182." in shown
    assert "-# total delta-v: 538.3 m/s" in shown and "+# total delta-v: 6" in shown
    broken = git(repo, "-c", f"diff.apsidal.textconv={command}", "diff", "HEAD~1", "HEAD")
    assert "+# ---- budget computed by apsidal: not available" in broken


def test_textconv_of_a_plan_that_cannot_be_read(capsys, tmp_path):
    code, _, err = cli(capsys, "diff", "--git-textconv", tmp_path / "missing.aps")
    assert code == 2 and "cannot read" in err


# --- the core on plain data ----------------------------------------------------------


def test_diff_of_a_report_with_itself_is_all_same(capsys, tmp_path):
    report = run_report(capsys, tmp_path, BASE, "base")
    d = diff_reports(report, report)
    assert {e["status"] for e in d["steps"]} == {"same"}
    assert all(v in (0, None) for v in d["change"].values())
