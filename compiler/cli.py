"""The `apsidal` command line.

Exit codes: 0 fine; 1 findings at or above ``--fail-on`` (check) or a budget over its
threshold (diff); 2 bad input or a plan that cannot be flown, reported as
``file:line:col`` with the line, a caret and what would work.  No Python traceback
reaches the user for anything they can type; set APSIDAL_DEBUG=1 to see one for a bug.
"""

from __future__ import annotations

import os
import sys

from apsidal.lang.errors import PlanError

from . import bodies, check_cli, render, review_cli
from .budget import budget
from .cliutil import (
    EXIT_BAD_INPUT,
    EXIT_INTERNAL,
    EXIT_OK,
    Parser,
    UsageError,
    console,
)
from .evaluate import run as evaluate
from .load import load


def cmd_run(args) -> int:
    program = load(args.plan)
    result = evaluate(program)
    report = budget(result)
    report["findings"] = [f.as_dict() for f in self_consistency(program, result)]
    emit_report(report, args.format, args.columns)
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


def emit_report(report: dict, fmt: str, columns: str | None = None) -> None:
    if fmt == "json":
        sys.stdout.write(render.to_json(report) + "\n")
    elif fmt == "markdown":
        sys.stdout.write(render.markdown(report))
    elif fmt == "csv":
        sys.stdout.write(render.to_csv(report))
    else:
        render.table(report, console(), columns)


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
    console().print(t)
    return EXIT_OK


def build_parser() -> Parser:
    p = Parser(prog="apsidal", description="Price a spacecraft manoeuvre plan: delta-v, "
                "propellant, burn time and margin, under the impulsive two-body "
                "approximation.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=Parser)
    run = sub.add_parser("run", help="price a plan and print its budget")
    run.add_argument("plan", help="plan file (.aps)")
    run.add_argument("--format", choices=("table", "json", "markdown", "csv"),
                     default="table")
    run.add_argument("--columns", metavar="LIST", default=None,
                     help="table columns to show: `all`, or names separated by commas ("
                     + ", ".join(render.COLUMN_KEYS) + "); by default the columns that "
                     "fit the terminal, the least needed giving way first")
    run.set_defaults(func=cmd_run)
    bod = sub.add_parser("bodies", help="list the body catalogue and its sources")
    bod.set_defaults(func=cmd_bodies)
    check_cli.register(sub)
    review_cli.register(sub)
    return p


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
