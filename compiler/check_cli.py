"""The `check` and `explain` commands.

The checker and its rules are imported when a command runs, not when the command line
is built, so `apsidal run` does not load them.
"""

from __future__ import annotations

import sys

from apsidal.lang.errors import PlanError
from apsidal.lang.units import to_internal

from .cliutil import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_OK, UsageError, write_atomic
from .cliutil import console as _console

SEVERITIES = ("info", "warning", "error")  # check.SEVERITIES, without importing the checker
DEFAULT_TIME_LIMIT = 20.0  # s: check.DEFAULT_TIME_LIMIT, likewise (a test keeps them equal)


def register(sub) -> None:
    chk = sub.add_parser("check", help="check expectations and look for cheaper plans")
    chk.add_argument("plans", nargs="+", metavar="PLAN", help="plan files (.aps); `-` reads "
                     "standard input")
    chk.add_argument("--format", choices=("table", "json", "markdown", "csv", "sarif"),
                     default="table", help="sarif: SARIF 2.1.0 for code-review tools "
                     "(docs/review.md)")
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


def _keep(f, threshold, plan_dv_m_s: float) -> bool:
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
    from .check import Budget, check_program
    from .evaluate import run
    from .load import load
    from .rules import BY_NAME

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
    if args.write_suggestion:
        _check_suggestion_target(args)
    if args.plans.count("-") > 1:
        raise UsageError("standard input (`-`) can be named once")
    reports = []  # (path, program or None, findings, PlanError or None)
    silenced: dict[str, int] = {}
    worst = -1
    for path in args.plans:
        program = None  # kept for the caution (the models) when the plan reads but fails
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
            reports.append(("<stdin>" if path == "-" else path, program, [], err))
            continue
        dv = float(result.final.dv_margin[0]) * 1000.0
        kept = [f for f in findings if _keep(f, threshold, dv)]
        reports.append(("<stdin>" if path == "-" else path, program, kept, None))
        for f in kept:
            worst = max(worst, SEVERITIES.index(f.severity))
    if args.format == "json":
        import json

        sys.stdout.write(json.dumps(to_json(reports), indent=2, allow_nan=False) + "\n")
    elif args.format == "markdown":
        sys.stdout.write(markdown(reports))
    elif args.format == "csv":
        sys.stdout.write(to_csv(reports))
    elif args.format == "sarif":
        import json

        from .cli import version
        from .sarif import to_sarif

        sys.stdout.write(json.dumps(to_sarif(reports, version()), indent=2,
                                    allow_nan=False) + "\n")
    else:
        table(reports, _console(), silenced)
    if args.write_suggestion and reports[0][1] is not None:
        findings = reports[0][2]
        best = max((f for f in findings if f.suggestion), key=lambda f: f.saves_kg or 0.0,
                   default=None)
        if best is None:
            print("apsidal: no cheaper plan found; nothing written", file=sys.stderr)
        else:
            try:
                write_atomic(args.write_suggestion, best.suggestion)
            except OSError as err:
                raise UsageError(f"cannot write `{args.write_suggestion}`: "
                                 f"{err.strerror or err}") from None
    if any(err is not None for *_, err in reports):
        return EXIT_BAD_INPUT
    if worst >= SEVERITIES.index(args.fail_on):
        return EXIT_FINDINGS
    return EXIT_OK


def _check_suggestion_target(args) -> None:
    """Refuse, before any work, a suggestion file that cannot be written or that is the
    plan itself (the suggestion is a proposal to review, never a silent rewrite)."""
    import os
    from pathlib import Path

    if len(args.plans) != 1:
        raise UsageError("--write-suggestion takes exactly one plan")
    out = Path(args.write_suggestion)
    if args.plans[0] != "-" and out.exists() and Path(args.plans[0]).exists() and \
            os.path.samefile(out, args.plans[0]):
        raise UsageError(f"--write-suggestion `{out}` is the plan being checked; write the "
                         "suggestion to another file and compare them (`apsidal diff`)")
    if not out.parent.is_dir():
        raise UsageError(f"cannot write `{out}`: the folder `{out.parent}` does not exist")


def to_json(reports) -> dict:
    """Every plan named, in order: its findings, or the error that stopped it."""
    plans = []
    for path, program, findings, err in reports:
        entry = {"plan": program.title if program else None, "source": path,
                 "findings": [f.as_dict() for f in findings]}
        if err is not None:
            entry["error"] = {"message": err.message,
                              "line": err.span.line if err.span else None,
                              "column": err.span.column if err.span else None,
                              "hint": err.hint}
        plans.append(entry)
    from .budget import caution

    return {"plans": plans, "caution": caution(*(program for _, program, _, _ in reports))}


