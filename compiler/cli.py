"""The `apsidal` command line.

Exit codes: 0 fine; 1 an expectation failed or a finding is an error (run), findings at
or above ``--fail-on`` (check) or a budget over its threshold (diff); 2 bad input or a
plan that cannot be flown, reported as ``file:line:col`` with the line, a caret and what
would work.  No Python traceback reaches the user for anything they can type; set
APSIDAL_DEBUG=1 to see one for a bug.

Each command imports what it needs when it runs (``run`` loads no checker search, git,
diff or Markdown code), so starting the program costs little more than its libraries.
"""

from __future__ import annotations

import os
import sys

from apsidal.lang.errors import PlanError

from . import check_cli, review_cli
from .cliutil import (
    EXIT_BAD_INPUT,
    EXIT_FINDINGS,
    EXIT_INTERNAL,
    EXIT_OK,
    Parser,
    PipeSafe,
    UsageError,
    console,
    join_amounts,
)

FORMATS = ("table", "json", "markdown", "csv")
COLUMN_KEYS = ("index", "step", "kind", "at", "dv", "margin", "propellant", "mass", "burn",
               "engine", "orbit", "elapsed")  # render.COLUMN_KEYS, without importing rich


def cmd_run(args) -> int:
    from .budget import budget
    from .evaluate import run as evaluate
    from .load import load

    program = load(args.plan)
    result = evaluate(program)
    report = budget(result)
    findings = self_consistency(program, result)
    report["findings"] = [f.as_dict() for f in findings]
    emit_report(report, args.format, args.columns)
    if result.error is not None:
        print(result.error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    failed = not report["totals"]["expectations_met"]
    if failed or any(f.severity == "error" for f in findings):
        return EXIT_FINDINGS
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
    from . import render

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

    from . import bodies

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
    p.add_argument("--version", action="store_true", help="print the version and exit")
    sub = p.add_subparsers(dest="command", parser_class=Parser, metavar="COMMAND")
    run = sub.add_parser("run", help="price a plan and print its budget",
                         description="Price a plan and print its budget.  Exit 1 when an "
                         "expectation fails or a finding is an error, 2 for bad input.")
    run.add_argument("plan", help="plan file (.aps); `-` reads standard input")
    run.add_argument("--format", choices=FORMATS, default="table")
    run.add_argument("--columns", metavar="LIST", default=None,
                     help="table columns to show: `all`, or names separated by commas ("
                     + ", ".join(COLUMN_KEYS) + "); by default the columns that "
                     "fit the terminal, the least needed giving way first")
    run.set_defaults(func=cmd_run)
    bod = sub.add_parser("bodies", help="list the body catalogue and its sources")
    bod.set_defaults(func=cmd_bodies)
    check_cli.register(sub)
    review_cli.register(sub)
    p.commands = dict(sub.choices)
    return p


def version() -> str:
    from importlib.metadata import PackageNotFoundError
    from importlib.metadata import version as installed

    try:
        return installed("apsidal")
    except PackageNotFoundError:  # run from a source tree that is not installed
        return "unknown"


def main(argv: list[str] | None = None) -> int:
    if argv is None:  # the program itself, writing to a pipe that may close early
        sys.stdout = PipeSafe(sys.stdout)
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser()
    args = parser.parse_args(join_amounts(argv))
    if args.version:
        print(f"apsidal {version()}")
        return EXIT_OK
    if args.command is None:  # `apsidal` alone: what it can do, not an error
        parser.print_help()
        return EXIT_OK
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
