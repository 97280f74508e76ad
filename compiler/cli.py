"""The `apsidal` command line.

Exit codes: 0 fine; 1 an expectation failed or a finding is an error (run), findings at
or above ``--fail-on`` (check) or a budget over its threshold (diff); 2 bad input or a
plan that cannot be flown, reported as ``file:line:col`` with the line, a caret and what
would work.  No Python traceback reaches the user for anything they can type; set
APSIDAL_DEBUG=1 to see one for a bug.

Each command imports what it needs when it runs: ``run`` builds only its own options,
loads no git, diff, formatter or Markdown code, and no rich at all when it writes its
table to a pipe or a file (compiler/plain.py).  The five rules it reports come with the
rules package, and so with the checker module (DEVELOPERS.md, "Start-up").
"""

from __future__ import annotations

import gc
import os
import sys

from apsidal.lang.errors import PlanError

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
    screen_width,
)
from .legs import PhaseBodies

FORMATS = ("table", "json", "markdown", "csv")
COLUMN_KEYS = ("index", "step", "kind", "at", "dv", "margin", "propellant", "mass", "burn",
               "engine", "orbit", "elapsed")  # render.COLUMN_KEYS, without importing rich


def cmd_run(args) -> int:
    from .budget import budget, shortfall_text
    from .evaluate import run as evaluate
    from .load import load

    program = load(args.plan)
    result = evaluate(program)
    report = budget(result)
    findings = self_consistency(program, result, report)
    report["findings"] = [f.as_dict() for f in findings]
    emit_report(report, args.format, args.columns)
    if result.error is not None:
        print(result.error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    if not report["feasible"]:  # a budget result, not bad input: the full report, exit 1
        print(f"apsidal: the plan does not fit its load: {shortfall_text(report)}",
              file=sys.stderr)
        return EXIT_FINDINGS
    failed = not report["totals"]["expectations_met"]
    if failed or any(f.severity == "error" for f in findings):
        return EXIT_FINDINGS
    return EXIT_OK


class PricedPlan(PhaseBodies):
    """What the consistency rules read of a plan: the program, its priced chain and its
    report, the first three fields of ``check.Checker``.  The Checker itself also lays
    out the plan's text and the state before each step for the rules that rewrite the
    plan, work `run` has no use for (``tests/test_cli.py`` holds the two to the same
    findings)."""

    def __init__(self, program, result, report: dict):
        self.program, self.result, self.report = program, result, report


def self_consistency(program, result, report: dict | None = None):
    """The findings `run` reports itself: what the plan says of itself, no searches.

    Expectations, reserve and burn length (an exhausted tank is the run's error);
    `check` adds the rules that look for a cheaper plan.  ``report`` is the plan's
    budget, when the caller has it.
    """
    from .rules import CONSISTENCY

    if report is None:
        from .budget import budget

        report = budget(result)
    plan = PricedPlan(program, result, report)
    return [f for rule in CONSISTENCY if result.ok or not rule.needs_flyable
            for f in rule(plan)]


def emit_report(report: dict, fmt: str, columns: str | None = None) -> None:
    from . import render

    if fmt == "json":
        sys.stdout.write(render.to_json(report) + "\n")
    elif fmt == "markdown":
        sys.stdout.write(render.markdown(report))
    elif fmt == "csv":
        sys.stdout.write(render.to_csv(report))
    else:
        from . import plain

        out = sys.stdout
        if plain.applies(out):  # a pipe or a file: the same characters, without rich
            text = plain.text(render.screen(report, columns), screen_width(out))
            if text is not None:
                out.write(text)
                return
        render.table(report, console(), columns)


def source_standing(source: str) -> str:
    """How a body's values are sourced: `published`, or which values lean on memory or
    on a secondary collection (the sources say so in their own words).

    >>> source_standing("gm: JPL DE440; radius: IAU 2015")
    'published'
    >>> source_standing("gm: DE440; radius: IAU; unchanged (from memory); "
    ...                 "orbit: as in secondary references")
    'radius from memory; orbit secondary'
    """
    import re

    from .bodies import _SOURCE_ORDER

    pattern = r"(?:^|; )(" + "|".join(_SOURCE_ORDER) + r"): "
    pieces = re.split(pattern, source)[1:]  # field, text, field, text, ...
    memory, secondary = [], []
    for field, text in zip(pieces[::2], pieces[1::2]):
        if "from memory" in text:
            memory.append(field)
        if "secondary" in text:
            secondary.append(field)
    out = ([f"{', '.join(memory)} from memory"] if memory else []) + (
        [f"{', '.join(secondary)} secondary"] if secondary else [])
    return "; ".join(out) or "published"


def cmd_bodies(args) -> int:
    from rich import box
    from rich.table import Table

    from . import bodies
    from .textfmt import sig

    t = Table(title="Body catalogue", title_justify="left", box=box.SIMPLE_HEAD,
              show_edge=False, pad_edge=False)
    for col in ("name", "GM km3/s2", "radius km", "J2", "SOI km", "sourcing"):
        t.add_column(col, no_wrap=col != "sourcing",
                     justify="left" if col in ("name", "sourcing") else "right")
    for name in bodies.names():
        b = bodies.lookup(name)
        t.add_row(b.name, f"{b.gm:.10g}", f"{b.radius:.10g}",
                  "-" if b.j2 is None else f"{b.j2:.6e}",
                  "-" if b.soi is None else sig(b.soi, 6), source_standing(b.source))
    con = console()
    con.print(t)
    con.print()
    con.print("Sources", style="bold")
    for name in bodies.names():
        b = bodies.lookup(name)
        con.print(f"{b.name}: {b.source}", highlight=False, markup=False)
    con.print()
    con.print("sourcing: `published` where every value was read from its published source; "
              "`from memory` where a value or its attribution was recalled and not looked "
              "up again; `secondary` where it was read from a collection quoting the "
              "source.  `--format json` is not offered here; the catalogue file is "
              "compiler/bodies.toml.", highlight=False, markup=False)
    return EXIT_OK


def build_parser(command: str | None = None) -> Parser:
    """The command line's parser.  For a line that starts with ``run`` (``command``), the
    other commands' options are left out: only run's own are read, and building and
    importing the rest cost `apsidal run` about 4 ms."""
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
    if command != "run":
        from . import check_cli, export_cli, lsp_cli, picture_cli, review_cli, size_cli, sweep_cli

        check_cli.register(sub)
        review_cli.register(sub)
        size_cli.register(sub)
        sweep_cli.register(sub)
        picture_cli.register(sub)
        export_cli.register(sub)
        lsp_cli.register(sub)
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
    if argv is not None:  # called from Python (tests, a notebook): nothing else changes
        return _main(list(argv))
    sys.stdout = PipeSafe(sys.stdout)  # the program itself, writing to a pipe that may close
    code = _main(sys.argv[1:])
    # The process ends here.  Python's shutdown scans every live object for cycles more
    # than once, 10-25 ms of a short command (numpy's objects and ours); nothing made here
    # needs collecting, so the collector is told to leave it all alone.
    gc.freeze()
    return code


def _main(argv: list[str]) -> int:
    parser = build_parser(argv[0] if argv else None)
    if argv[:1] == ["sweep"]:
        from .sweep_cli import join_ranges

        argv = join_ranges(argv)
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