CSV_COLUMNS = ["record", "source", "plan", "severity", "rule", "steps", "saves_m_s",
               "saves_kg", "message", "line", "column"]


def to_csv(reports) -> str:
    """One row per finding, per plan that could not be checked (``error``), and the
    caution; every row has every column, so a strict CSV reader loads it."""
    from .render import write_csv

    rows = []
    data = to_json(reports)
    for plan in data["plans"]:
        for f in plan["findings"]:
            rows.append({"record": "finding", "source": plan["source"], "plan": plan["plan"],
                         **f, "steps": " ".join(f.get("steps", []))})
        if "error" in plan:
            err = plan["error"]
            rows.append({"record": "error", "source": plan["source"], "severity": "error",
                         "message": err["message"] + (f" ({err['hint']})" if err["hint"]
                                                      else ""),
                         "line": err["line"], "column": err["column"]})
    rows.append({"record": "caution", "message": data["caution"]})
    return write_csv(rows, CSV_COLUMNS)


STYLE = {"error": "bold red", "warning": "yellow", "info": "cyan"}


def _saving(f) -> str:
    if f.saves_m_s is None:
        return ""
    from .textfmt import sig

    return f" (saves {sig(f.saves_m_s)} m/s, {sig(f.saves_kg)} kg)"


def table(reports, console, silenced: dict | None = None) -> None:
    from rich.markup import escape
    from rich.padding import Padding
    from rich.text import Text

    for path, program, findings, err in reports:
        if err is not None:
            console.print(f"[bold]{escape(path)}[/bold]: [bold red]not checked[/]: "
                          f"{escape(err.message)}")
            console.print()
            continue
        console.print(f"[bold]{escape(path)}[/bold]: {escape(program.title or '')}")
        if not findings:
            console.print("  no findings")
        for f in findings:
            steps = ", ".join(f.steps)
            console.print(f"  [{STYLE[f.severity]}]{f.severity}[/] {f.rule}"
                          f"{escape(' [' + steps + ']') if steps else ''}{_saving(f)}")
            console.print(Padding(Text(f.message), (0, 0, 0, 4)), highlight=False)
            for note in f.notes:  # prose wraps under its own indent, not at column 0
                console.print(Padding(Text(f"note: {note}"), (0, 0, 0, 4)), highlight=False)
            if f.diff:  # plan text coloured as plan text (lang/highlight.py)
                from apsidal.lang.highlight import rich_diff

                console.print(rich_diff(f.diff), highlight=False)
        console.print()
    n = sum(len(fs) for _, _, fs, _ in reports)
    quiet = sum((silenced or {}).values())
    console.print(f"{n} finding{'s' if n != 1 else ''} in {len(reports)} "
                  f"plan{'s' if len(reports) != 1 else ''}"
                  + (f" ({quiet} silenced)" if quiet else "") + ".")
    from .budget import caution

    console.print(f"Caution: {caution(*(p for _, p, _, _ in reports))}", style="italic",
                  highlight=False)


def markdown(reports) -> str:
    from .budget import caution

    out = []
    for path, program, findings, err in reports:
        if err is not None:
            out += [f"### `{path}`: not checked", "", f"**error**: {err.message}", ""]
            continue
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
    out += [f"_Caution: {caution(*(p for _, p, _, _ in reports))}_", ""]
    return "\n".join(out)


# Findings `check` adds itself, outside the rules: what `explain` says of them.
SUMMARY_FINDINGS = {
    "combined-rewrites": (
        "Every rewrite that touches lines apart from the others, applied together.\n\n"
        "Each finding's saving is proven by pricing its rewrite alone; savings do not add in "
        "general (a step moved by one rewrite changes the mass the next one flies at). When "
        "two or more rewrites edit separate lines, `check` applies them together, prices "
        "the combined plan with the same proof (same final orbit, every expectation met) "
        "and reports what it saves, if more than the best single rewrite."),
    "time-limit": (
        "The search ran out of its time (`--time-limit`, 20 s unless set).\n\n"
        "The finding names the rules whose search was cut short; what they report was "
        "proven, but a cheaper plan may exist among the candidates they did not price."),
}


def cmd_explain(args) -> int:
    import inspect

    from .rules import BY_NAME, RULES


    console = _console()
    if args.rule is None:
        for r in RULES:
            first = inspect.getdoc(r).splitlines()[0]
            console.print(f"{r.rule_name:26} {first}", highlight=False)
        for name, text in SUMMARY_FINDINGS.items():
            console.print(f"{name:26} {text.splitlines()[0]}", highlight=False)
        return 0
    if args.rule in SUMMARY_FINDINGS:
        console.print(f"[bold]{args.rule}[/bold]")
        console.print(SUMMARY_FINDINGS[args.rule], highlight=False, markup=False)
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
