"""The `check` and `explain` commands."""

from __future__ import annotations

import json
import sys

from apsidal.lang.errors import PlanError
from apsidal.lang.units import to_internal
from rich.console import Console
from rich.markup import escape
from rich.syntax import Syntax

from .check import DEFAULT_TIME_LIMIT, SEVERITIES, Budget, Finding, check_program
from .cliutil import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_OK, UsageError, write_atomic
from .cliutil import console as _console
from .evaluate import run
from .load import load
from .rules import BY_NAME, RULES


def register(sub) -> None:
    chk = sub.add_parser("check", help="check expectations and look for cheaper plans")
    chk.add_argument("plans", nargs="+", metavar="PLAN", help="plan files (.aps)")
    chk.add_argument("--format", choices=("table", "json", "markdown"), default="table")
    chk.add_argument("--fail-on", choices=SEVERITIES, default="error",
                     help="exit 1 when a finding is at least this severe (default: error)")
    chk.add_argument("--min-saving", default=None, metavar="AMOUNT",
                     help="hide savings below this, in m/s (e.g. 5m/s) or as a share of "
                          "the plan's delta-v with margin (e.g. 1%%)")
    chk.add_argument("--rule", action="append", default=None, metavar="NAME",
                     help="run only this rule (repeatable); see `apsidal explain`")
    chk.add_argument("--ignore", action="append", default=[], metavar="RULE",
                     help="leave this rule's findings out (repeatable; counted as silenced)")
    chk.add_argument("--time-limit", default=str(DEFAULT_TIME_LIMIT), metavar="SECONDS",
                     help=f"stop searching each plan after this long and report what is "
                          f"proven (default {DEFAULT_TIME_LIMIT:g}; 0 or `none`: no limit)")
    chk.add_argument("--write-suggestion", metavar="OUT.aps", default=None,
                     help="write the cheapest rewritten plan to this file")
    chk.set_defaults(func=cmd_check)
    exp = sub.add_parser("explain", help="explain a check rule")
    exp.add_argument("rule", nargs="?", help="rule name; without it, list the rules")
    exp.set_defaults(func=cmd_explain)


def parse_min_saving(text: str | None) -> tuple[str, float] | None:
    """`5m/s`, `5 m/s`, `0.5 km/s` or `1%` -> ("speed", km/s) or ("ratio", fraction).

    >>> parse_min_saving("5m/s")
    ('speed', 0.005)
    >>> parse_min_saving("2 %")
    ('ratio', 0.02)
    """

    if text is None:
        return None
    raw = text.replace(" ", "")
    for unit, dim in (("%", "ratio"), ("km/s", "speed"), ("m/s", "speed")):
        if raw.endswith(unit):
            try:
                value = float(raw[: -len(unit)])
            except ValueError:
                break
            if value < 0:
                break
            return dim, to_internal(value, unit)
    raise UsageError(f"--min-saving takes a speed or a percentage such as `5m/s` or `1%`, "
                     f"not `{text}`")


def _keep(f: Finding, threshold, plan_dv_m_s: float) -> bool:
    if threshold is None or f.saves_m_s is None:
        return True
    dim, value = threshold
    limit = value * 1000.0 if dim == "speed" else value * plan_dv_m_s
    return f.saves_m_s >= limit


def parse_time_limit(text: str) -> float | None:
    """Seconds for --time-limit; None for no limit.

    >>> parse_time_limit("30"), parse_time_limit("none"), parse_time_limit("0")
    (30.0, None, None)
    """
    if text.strip().lower() in ("none", "off"):
        return None
    try:
        value = float(text)
    except ValueError:
        value = -1.0
    if not value >= 0 or value == float("inf"):
        raise UsageError(f"--time-limit takes a number of seconds such as `20`, or `none`, "
                         f"not `{text}`")
    return value or None


def _progress(path: str):
    """A one-line progress report on stderr, only when stderr is a terminal."""
    if not sys.stderr.isatty():
        return None

    def show(rule: str, done: float) -> None:
        bar = "#" * int(done * 20)
        sys.stderr.write(f"\r{path}: [{bar:<20}] {rule:<28}")
        sys.stderr.flush()
    return show


