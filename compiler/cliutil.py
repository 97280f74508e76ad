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
import re
import stat
import sys
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # rich.console is imported by the commands that print through it
    from rich.console import Console

EXIT_OK, EXIT_FINDINGS, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 70


class UsageError(Exception):
    """A command-line mistake; exits 2 like any other bad input."""


AMOUNT_OPTIONS = ("--min-saving", "--fail-over")  # take a quantity: `5m/s` or `5 m/s`
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")


def join_amounts(argv: list[str]) -> list[str]:
    """``--min-saving 5 m/s`` as ``--min-saving "5 m/s"``: an amount option's number and
    the unit after it are one argument, whichever way the user typed them, and nothing
    after the unit is taken for the amount.

    >>> join_amounts(["diff", "--fail-over", "5", "kg", "a.aps", "--min-saving", "2%"])
    ['diff', '--fail-over', '5 kg', 'a.aps', '--min-saving', '2%']
    """
    from apsidal.lang.units import UNITS

    out, i = [], 0
    while i < len(argv):
        out.append(argv[i])
        if (argv[i] in AMOUNT_OPTIONS and i + 2 < len(argv) and _NUMBER.fullmatch(argv[i + 1])
                and argv[i + 2] and argv[i + 2] in UNITS):
            out.append(f"{argv[i + 1]} {argv[i + 2]}")
            i += 3
            continue
        i += 1
    return out


class Parser(argparse.ArgumentParser):
    """argparse with our wording: errors name the subcommand and print its usage, and
    an unknown argument is reported by the subcommand it was given to."""

    commands: dict[str, Parser]

    def error(self, message):  # argparse exits 2 by itself; keep the wording ours
        self.print_usage(sys.stderr)
        print(f"{self.prog}: error: {message}", file=sys.stderr)
        raise SystemExit(EXIT_BAD_INPUT)

    def parse_args(self, args=None, namespace=None):
        args, extras = self.parse_known_args(args, namespace)
        if extras:
            sub = getattr(self, "commands", {}).get(getattr(args, "command", None), self)
            hint = ""
            if any(_NUMBER.match(w) for w in extras):
                hint = ("; an option takes one amount (`5m/s` or `5 m/s`): give each amount "
                        "its own option, as in `--fail-over 2kg --fail-over 20m/s`")
            sub.error(f"unrecognized arguments: {' '.join(extras)}{hint}")
        return args


class PipeSafe:
    """Standard output that a closed pipe (``apsidal check | head``) does not break: the
    rest of the output is dropped and the command still exits with its own code."""

    def __init__(self, stream):
        self._stream = stream
        self.closed_pipe = False

    def write(self, text):
        if self.closed_pipe:
            return len(text)
        try:
            return self._stream.write(text)
        except BrokenPipeError:
            self._drop()
            return len(text)

    def flush(self):
        if not self.closed_pipe:
            try:
                self._stream.flush()
            except BrokenPipeError:
                self._drop()

    def _drop(self):
        self.closed_pipe = True
        with contextlib.suppress(OSError, ValueError):  # keep the exit flush quiet too
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, self._stream.fileno())

    def __getattr__(self, name):
        return getattr(self._stream, name)


def screen_width(out) -> int | None:
    """The width to lay tables out for: the terminal's (None: rich asks it); for a pipe
    or a file, ``COLUMNS``, else the terminal standard error is on (`apsidal run x | head`
    in an 80-column terminal is laid out for 80), else 100."""
    if out.isatty():
        return None
    try:
        return int(os.environ["COLUMNS"])
    except (KeyError, ValueError):
        pass
    try:
        return os.get_terminal_size(sys.__stderr__.fileno()).columns
    except (OSError, AttributeError, ValueError):
        return 100


def console(stream=None) -> Console:
    """The console of the screens, at :func:`screen_width`."""
    from rich.console import Console

    out = stream or sys.stdout
    return Console(file=out, highlight=False, soft_wrap=False, width=screen_width(out))


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
