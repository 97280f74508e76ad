"""The review commands: `apsidal fmt` (canonical layout) and `apsidal diff` (what a
revision did to the budget).  See docs/formatting.md and docs/review.md.

Exit codes, as for every command: 0 fine; 1 `fmt --check` found a file to reformat, or
`diff --fail-over` saw the budget grow past its threshold; 2 bad input (a plan that does
not parse, a revision or file git does not have); 70 an internal error of ours.
"""

from __future__ import annotations

import os
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path

from apsidal.lang.errors import PlanError
from apsidal.lang.units import UNITS, to_internal

from .cliutil import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_INTERNAL, EXIT_OK, UsageError, write_atomic
from .cliutil import console as _console


def register(sub) -> None:
    fmt = sub.add_parser("fmt", help="rewrite plans in the one canonical layout",
                         description="Print, check or rewrite plans in the canonical layout "
                         "(docs/formatting.md).  Comments are kept; the result is proven to "
                         "parse to the same plan before anything is written.")
    fmt.add_argument("plans", nargs="+", metavar="PLAN", help="plan files (.aps); `-` reads "
                     "standard input")
    mode = fmt.add_mutually_exclusive_group()
    mode.add_argument("--check", action="store_true", help="change nothing; print a unified "
                      "diff and exit 1 when a file is not in canonical layout")
    mode.add_argument("--write", action="store_true", help="rewrite files in place "
                      "(atomically) when their layout is not canonical")
    mode.add_argument("--diff", action="store_true", help="change nothing; print a unified "
                      "diff of what --write would change (exit 0)")
    fmt.set_defaults(func=cmd_fmt)

    d = sub.add_parser("diff", help="show what a revision did to the budget",
                       description="Compare the budgets of two plans, or of one plan at two "
                       "git revisions (docs/review.md).")
    d.add_argument("plans", nargs="*", metavar="PLAN",
                   help="OLD.aps NEW.aps, or one plan with --rev")
    d.add_argument("--rev", metavar="REV", help="read the old side from git at REV "
                   "(the new side is the working file), or both sides with REV_A..REV_B; "
                   "default HEAD when one plan is given")
    d.add_argument("--format", choices=("table", "markdown", "json", "csv", "html"),
                   default="table", help="html: one self-contained page with the two "
                   "waterfalls side by side (docs/pictures.md)")
    d.add_argument("--fail-over", action="append", default=[], metavar="AMOUNT",
                   help="exit 1 when delta-v with margin grows by more than a speed "
                   "(`10m/s` or `10 m/s`) or propellant by more than a mass (`2kg`); "
                   "repeat the option for a second threshold")
    d.add_argument("--no-findings", action="store_true",
                   help="skip the `check` rules (faster); findings are not compared")
    d.add_argument("--git-textconv", metavar="FILE", help="print FILE with its budget "
                   "appended, for git's diff textconv (docs/review.md)")
    d.set_defaults(func=cmd_diff)


# --- fmt -----------------------------------------------------------------------------


@dataclass
class FmtReport:
    """What `fmt` did to its files, worded for the summary line."""

    changed: list[str] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)
    failed: list[str] = field(default_factory=list)
    internal: list[str] = field(default_factory=list)

    def summary(self, check: bool) -> str:
        def count(n: int, what: str) -> str:
            return f"{n} plan{'s' if n != 1 else ''} {what}"

        verb = "not in canonical layout" if check else "rewritten in canonical layout"
        parts = [count(len(self.changed), verb)] if self.changed else []
        if self.unchanged:
            parts.append(count(len(self.unchanged), "already canonical"))
        if self.failed:
            parts.append(count(len(self.failed), "could not be read or parsed"))
        if self.internal:
            parts.append(count(len(self.internal), "hit an internal error"))
        return "fmt: " + ", ".join(parts) + "."

    def exit_code(self, check: bool) -> int:
        if self.internal:
            return EXIT_INTERNAL
        if self.failed:
            return EXIT_BAD_INPUT
        return EXIT_FINDINGS if check and self.changed else EXIT_OK


def _read_plan(path: str) -> tuple[str, object]:
    """The file's text exactly as stored and its parsed plan."""
    from apsidal.lang.parse import parse, parse_file

    if path == "-":
        text = sys.stdin.read()
        return text, parse(text.removeprefix("\ufeff"), "<stdin>")
    plan = parse_file(path)  # every read or decode error as a located PlanError
    return Path(path).read_bytes().decode("utf-8"), plan


def cmd_fmt(args) -> int:
    if args.write and "-" in args.plans:
        raise UsageError("`fmt --write` rewrites files; standard input (`-`) has no file "
                         "to write back")
    report = FmtReport()
    for path in args.plans:
        _fmt_one(path, args, report, header=len(args.plans) > 1)
    if args.check or args.write or report.failed or report.internal:
        print(report.summary(args.check), file=sys.stderr)
    return report.exit_code(args.check)