def cmd_check(args) -> int:

    threshold = parse_min_saving(args.min_saving)
    seconds = parse_time_limit(args.time_limit)
    for name in args.ignore:
        if name not in BY_NAME:
            raise UsageError(f"--ignore: no rule named `{name}`; `apsidal explain` lists them")
    rules = None
    if args.rule:
        unknown = [r for r in args.rule if r not in BY_NAME]
        if unknown:
            from apsidal.lang.errors import did_you_mean

            guess = did_you_mean(unknown[0], BY_NAME)
            raise UsageError(f"no rule named `{unknown[0]}`"
                             + (f"; did you mean `{guess}`?" if guess else
                                "; `apsidal explain` lists them"))
        rules = [BY_NAME[r] for r in args.rule]
    if args.write_suggestion and len(args.plans) != 1:
        raise UsageError("--write-suggestion takes exactly one plan")
    reports = []
    silenced: dict[str, int] = {}
    worst = -1
    bad_input = False
    for path in args.plans:
        try:
            program = load(path)
            result = run(program)
            dv = float(result.final.dv_margin[0]) * 1000.0
            floor = 0.0
            if threshold is not None:
                floor = threshold[1] * (1000.0 if threshold[0] == "speed" else dv)
            budget = Budget(seconds, _progress(path))
            try:
                findings = check_program(program, rules, result, budget, floor, args.ignore)
            finally:
                if budget.progress is not None:
                    sys.stderr.write("\r" + " " * 60 + "\r")
            silenced[path] = len(budget.silenced)
        except PlanError as err:
            print(err.render(), file=sys.stderr)
            bad_input = True
            continue
        dv = float(result.final.dv_margin[0]) * 1000.0
        kept = [f for f in findings if _keep(f, threshold, dv)]
        reports.append((path, program, kept))
        for f in kept:
            worst = max(worst, SEVERITIES.index(f.severity))
    if args.format == "json":
        sys.stdout.write(json.dumps({"plans": [
            {"plan": p.title, "source": path, "findings": [f.as_dict() for f in fs]}
            for path, p, fs in reports]}, indent=2, allow_nan=False) + "\n")
    elif args.format == "markdown":
        sys.stdout.write(markdown(reports))
    else:
        table(reports, _console(), silenced)
    if args.write_suggestion and reports:
        _, _, findings = reports[0]
        best = max((f for f in findings if f.suggestion), key=lambda f: f.saves_kg or 0.0,
                   default=None)
        if best is None:
            print("apsidal: no cheaper plan found; nothing written", file=sys.stderr)
        else:
            write_atomic(args.write_suggestion, best.suggestion)
    if bad_input:
        return EXIT_BAD_INPUT
    if worst >= SEVERITIES.index(args.fail_on):
        return EXIT_FINDINGS
    return EXIT_OK


STYLE = {"error": "bold red", "warning": "yellow", "info": "cyan"}


def _saving(f: Finding) -> str:
    if f.saves_m_s is None:
        return ""
    return f" (saves {f.saves_m_s:.1f} m/s, {f.saves_kg:.2f} kg)"


def table(reports, console: Console, silenced: dict | None = None) -> None:
    for path, program, findings in reports:
        console.print(f"[bold]{path}[/bold]: {program.title}")
        if not findings:
            console.print("  no findings")
        for f in findings:
            steps = ", ".join(f.steps)
            console.print(f"  [{STYLE[f.severity]}]{f.severity}[/] {f.rule}"
                          f"{escape(' [' + steps + ']') if steps else ''}{_saving(f)}")
            console.print(f"    {f.message}", highlight=False, markup=False)
            for note in f.notes:
                console.print(f"    note: {note}", highlight=False, markup=False)
            if f.diff:
                console.print(Syntax(f.diff, "diff", theme="ansi_dark", background_color="default"))
        console.print()
    n = sum(len(fs) for _, _, fs in reports)
    quiet = sum((silenced or {}).values())
    console.print(f"{n} finding{'s' if n != 1 else ''} in {len(reports)} "
                  f"plan{'s' if len(reports) != 1 else ''}"
                  + (f" ({quiet} silenced)" if quiet else "") + ".")
    from .budget import CAUTION

    console.print(f"Caution: {CAUTION}", style="italic", highlight=False)


def markdown(reports) -> str:
    from .budget import CAUTION

    out = []
    for path, program, findings in reports:
        out += [f"### `{path}`: {program.title}", ""]
        if not findings:
            out += ["No findings.", ""]
        for f in findings:
            steps = ", ".join(f"`{s}`" for s in f.steps)
            out.append(f"- **{f.severity}** `{f.rule}` {steps}{_saving(f)}: {f.message}")
            for note in f.notes:
                out.append(f"  - {note}")
            if f.diff:
                out += ["", "  ```diff", *("  " + line for line in f.diff.splitlines()),
                        "  ```"]
        out.append("")
    out += [f"_Caution: {CAUTION}_", ""]
    return "\n".join(out)


def cmd_explain(args) -> int:
    import inspect


    console = _console()
    if args.rule is None:
        for r in RULES:
            first = inspect.getdoc(r).splitlines()[0]
            console.print(f"{r.rule_name:26} {first}", highlight=False)
        return 0
    if args.rule not in BY_NAME:
        from apsidal.lang.errors import did_you_mean

        guess = did_you_mean(args.rule, BY_NAME)
        raise UsageError(f"no rule named `{args.rule}`"
                         + (f"; did you mean `{guess}`?" if guess else
                            "; `apsidal explain` lists them"))
    console.print(f"[bold]{args.rule}[/bold]")
    console.print(inspect.getdoc(BY_NAME[args.rule]), highlight=False, markup=False)
    return 0
