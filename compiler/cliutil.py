"""What every subcommand shares: exit codes, usage errors, the argument parser class and
the console.

Exit codes: 0 fine; 1 findings at or above ``--fail-on`` (check), a budget over its
threshold (diff) or a file not formatted (``fmt --check``); 2 bad input or a plan that
cannot be flown; 70 a bug in apsidal itself.
"""

from __future__ import annotations

import argparse
import sys

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
    out = stream or sys.stdout
    return Console(file=out, highlight=False, soft_wrap=False,
                   width=None if out.isatty() else 160)
