"""`apsidal check` as a script uses it: every plan named gets an entry, files are written
only where they can be and never over the plan, standard input, CSV a strict reader
loads."""

from __future__ import annotations

import csv
import io
import json
import subprocess
import sys

import pytest
from apsidal.compiler import cli
from test_check import LOW_PLANE_FIRST, plan

BROKEN = plan("start circular 400 km\nburn raise apoapsis to 1000 km\n")


def write(tmp_path, text, name):
    path = tmp_path / name
    path.write_text(text)
    return str(path)


def test_json_names_every_plan_with_its_error(tmp_path, capsys):
    good, bad = write(tmp_path, LOW_PLANE_FIRST, "a.aps"), write(tmp_path, BROKEN, "b.aps")
    code = cli.main(["check", "--format", "json", good, bad])
    out = json.loads(capsys.readouterr().out)
    assert code == 2
    assert [p["source"] for p in out["plans"]] == [good, bad]
    assert "error" not in out["plans"][0] and out["plans"][0]["findings"]
    err = out["plans"][1]["error"]
    assert err["line"] == 9 and err["message"] and out["plans"][1]["findings"] == []


@pytest.mark.parametrize("fmt", ["table", "markdown"])
def test_text_formats_name_the_plan_that_failed(tmp_path, capsys, fmt):
    bad = write(tmp_path, BROKEN, "b.aps")
    assert cli.main(["check", "--format", fmt, bad]) == 2
    assert "not checked" in capsys.readouterr().out


def test_csv_loads_in_a_strict_reader(tmp_path, capsys):
    good, bad = write(tmp_path, LOW_PLANE_FIRST, "a.aps"), write(tmp_path, BROKEN, "b.aps")
    cli.main(["check", "--format", "csv", good, bad])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out), strict=True))
    kinds = [r["record"] for r in rows]
    assert "finding" in kinds and kinds.count("error") == 1 and kinds[-1] == "caution"
    assert all(None not in r for r in rows)  # no row longer than the header
    saving = next(r for r in rows if r["rule"] == "cheaper-order")
    assert float(saving["saves_m_s"]) > 0


def test_write_suggestion_into_a_missing_folder_is_a_usage_error(tmp_path, capsys):
    path = write(tmp_path, LOW_PLANE_FIRST, "a.aps")
    code = cli.main(["check", path, "--write-suggestion", str(tmp_path / "no" / "x.aps")])
    err = capsys.readouterr().err
    assert code == 2 and "does not exist" in err and "internal error" not in err


def test_write_suggestion_refuses_the_plan_itself(tmp_path, capsys):
    path = write(tmp_path, LOW_PLANE_FIRST, "a.aps")
    code = cli.main(["check", path, "--write-suggestion", path])
    assert code == 2 and "is the plan being checked" in capsys.readouterr().err
    assert (tmp_path / "a.aps").read_text() == LOW_PLANE_FIRST


def test_write_suggestion_writes_elsewhere(tmp_path, capsys):
    path = write(tmp_path, LOW_PLANE_FIRST, "a.aps")
    out = tmp_path / "better.aps"
    cli.main(["check", path, "--write-suggestion", str(out)])
    assert out.exists() and out.read_text() != LOW_PLANE_FIRST


def run_program(*args, stdin=None):
    return subprocess.run([sys.executable, "-m", "apsidal.compiler.cli", *args], input=stdin,
                          capture_output=True, text=True, check=False)


def test_run_and_check_read_standard_input():
    done = run_program("run", "-", "--format", "json", stdin=LOW_PLANE_FIRST)
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["source"] == "<stdin>"
    done = run_program("check", "-", "--format", "json", stdin=LOW_PLANE_FIRST)
    assert json.loads(done.stdout)["plans"][0]["source"] == "<stdin>"


def test_min_saving_with_a_space(tmp_path, capsys):
    path = write(tmp_path, LOW_PLANE_FIRST, "a.aps")
    assert cli.main(["check", path, "--min-saving", "100000", "m/s", "--format", "json"]) == 0
    found = json.loads(capsys.readouterr().out)["plans"][0]["findings"]
    assert all(f["saves_m_s"] is None for f in found)  # every saving is below 100 km/s
    with pytest.raises(SystemExit) as stop:
        cli.main(["check", path, "--fail-on", "loud"])
    err = capsys.readouterr().err
    assert stop.value.code == 2 and err.startswith("usage: apsidal check")
    assert "apsidal check: error:" in err


def test_bare_program_prints_help_and_version():
    done = run_program()
    assert done.returncode == 0 and "usage: apsidal" in done.stdout and "run" in done.stdout
    done = run_program("--version")
    assert done.returncode == 0 and done.stdout.startswith("apsidal ")


@pytest.mark.parametrize("fmt", ["json", "table"])
def test_closed_pipe_keeps_the_exit_code(tmp_path, fmt):
    # far more output than a pipe holds, and a reader that stops after ten bytes: the
    # command still exits with its own code (0 here; 1 would mean findings) and says
    # nothing about the pipe
    from test_screens import long_plan

    path = write(tmp_path, long_plan(400), "long.aps")
    script = (f"{sys.executable} -m apsidal.compiler.cli run {path} --format {fmt} "
              "| head -c 10 >/dev/null; echo ${PIPESTATUS[0]}")
    done = subprocess.run(["bash", "-c", script], capture_output=True, text=True, check=False)
    assert done.stdout.strip() == "0", done.stderr
    assert done.stderr == ""
