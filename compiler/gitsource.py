"""Plan text as it stood at a git revision, with errors a user can act on.

Only read-only git commands are run: ``rev-parse``, ``cat-file``, ``ls-tree``, ``show``.
"""

from __future__ import annotations

import os
import subprocess
from dataclasses import dataclass
from pathlib import Path

from apsidal.lang.errors import did_you_mean


class GitError(Exception):
    """Git cannot give the text asked for: no repository, revision or file."""


@dataclass(frozen=True)
class Located:
    """A file inside a repository: the repository's top folder and the path in it."""

    top: Path
    path: str  # relative to ``top``, with `/` separators


def _git(cwd: Path, *args: str) -> subprocess.CompletedProcess:
    try:
        return subprocess.run(["git", *args], cwd=cwd, capture_output=True, check=False)
    except FileNotFoundError:
        raise GitError("git is not installed (or not on PATH); `--rev` reads the old plan "
                       "from git") from None


def _existing_parent(path: Path) -> Path:
    folder = path.parent
    while not folder.is_dir() and folder != folder.parent:
        folder = folder.parent
    return folder


def locate(path: str | Path) -> Located:
    """Where ``path`` sits in its git repository (the file itself need not exist)."""
    target = Path(os.path.abspath(path))
    folder = _existing_parent(target)
    done = _git(folder, "rev-parse", "--show-toplevel")
    if done.returncode != 0:
        raise GitError(f"`{folder}` is not inside a git repository, so `--rev` has "
                       "nothing to read; give two plan files instead: "
                       "`apsidal diff OLD.aps NEW.aps`")
    top = Path(done.stdout.decode().strip())
    real = Path(os.path.realpath(folder)) / target.relative_to(folder)
    try:
        inside = real.relative_to(os.path.realpath(top))
    except ValueError:
        raise GitError(f"`{path}` is outside the repository at `{top}`") from None
    return Located(top, inside.as_posix())


def check_revision(top: Path, rev: str) -> str:
    """The commit id ``rev`` names; GitError when it names none."""
    if not rev or rev.startswith("-"):
        raise GitError(f"`{rev}` is not a revision")
    done = _git(top, "rev-parse", "--verify", "--quiet", f"{rev}^{{commit}}")
    if done.returncode != 0:
        raise GitError(f"revision `{rev}` does not exist in the repository at `{top}`; "
                       "`git log --oneline` lists the commits, `git tag` the tags")
    return done.stdout.decode().strip()


def _aps_files(top: Path, rev: str) -> list[str]:
    done = _git(top, "ls-tree", "-r", "--name-only", rev)
    names = done.stdout.decode(errors="replace").splitlines() if done.returncode == 0 else []
    return [n for n in names if n.endswith(".aps")]


def read_at(path: str | Path, rev: str) -> tuple[str, str]:
    """The text of ``path`` at revision ``rev`` and the label it is reported under
    (``path@rev``).  Bytes that are not UTF-8 become U+FFFD so the parser can point at
    them."""
    where = locate(path)
    check_revision(where.top, rev)
    label = f"{path}@{rev}"
    spec = f"{rev}:{where.path}"
    if _git(where.top, "cat-file", "-e", spec).returncode != 0:
        others = _aps_files(where.top, rev)
        guess = did_you_mean(where.path, others)
        hint = (f"; did you mean `{guess}`?" if guess else
                f"; plans at that revision: {', '.join(others)}" if others else
                "; there are no plans at that revision")
        raise GitError(f"`{where.path}` does not exist at revision `{rev}`{hint}")
    done = _git(where.top, "show", spec)
    if done.returncode != 0:  # pragma: no cover - cat-file just said it exists
        raise GitError(f"git could not read `{spec}`: {done.stderr.decode().strip()}")
    return done.stdout.decode("utf-8", errors="replace").removeprefix("\ufeff"), label


def split_range(rev: str) -> tuple[str, str | None]:
    """``A..B`` to (A, B); a single revision to (rev, None).

    >>> split_range("v1..HEAD"), split_range("HEAD~2")
    (('v1', 'HEAD'), ('HEAD~2', None))
    """
    if "..." in rev:
        raise GitError(f"`{rev}`: give two revisions as `A..B` (two dots)")
    if ".." in rev:
        a, b = rev.split("..", 1)
        if not a or not b:
            raise GitError(f"`{rev}`: both ends of a range are needed, e.g. `HEAD~1..HEAD`")
        return a, b
    return rev, None