def _fmt_one(path: str, args, report: FmtReport, header: bool) -> None:
    from apsidal.lang.format import FormatError, format_plan

    try:
        original, plan = _read_plan(path)
        formatted = format_plan(plan)
    except PlanError as err:
        print(err.render(), file=sys.stderr)
        report.failed.append(path)
        return
    except FormatError as err:
        print(f"apsidal: internal error: {err}\n  `{path}` is left as it is; this is a "
              "bug in apsidal, please report it with the plan", file=sys.stderr)
        report.internal.append(path)
        return
    if not (args.check or args.write or args.diff):
        if header:
            sys.stdout.write(f"# ==> {path} <==\n")
        sys.stdout.write(formatted)
    if formatted == original:
        report.unchanged.append(path)
        return
    if args.check or args.diff:
        import difflib

        diff = "".join(difflib.unified_diff(
            original.splitlines(keepends=True), formatted.splitlines(keepends=True),
            fromfile=path, tofile=f"{path} (formatted)"))
        if sys.stdout.isatty() and not os.environ.get("NO_COLOR"):  # plain to a pipe
            from apsidal.lang.highlight import ansi_diff

            diff = ansi_diff(diff)
        sys.stdout.write(diff)
    elif args.write:
        try:
            write_atomic(path, formatted)
        except OSError as err:
            print(f"apsidal: error: cannot write `{path}`: {err.strerror or err}; the file "
                  "is left as it was", file=sys.stderr)
            report.failed.append(path)
            return
        print(f"rewrote {path} in canonical layout", file=sys.stderr)
    report.changed.append(path)


# --- diff ----------------------------------------------------------------------------


@dataclass
class Side:
    """One side of a diff: a priced plan, or why there is none."""

    label: str
    program: object = None
    report: dict | None = None
    error: PlanError | None = None  # the plan does not parse or lower
    flight_error: PlanError | None = None  # priced, but it cannot be flown to its end


def _price(side: Side, findings: bool) -> Side:
    from .budget import budget
    from .evaluate import run

    result = run(side.program)
    side.report = budget(result)
    side.flight_error = result.error
    if findings:
        side.report["findings"] = _findings(side.program)
    return side


def _findings(program) -> list[dict]:
    try:
        from .check import findings_for
    except ImportError:  # the check rules are optional for a diff
        return []
    try:
        return findings_for(program)
    except PlanError:  # a plan that cannot be flown has no findings to compare
        return []


def _side_from_file(path: str, findings: bool) -> Side:
    from apsidal.lang.parse import parse_file

    from .lower import lower

    try:
        program = lower(parse_file(path))
    except PlanError as err:
        return Side(path, error=err)
    return _price(Side(path, program), findings)


def _side_from_git(path: str, rev: str, findings: bool) -> Side:
    from apsidal.lang.parse import parse

    from .gitsource import GitError, read_at
    from .lower import lower

    try:
        text, label = read_at(path, rev)
    except GitError as err:
        raise UsageError(str(err)) from None
    try:
        program = lower(parse(text, label))
    except PlanError as err:
        return Side(label, error=err)
    return _price(Side(label, program), findings)


def _sides(args) -> tuple[Side, Side]:
    from .gitsource import GitError, split_range

    findings = not args.no_findings
    if len(args.plans) == 2:
        if args.rev:
            raise UsageError("give either two plan files or one plan with --rev, not both")
        return (_side_from_file(args.plans[0], findings),
                _side_from_file(args.plans[1], findings))
    if len(args.plans) != 1:
        amounts = [p for p in args.plans if QUANTITY.fullmatch(p) and not Path(p).exists()]
        hint = (f"; `{amounts[0]}` looks like a threshold: give each its own --fail-over"
                if amounts else "")
        raise UsageError("diff takes OLD.aps NEW.aps, or one plan with --rev REV "
                         f"(got {len(args.plans)} plans){hint}")
    path = args.plans[0]
    try:
        old_rev, new_rev = split_range(args.rev or "HEAD")
    except GitError as err:
        raise UsageError(str(err)) from None
    old = _side_from_git(path, old_rev, findings)
    new = (_side_from_git(path, new_rev, findings) if new_rev is not None
           else _side_from_file(path, findings))
    return old, new


QUANTITY = re.compile(r"\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)"
                      r"\s*([A-Za-z%]\S*)\s*")


@dataclass(frozen=True)
class Threshold:
    text: str
    key: str  # the totals key it limits
    limit: float  # m/s or kg

    def exceeded(self, change: dict) -> bool:
        from .diff import grows_past

        return grows_past(change, self.key, self.limit)


def parse_threshold(text: str) -> Threshold:
    """`10m/s`, `10 m/s`, `0.01 km/s`, `2kg`, `0.5 t` as a limit on the budget's growth.

    >>> parse_threshold("10 m/s")
    Threshold(text='10 m/s', key='dv_with_margin_m_s', limit=10.0)
    >>> parse_threshold("0.5t").limit
    500.0
    """
    m = QUANTITY.fullmatch(text)
    unit = m.group(2) if m else ""
    dimension = UNITS.get(unit, ("",))[0]
    if m is None or dimension not in ("speed", "mass"):
        raise UsageError(f"--fail-over takes a speed or a mass, such as `10m/s` or `2kg`; "
                         f"got `{text}`")
    value = to_internal(float(m.group(1)), unit)
    if dimension == "speed":
        return Threshold(text, "dv_with_margin_m_s", round(value * 1000.0, 12))
    return Threshold(text, "propellant_kg", value)


