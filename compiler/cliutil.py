"""What every subcommand shares: exit codes, usage errors, the argument parser class and
the console.

Exit codes: 0 fine; 1 findings at or above ``--fail-on`` (check), a budget over its
threshold (diff) or a file not formatted (``fmt --check``); 2 bad input or a plan that
cannot be flown; 70 a bug in apsidal itself.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import stat
import sys
import tempfile
from pathlib import Path

from rich.console import Console

EXIT_OK, EXIT_FINDINGS, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 70


class UsageError(Exception):
    """A command-line mistake; exits 2 like any other bad input."""


class Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse exits 2 by itself; keep the wording ours
        self.print_usage(sys.stderr)
        print(f"apsidal: error: {message}", file=sys.stderr)
        raise SystemExit(EXIT_BAD_INPUT)


def console(stream=None) -> Console:
    """The console of the screens: the terminal's width, or for a pipe or file ``COLUMNS``
    (100 when unset), so what a script captures is what a 100-column terminal shows."""
    out = stream or sys.stdout
    width = None
    if not out.isatty():
        try:
            width = int(os.environ.get("COLUMNS", "")) or 100
        except ValueError:
            width = 100
    return Console(file=out, highlight=False, soft_wrap=False, width=width)


def write_atomic(path: str | Path, text: str) -> None:
    """Replace ``path`` by ``text`` (UTF-8) so that a reader sees the old or the new file,
    never a part: write a temporary file beside it, fsync, then rename over."""
    target = Path(os.path.realpath(path))
    mode = stat.S_IMODE(target.stat().st_mode) if target.exists() else 0o644
    fd, tmp = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(text.encode("utf-8"))
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    with contextlib.suppress(OSError):  # make the rename itself durable where we can
        dir_fd = os.open(target.parent, os.O_RDONLY)
        try:
            os.fsync(dir_fd)
        finally:
            os.close(dir_fd)
