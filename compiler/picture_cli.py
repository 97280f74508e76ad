"""`apsidal plot` (one picture as SVG or PNG) and `apsidal report` (one self-contained
HTML file).  See docs/pictures.md.

Both import matplotlib only here, when they run.  Exit codes as for `run`: 0 fine; 1 the
plan does not fit its load (the picture or report is still written, with the
shortfall) or an expectation failed; 2 bad input or a plan that cannot be flown (nothing
is written); 70 an internal error of ours.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

from .cliutil import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_OK, UsageError

KINDS = ("chain", "waterfall", "mass", "sweep")
VIEWS = ("top", "3d")
FORMATS = {".svg": "svg", ".png": "png"}


def register(sub) -> None:
    p = sub.add_parser("plot", help="draw a picture of a plan (or of a sweep) as SVG or PNG",
                       description="Draw one picture of a plan: its orbit chain, where the "
                       "delta-v goes (waterfall), its mass over the mission; or the curves "
                       "of a trade study from `apsidal sweep --format json` (docs/pictures.md).")
    p.add_argument("plan", metavar="PLAN", help="plan file (.aps), `-` for standard input; "
                   "for --kind sweep, the JSON file `apsidal sweep --format json` wrote")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="the picture to write: FILE.svg or FILE.png")
    p.add_argument("--kind", choices=KINDS, default="chain",
                   help="chain (default): the orbits around the body with the burns; "
                   "waterfall: delta-v per step adding up to the total; mass: mass and "
                   "propellant against time; sweep: a trade study's totals")
    p.add_argument("--view", choices=VIEWS, default="top",
                   help="chain only: seen from above the start orbit's plane (top, default) "
                   "or in 3-D")
    p.add_argument("--metric", metavar="KEY", default=None,
                   help="sweep only: the totals key to draw (default: the sweep's own "
                   "`minimise`, else dv_with_margin_m_s)")
    p.set_defaults(func=cmd_plot)

    r = sub.add_parser("report", help="write a one-file HTML review report of a plan",
                       description="Write one self-contained HTML file: the budget table, "
                       "the pictures (inline SVG), the expectations, the findings of "
                       "`check` with their rewrites, and the caution.  Nothing in it is "
                       "fetched from anywhere; it reads without JavaScript.")
    r.add_argument("plan", metavar="PLAN", help="plan file (.aps); `-` reads standard input")
    r.add_argument("-o", "--output", required=True, metavar="FILE.html")
    r.add_argument("--no-findings", action="store_true",
                   help="skip the `check` rules (faster); the report then says so")
    r.set_defaults(func=cmd_report)


def need_matplotlib() -> None:
    """A clear word, not a traceback, where the drawing library is not installed."""
    import importlib.util

    if importlib.util.find_spec("matplotlib") is None:
        raise UsageError("drawing needs matplotlib, which is not installed: "
                         "pip install 'apsidal[plot]' (or pip install matplotlib)")


def _format_of(path: str) -> str:
    fmt = FORMATS.get(Path(path).suffix.lower())
    if fmt is None:
        raise UsageError(f"-o {path}: the picture is written as .svg or .png; name the "
                         "file with one of those endings")
    return fmt


def _target(path: str) -> Path:
    out = Path(path)
    if not out.parent.is_dir():
        raise UsageError(f"cannot write `{out}`: the folder `{out.parent}` does not exist")
    return out


def _write(out: Path, data: bytes) -> None:
    try:
        out.write_bytes(data)
    except OSError as err:
        raise UsageError(f"cannot write `{out}`: {err.strerror or err}") from None


def price(path: str):
    """The plan's program, priced chain and budget report (with `run`'s own findings)."""
    from .budget import budget
    from .cli import self_consistency
    from .evaluate import run
    from .load import load

    program = load(path)
    result = run(program)
    report = budget(result)
    report["findings"] = [f.as_dict() for f in self_consistency(program, result, report)]
    return program, result, report


def _outcome(result, report) -> int:
    """`run`'s exit code and message for a priced plan."""
    from .budget import shortfall_text

    if result.error is not None:
        print(result.error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    if not report["feasible"]:
        print(f"apsidal: the plan does not fit its load: {shortfall_text(report)}",
              file=sys.stderr)
        return EXIT_FINDINGS
    if not report["totals"]["expectations_met"] or any(
            f["severity"] == "error" for f in report["findings"]):
        return EXIT_FINDINGS
    return EXIT_OK


def picture(kind: str, result, report: dict, view: str = "top", prefix: str = "",
            colours: dict | None = None, title: str | None = None, width=None):
    """The matplotlib figure of one kind of picture of a priced plan."""
    from . import draw, pictures

    plan = report["plan"] or report["source"]
    note = draw.note_for(report)
    colours = colours if colours is not None else pictures.colours(
        pictures.priced_names(report))
    if kind == "chain":
        return draw.chain_figure(pictures.chains(result, report), colours,
                                 title if title is not None else
                                 f"{plan}: orbit chain", view, prefix, note)
    if kind == "waterfall":
        return draw.waterfall_figure(pictures.waterfall(report), colours,
                                     title if title is not None else
                                     f"{plan}: where the delta-v goes", prefix,
                                     width, note)
    return draw.mass_figure(pictures.mass_series(report), colours,
                            title if title is not None else
                            f"{plan}: mass over the mission", prefix, note)


def read_sweep(path: str) -> dict:
    try:
        text = sys.stdin.read() if path == "-" else Path(path).read_text(encoding="utf-8")
    except OSError as err:
        raise UsageError(f"cannot read `{path}`: {err.strerror or err}") from None
    except UnicodeDecodeError:
        raise UsageError(f"`{path}` is not UTF-8 text; --kind sweep reads the JSON "
                         "`apsidal sweep --format json` writes") from None
    try:
        return json.loads(text)
    except json.JSONDecodeError as err:
        hint = " (is it a plan? --kind sweep reads a sweep's JSON)" if path.endswith(
            ".aps") else ""
        raise UsageError(f"{path}:{err.lineno}:{err.colno}: not JSON: {err.msg}{hint}") from None


def cmd_plot(args) -> int:
    fmt = _format_of(args.output)
    need_matplotlib()
    from . import draw

    out = _target(args.output)
    if args.kind == "sweep":
        from .pictures import SweepError, sweep_series

        data = read_sweep(args.plan)
        try:
            series = sweep_series(data, args.metric)
        except SweepError as err:
            raise UsageError(f"{args.plan}: {err}") from None
        _write(out, draw.render(draw.sweep_figure(series, data.get("plan") or ""), fmt))
        return EXIT_OK
    if args.metric:
        raise UsageError("--metric is for --kind sweep")
    if args.view != "top" and args.kind != "chain":
        raise UsageError("--view is for --kind chain")
    _, result, report = price(args.plan)
    if result.error is not None:
        return _outcome(result, report)
    _write(out, draw.render(picture(args.kind, result, report, args.view), fmt))
    return _outcome(result, report)


def cmd_report(args) -> int:
    need_matplotlib()
    from .report_html import plan_page

    if Path(args.output).suffix.lower() not in (".html", ".htm"):
        raise UsageError(f"-o {args.output}: the report is one HTML file; name it "
                         "FILE.html")
    out = _target(args.output)
    program, result, report = price(args.plan)
    if result.error is not None:
        return _outcome(result, report)
    findings, cut = (None, []) if args.no_findings else _check_findings(program, result)
    _write(out, plan_page(result, report, findings, cut).encode("utf-8"))
    return _outcome(result, report)


def _check_findings(program, result) -> tuple[list[dict], list[str]]:
    """What `apsidal check` reports of the plan, with every rewrite (default settings),
    and the rules its time limit cut short."""
    from .check import Budget, check_program

    budget = Budget()
    found = [f.as_dict() for f in check_program(program, None, result, budget)]
    return found, sorted(set(budget.cut_short))
