"""The project's `.pre-commit-hooks.yaml`, run by the pre-commit framework itself on a
throwaway repository: a plan with an error finding fails `apsidal-check`, a plan out of
the canonical layout fails `apsidal-fmt`, a clean plan passes both.

pre-commit installs the hooks' environment (apsidal and its dependencies) with pip; where
that install fails for want of a package index the test skips and says so.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

CLEAN = """plan "Hook test"

around earth

craft probe {
    dry 500 kg
    propellant 300 kg
    engine main isp 300 s thrust 400 N
}

start circular 400 km

burn raise at periapsis: apoapsis to 1000 km
burn circ  at apoapsis:  circular
expect high circular 1000 km within 1 km
"""
# the same plan expecting an orbit it does not reach: an error finding
MISSED = CLEAN.replace("expect high circular 1000 km", "expect high circular 1200 km")
# the same plan laid out by hand: not canonical
SCRUFFY = CLEAN.replace("start circular 400 km", "start   circular 400 km")


def git(cwd: Path, *args: str) -> str:
    env = {**os.environ, "GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.org",
           "GIT_COMMITTER_NAME": "t", "GIT_COMMITTER_EMAIL": "t@example.org"}
    return subprocess.run(["git", *args], cwd=cwd, check=True, capture_output=True,
                          text=True, env=env).stdout.strip()


@pytest.fixture(scope="module")
def hooks_repo(tmp_path_factory) -> tuple[Path, str]:
    """This checkout as it stands (tracked and new files), committed in a repository of
    its own: pre-commit reads a hook repository at a revision."""
    if shutil.which("git") is None:
        pytest.skip("git is not installed")
    repo = tmp_path_factory.mktemp("hooks")
    listed = subprocess.run(["git", "ls-files", "-co", "--exclude-standard"], cwd=ROOT,
                            capture_output=True, text=True, check=False)
    files = (listed.stdout.split("\n") if listed.returncode == 0 else
             [str(p.relative_to(ROOT)) for p in ROOT.rglob("*") if p.is_file()
              and ".venv" not in p.parts and ".git" not in p.parts])
    for name in filter(None, files):
        src = ROOT / name
        if src.is_file():
            (repo / name).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, repo / name)
    git(repo, "init", "-q")
    git(repo, "add", "-A")
    git(repo, "commit", "-qm", "hooks")
    return repo, git(repo, "rev-parse", "HEAD")


@pytest.fixture(scope="module")
def home(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("pre-commit-home")


def pre_commit(work: Path, home: Path, *files: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "PRE_COMMIT_HOME": str(home), "PRE_COMMIT_COLOR": "never"}
    return subprocess.run([sys.executable, "-m", "pre_commit", "run", "--files", *files],
                          cwd=work, capture_output=True, text=True, env=env, timeout=900,
                          check=False)


def throwaway(tmp_path: Path, hooks: tuple[Path, str], plans: dict[str, str]) -> Path:
    repo, rev = hooks
    work = tmp_path / "work"
    work.mkdir()
    git(work, "init", "-q")
    (work / ".pre-commit-config.yaml").write_text(
        f"repos:\n  - repo: {repo}\n    rev: {rev}\n    hooks:\n"
        "      - id: apsidal-check\n      - id: apsidal-fmt\n")
    for name, text in plans.items():
        (work / name).write_text(text)
    git(work, "add", "-A")
    return work


def outcome(result: subprocess.CompletedProcess, hook: str) -> str:
    """`Passed` or `Failed` for one hook, from pre-commit's report."""
    for line in result.stdout.splitlines():
        m = re.match(re.escape(hook) + r"\.+(\S.*)$", line)
        if m:
            return m.group(1)
    if "Installing environment" in result.stdout + result.stderr and result.returncode == 3:
        pytest.skip("pre-commit could not install the hook environment (no package index "
                    "reachable?):\n" + (result.stdout + result.stderr)[-800:])
    raise AssertionError(f"no line for {hook}:\n{result.stdout}\n{result.stderr}")


@pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")
def test_hooks_pass_a_clean_plan_and_fail_bad_ones(tmp_path, hooks_repo, home):
    pytest.importorskip("pre_commit", reason="the pre-commit package is in the test extra")
    work = throwaway(tmp_path, hooks_repo, {"clean.aps": CLEAN, "missed.aps": MISSED,
                                            "scruffy.aps": SCRUFFY, "notes.txt": "x\n"})
    clean = pre_commit(work, home, "clean.aps", "notes.txt")
    assert outcome(clean, "apsidal check") == "Passed", clean.stdout
    assert outcome(clean, "apsidal fmt --check") == "Passed", clean.stdout
    assert clean.returncode == 0

    missed = pre_commit(work, home, "missed.aps")
    assert outcome(missed, "apsidal check") == "Failed"
    assert "expectation-not-met" in missed.stdout
    assert outcome(missed, "apsidal fmt --check") == "Passed"
    assert missed.returncode == 1

    scruffy = pre_commit(work, home, "scruffy.aps")
    assert outcome(scruffy, "apsidal fmt --check") == "Failed"
    assert "+start circular 400 km" in scruffy.stdout
    assert outcome(scruffy, "apsidal check") == "Passed"
    assert scruffy.returncode == 1