def _one_sided(good: Side, broken: Side, good_is_new: bool) -> dict:
    """The diff's JSON when one side does not parse: the other side's budget in full."""
    status = "added" if good_is_new else "removed"
    totals = good.report["totals"]
    return {"old": None if good_is_new else totals, "new": totals if good_is_new else None,
            "change": None,
            "steps": [{"name": s["name"], "status": status,
                       "old": None if good_is_new else s, "new": s if good_is_new else None}
                      for s in good.report["steps"]],
            "error": {"side": "old" if good_is_new else "new",
                      "message": broken.error.render()}}


def _emit_one_sided(args, old: Side, new: Side) -> int:
    from . import diff_render, render

    broken, good = (old, new) if old.error else (new, old)
    print(broken.error.render(), file=sys.stderr)
    which = "old" if broken is old else "new"
    print(f"apsidal: the {which} plan does not parse, so there is no diff; the "
          f"{'new' if which == 'old' else 'old'} plan's budget follows", file=sys.stderr)
    if args.format == "json":
        sys.stdout.write(diff_render.to_json(_one_sided(good, broken, good is new)) + "\n")
    elif args.format == "csv":
        sys.stdout.write(diff_render.to_csv(_one_sided(good, broken, good is new)))
    elif args.format == "html":  # no page for half a diff: the error says why
        pass
    elif args.format == "markdown":
        sys.stdout.write(f"**The {which} plan (`{broken.label}`) does not parse.** "
                         f"Budget of `{good.label}`:\n\n" + render.markdown(good.report))
    else:
        render.table(good.report, _console())
    return EXIT_BAD_INPUT


def cmd_diff(args) -> int:
    from . import diff_render
    from .diff import diff_reports, step_info

    if args.git_textconv:
        if args.plans or args.rev:
            raise UsageError("--git-textconv takes only the file git hands it")
        return textconv(args.git_textconv)
    thresholds = [parse_threshold(t) for t in args.fail_over]
    if args.format == "html":
        from .picture_cli import need_matplotlib

        need_matplotlib()
    old, new = _sides(args)
    if old.error and new.error:
        for side in (old, new):
            print(side.error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    if old.error or new.error:
        return _emit_one_sided(args, old, new)
    result = diff_reports(old.report, new.report, step_info(old.program),
                          step_info(new.program), findings=not args.no_findings)
    from .trade import changes

    traded = changes(old.program.plan, new.program.plan)  # trade studies: text, not budget
    if traded:
        result["trades"] = traded
    if args.format == "json":
        sys.stdout.write(diff_render.to_json(result) + "\n")
    elif args.format == "csv":
        sys.stdout.write(diff_render.to_csv(result))
    elif args.format == "markdown":
        sys.stdout.write(diff_render.markdown(result, old.label, new.label))
    elif args.format == "html":
        from .report_html import diff_page

        sys.stdout.write(diff_page(result, old.report, new.report, old.label, new.label))
    else:
        diff_render.table(result, _console(), old.label, new.label)
    if old.flight_error is not None:
        print(f"note: the old plan cannot be flown to its end:\n{old.flight_error.render()}",
              file=sys.stderr)
    if new.flight_error is not None:
        print(new.flight_error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    over = [t for t in thresholds if t.exceeded(result["change"])]
    for t in over:
        grew = result["change"][t.key]
        unit = "m/s delta-v with margin" if t.key.endswith("m_s") else "kg propellant"
        print(f"apsidal: the budget grew past --fail-over {t.text}: {grew:+.3f} {unit}",
              file=sys.stderr)
    lost_fit = result["feasible"]["old"] and not result["feasible"]["new"]
    if lost_fit:
        print(f"apsidal: the new plan no longer fits its load: it needs "
              f"{result['new']['shortfall_kg']:,.3f} kg more", file=sys.stderr)
    return EXIT_FINDINGS if over or lost_fit else EXIT_OK


def textconv(path: str) -> int:
    """The file's text with its budget appended; never fails, so `git diff` never does."""
    from apsidal.lang.parse import parse

    from . import diff_render
    from .budget import budget
    from .evaluate import run
    from .lower import lower

    try:
        text = Path(path).read_bytes().decode("utf-8", errors="replace")
    except OSError as err:
        raise UsageError(f"cannot read `{path}`: {err.strerror or err}") from None
    sys.stdout.write(text if text.endswith("\n") or not text else text + "\n")
    try:
        report = budget(run(lower(parse(text.removeprefix("\ufeff"), "plan"))))
    except PlanError as err:
        where = f"line {err.span.line}: " if err.span else ""
        sys.stdout.write(f"\n# ---- budget computed by apsidal: not available, the plan "
                         f"does not parse: {where}{err.message} ----\n")
        return EXIT_OK
    sys.stdout.write(diff_render.budget_text(report))
    return EXIT_OK
