"""The `apsidal` command line.

Exit codes: 0 fine; 1 findings at or above ``--fail-on`` (check) or a budget over its
threshold (diff); 2 bad input or a plan that cannot be flown, reported as
``file:line:col`` with the line, a caret and what would work.  No Python traceback
reaches the user for anything they can type; set APSIDAL_DEBUG=1 to see one for a bug.
"""

from __future__ import annotations

import argparse
import os
import sys

from apsidal.lang.errors import PlanError
from rich.console import Console

from . import bodies, render
from .budget import budget
from .evaluate import run as evaluate
from .load import load

EXIT_OK, EXIT_FINDINGS, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 70


class UsageError(Exception):
    """A command-line mistake; exits 2 like any other bad input."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse exits 2 by itself; keep the wording ours
        self.print_usage(sys.stderr)
        print(f"apsidal: error: {message}", file=sys.stderr)
        raise SystemExit(EXIT_BAD_INPUT)


def _console(stream=None) -> Console:
    return Console(file=stream or sys.stdout, highlight=False, soft_wrap=False,
                   width=None if (stream or sys.stdout).isatty() else 160)


def cmd_run(args) -> int:
    program = load(args.plan)
    result = evaluate(program)
    report = budget(result)
    report["findings"] = [f.as_dict() for f in self_consistency(program, result)]
    emit_report(report, args.format)
    if result.error is not None:
        print(result.error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    return EXIT_OK


def self_consistency(program, result):
    """The findings `run` reports itself: what the plan says of itself, no searches.

    Expectations, reserve and burn length (an exhausted tank is the run's error);
    `check` adds the rules that look for a cheaper plan.
    """
    from .check import Checker
    from .rules import CONSISTENCY

    checker = Checker(program, result)
    return [f for rule in CONSISTENCY if result.ok or not rule.needs_flyable
            for f in rule(checker)]


def emit_report(report: dict, fmt: str) -> None:
    if fmt == "json":
        sys.stdout.write(render.to_json(report) + "\n")
    elif fmt == "markdown":
        sys.stdout.write(render.markdown(report))
    elif fmt == "csv":
        sys.stdout.write(render.to_csv(report))
    else:
        render.table(report, _console())


def cmd_bodies(args) -> int:
    from rich.table import Table

    t = Table(title="Body catalogue")
    for col in ("name", "GM km3/s2", "radius km", "J2", "SOI km", "source"):
        t.add_column(col)
    for name in bodies.names():
        b = bodies.lookup(name)
        t.add_row(b.name, f"{b.gm:.10g}", f"{b.radius:.10g}",
                  "-" if b.j2 is None else f"{b.j2:.6e}",
                  "-" if b.soi is None else f"{b.soi:,.0f}", b.source)
    _console().print(t)
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="apsidal", description="Price a spacecraft manoeuvre plan: delta-v, "
                "propellant, burn time and margin, under the impulsive two-body "
                "approximation.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    run = sub.add_parser("run", help="price a plan and print its budget")
    run.add_argument("plan", help="plan file (.aps)")
    run.add_argument("--format", choices=("table", "json", "markdown", "csv"),
                     default="table")
    run.set_defaults(func=cmd_run)
    bod = sub.add_parser("bodies", help="list the body catalogue and its sources")
    bod.set_defaults(func=cmd_bodies)
    for module in _command_modules():
        module.register(sub)
    return p


def _command_modules():
    """Modules that add their own subcommands through ``register(subparsers)``."""
    import importlib

    names = ("apsidal.compiler.check_cli", "apsidal.compiler.review_cli")
    out = []
    for name in names:
        try:
            out.append(importlib.import_module(name))
        except ModuleNotFoundError as exc:  # a command module not written yet
            if exc.name != name:
                raise
    return out


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except PlanError as err:
        print(err.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    except UsageError as err:
        print(f"apsidal: error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # a bug of ours, not the user's input
        if os.environ.get("APSIDAL_DEBUG"):
            raise
        print(f"apsidal: internal error: {type(exc).__name__}: {exc}\n"
              "  this is a bug in apsidal, not in your plan; rerun with APSIDAL_DEBUG=1 "
              "and report it with the plan", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
