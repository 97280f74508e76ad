"""`apsidal sweep PLAN`: trade studies (``compiler/sweep.py``) on the command line.

The numbers come from the evaluator through ``sweep.price``; this module reads the
options (or the plan's `trade` statement), words and lays out the results: a table that
fits the terminal, strict CSV, or JSON (docs/output.md, docs/schema/sweep.schema.json).
"""

from __future__ import annotations

import argparse
import csv
import io
import math
import re
import sys

import numpy as np

from .cliutil import EXIT_FINDINGS, EXIT_OK, UsageError, screen_width

RANGE_OPTIONS = ("--vary", "--disperse", "--tolerance")  # their unit may come apart
_NUM = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_VARY = re.compile(rf"\s*([^=\s]+)\s*=\s*({_NUM})\s*(\S*?)\s*\.\.\s*({_NUM})\s*(\S*)\s*")
_DISPERSE = re.compile(rf"\s*([^=\s]+)\s*=\s*(?:±|\+-|\+/-)?\s*({_NUM})\s*(\S*)\s*")
_AMOUNT = re.compile(rf"\s*({_NUM})\s*(\S*)\s*")
_VALUES_SAID = re.compile(rf"^(?:[^\s=,:]+ = {_NUM}(?: \S+?)?(?:, |: ))+(?=the plan is refused)")


def register(sub) -> None:
    p = sub.add_parser(
        "sweep", help="price a plan over ranges of its quantities (a trade study)",
        description="Price a plan for many values of its quantities in one batch: a grid "
        "(--vary), the best value of one quantity (--minimise) or normal dispersions "
        "(--disperse).  NAME.FIELD names a quantity as the plan writes it: a step and "
        "its goal (`geo.circular`, `tilt.inclination`, `geo.via`, `NAME.margin`, a "
        "coast's `for`, a drop's `mass`, an allowance's `dv`), `craft.dry`, "
        "`craft.propellant`, an engine's `isp` or `thrust` (`main.isp`), `start.FIELD`, "
        "`plan.margin`, `plan.reserve`.  Without options the plan's `trade` statement is "
        "read.  Exit 2 for bad input; variants that cannot be flown are marked with "
        "their reason.")
    p.add_argument("plan", help="plan file (.aps); `-` reads standard input")
    p.add_argument("--vary", action="append", default=[], metavar="NAME.FIELD=LOW..HIGH UNIT",
                   help="a range of one quantity, e.g. 'geo.circular=30000..42000 km'; "
                   "several make a grid")
    p.add_argument("--points", type=int, default=None, metavar="N",
                   help="values per range, ends included (default 11)")
    p.add_argument("--minimise", "--minimize", choices=("propellant", "dv", "elapsed"),
                   default=None, help="find the value of the one --vary quantity that "
                   "minimises this total")
    p.add_argument("--tolerance", default=None, metavar="AMOUNT",
                   help="how closely --minimise finds the value, in the range's unit "
                   "(default a millionth of the range)")
    p.add_argument("--disperse", action="append", default=[],
                   metavar="NAME.FIELD=±SIGMA UNIT",
                   help="a normal dispersion (1-sigma) of one quantity about the plan's "
                   "value, e.g. 'start.periapsis=±5 km'")
    p.add_argument("--samples", type=int, default=None, metavar="N",
                   help="samples of --disperse (default 10000)")
    p.add_argument("--seed", type=int, default=None, help="seed of the samples (default 1)")
    p.add_argument("--trade", default=None, metavar="NAME",
                   help="the plan's `trade NAME` statement to run (the first by default)")
    p.add_argument("--format", choices=("table", "json", "csv"), default="table")
    p.add_argument("--chunk", type=int, default=None, help=argparse.SUPPRESS)
    p.set_defaults(func=cmd_sweep)


def join_ranges(argv: list[str]) -> list[str]:
    """``--vary geo.circular=30000..42000 km`` with the unit apart, as one argument.

    >>> join_ranges(["sweep", "a.aps", "--vary", "g.circular=1..2", "km", "--points", "3"])
    ['sweep', 'a.aps', '--vary', 'g.circular=1..2 km', '--points', '3']
    """
    from apsidal.lang.units import UNITS

    out, i = [], 0
    while i < len(argv):
        out.append(argv[i])
        if (argv[i] in RANGE_OPTIONS and i + 2 < len(argv) and argv[i + 2]
                and argv[i + 2] in UNITS and not argv[i + 1].endswith(tuple(u for u in UNITS if u))):
            out.append(f"{argv[i + 1]} {argv[i + 2]}")
            i += 3
            continue
        i += 1
    return out


# --- reading the study ----------------------------------------------------------------


class Study:
    """What to price: the plan, the knobs and their values, from options or a statement."""

    def __init__(self):
        self.vary: list[tuple[str, float, float, str, object]] = []  # target lo hi unit span
        self.disperse: list[tuple[str, float, str, object]] = []  # target sigma unit span
        self.points: int | None = None
        self.minimise: str | None = None
        self.tolerance: tuple[float, str] | None = None
        self.samples: int | None = None
        self.seed: int | None = None
        self.span = None  # the statement's span, when read from the plan
        self.spans: dict = {}  # item (`minimise`, `tolerance`, ...): its span in the plan

    def where(self, item: str, message: str, hint: str | None, source):
        """A mistake in ``item``: located under it when the plan's statement gave it (and
        worded by the item's name), else a command-line error (worded `--item`)."""
        from . import sweep

        span = self.spans.get(item)
        word = item if span is not None else f"--{item}"
        return sweep._complain(message.format(item=word), hint and hint.format(item=word),
                               span, source)


def _vary_option(text: str):
    m = _VARY.fullmatch(text)
    if not m:
        raise UsageError(f"--vary `{text}` is not NAME.FIELD=LOW..HIGH UNIT; e.g. "
                         "--vary 'geo.circular=30000..42000 km'")
    target, lo, u1, hi, u2 = m.groups()
    if u1 and u2 and u1 != u2:
        raise UsageError(f"--vary `{text}` gives two units (`{u1}` and `{u2}`); give one "
                         "after the range")
    return target, float(lo), float(hi), u2 or u1


def _disperse_option(text: str):
    m = _DISPERSE.fullmatch(text)
    if not m:
        raise UsageError(f"--disperse `{text}` is not NAME.FIELD=±SIGMA UNIT; e.g. "
                         "--disperse 'start.periapsis=±5 km'")
    return m.group(1), float(m.group(2)), m.group(3)


def study_from_args(args, plan) -> Study:
    s = Study()
    for text in args.vary:
        s.vary.append((*_vary_option(text), None))
    for text in args.disperse:
        s.disperse.append((*_disperse_option(text), None))
    if not s.vary and not s.disperse:
        from .trade import study_from_plan

        s = study_from_plan(plan, args.trade, Study)
    elif args.trade is not None:
        raise UsageError("--trade picks a trade written in the plan; leave it out with "
                         "--vary or --disperse")
    for item in ("points", "minimise", "tolerance", "samples", "seed"):
        if getattr(args, item) is not None:
            s.spans.pop(item, None)
    if args.points is not None:
        s.points = args.points
    if args.minimise is not None:
        s.minimise = args.minimise
    if args.tolerance is not None:
        m = _AMOUNT.fullmatch(args.tolerance)
        if not m:
            raise UsageError(f"--tolerance `{args.tolerance}` is not an amount; e.g. "
                             "--tolerance '1 km'")
        s.tolerance = (float(m.group(1)), m.group(2))
    if args.samples is not None:
        s.samples = args.samples
    if args.seed is not None:
        s.seed = args.seed
    return s


# --- running it -------------------------------------------------------------------------


class Progress:
    """A bar on standard error while variants are priced, when it is a terminal."""

    def __init__(self, total: int, what: str = "variants"):
        self.total, self.what = total, what
        self.on = total > 0 and sys.stderr.isatty()

    def __call__(self, done: int) -> None:
        if not self.on:
            return
        width = 30
        full = int(width * done / self.total)
        sys.stderr.write(f"\rpricing {done:,}/{self.total:,} {self.what} "
                         f"[{'#' * full}{' ' * (width - full)}] {100 * done / self.total:3.0f}%")
        sys.stderr.flush()

    def close(self) -> None:
        if self.on:
            sys.stderr.write("\r\033[K")
            sys.stderr.flush()


def cmd_sweep(args) -> int:
    from apsidal.lang.parse import parse

    from . import sweep
    from .lower import lower

    path = args.plan
    if path == "-":
        text, path = sys.stdin.read().removeprefix("\ufeff"), "<stdin>"
    else:
        try:
            with open(path, encoding="utf-8") as fh:
                text = fh.read().removeprefix("\ufeff")
        except OSError as err:
            raise UsageError(f"cannot read {path}: {err.strerror}") from None
    plan = parse(text, path)
    program = lower(plan)
    study = study_from_args(args, plan)
    if study.vary and study.disperse:
        raise _where(study, "a trade either varies quantities over ranges or disperses "
                     "them, not both", "run the two as two studies", plan)
    source = plan.source
    if study.disperse:  # the items of a grid have no meaning for samples: say so
        for item in ("minimise", "tolerance", "points"):
            if getattr(study, item) is not None:
                raise study.where(item, "{item} goes with `vary` ranges; this trade "
                                  "disperses", "leave it out, or vary the quantity over a "
                                  "range (`vary NAME.FIELD LOW..HIGH UNIT`)", source)
    else:
        for item in ("samples", "seed"):
            if getattr(study, item) is not None:
                raise study.where(item, "{item} goes with `disperse`; this trade varies "
                                  "quantities over ranges", "leave it out, or give "
                                  "`points N` for the number of values per range", source)
        if study.tolerance is not None and not study.minimise:
            raise study.where("tolerance", "{item} says how closely `minimise` finds the "
                              "best value, and this trade does not minimise",
                              "add `minimise propellant|dv|elapsed`, or leave it out", source)
        if study.minimise and len(study.vary) != 1:
            raise study.where("minimise", "{item} searches one quantity; the trade varies "
                              f"{len(study.vary)}", "vary one quantity", source)
    if study.points is not None and study.points < 1:
        raise _where(study, f"points must be at least 1, got {study.points}", None, plan)
    knobs, units = [], []
    entries = study.vary or study.disperse
    for entry in entries:
        target, unit, span = entry[0], entry[-2], entry[-1]
        knob = sweep.locate(plan, program, target, span)
        if not unit and knob.quantity.unit and knob.dimension != "number":
            raise sweep._complain(f"the values of `{target}` need a unit",
                                  f"the plan gives `{knob.quantity.text()}`", span, source)
        sweep.check_unit(knob, unit, span, source)
        knobs.append(knob)
        units.append(unit)
    seen = set()
    for entry, knob in zip(entries, knobs):
        if knob.target in seen:
            raise sweep._complain(f"`{knob.target}` is named twice", "name each quantity "
                                  "once", entry[-1], source)
        seen.add(knob.target)
    chunk = args.chunk or sweep.CHUNK
    if study.vary:
        for target, lo, hi, unit, span in study.vary:
            if not (math.isfinite(lo) and math.isfinite(hi)) or lo > hi:
                raise sweep._complain(f"the range of `{target}` is empty ({sweep.number_text(lo)}"
                                      f"..{sweep.number_text(hi)})",
                                      "give the low end first", span, source)
        points = study.points or 11
        tol = None
        if study.minimise:
            points = max(points, 3)
            tol = _tolerance(study, units[0], source)
        X = sweep.grid([(lo, hi, points) for _, lo, hi, _, _ in study.vary])
        # values past a bound of the plan (a target under the surface) are rows not flown
        bases = [k.base(u) for k, u in zip(knobs, units)]
        held, refused = sweep.admissible(text, path, knobs, units, X, bases)
        # and combinations past a bound the quantities share (a bi-elliptic apoapsis
        # below its varied target): rows not flown too
        joint, admitted = sweep.jointly(text, path, knobs, units, X, held, study.span)
        refused.merge(np.ones(X.shape[0], dtype=bool), joint)
        extremes = [(float(held[:, j].min()), float(held[:, j].max()))
                    for j in range(len(knobs))]
        model = sweep.Model(text, path, knobs, units, extremes, study.span,
                            admitted=admitted)
        if study.minimise:
            priced, best = sweep.minimise(model, X, study.minimise, tol, held, refused)
            at = np.array([[best.value]])
            there = sweep.price(model, at)
            # the plan at the best value is a plan like any other: short of its load or
            # missing its own expectations, it is said and the exit is 1, as `run` gives
            sound = bool(there.feasible[0] and there.totals["expectations_met"][0])
            if args.format == "csv":  # the grid that bracketed it, then the best
                sweep_csv_of(model, X, priced, (at, there), sys.stdout)
                return EXIT_OK if sound else EXIT_FINDINGS
            report = sweep_report(model, X, priced, plan, points)
            report["best"] = best_dict(model, best, study.minimise, there)
            emit(report, args.format, sweep_table, None)
            return EXIT_OK if sound else EXIT_FINDINGS
        else:
            bar = Progress(X.shape[0])
            try:
                priced = sweep.price(model, held, bar, chunk)
            finally:
                bar.close()
            priced.refuse(refused)
            if args.format == "csv":
                sweep_csv_of(model, X, priced, out=sys.stdout)
            elif args.format == "json":
                write_json(sweep_report(model, X, priced, plan, points, variants=False),
                           variants_of(model, X, priced), sys.stdout)
            else:
                emit(sweep_report(model, X, priced, plan, points), "table", sweep_table, None)
        return EXIT_OK
    n = study.samples or 10000
    seed = 1 if study.seed is None else study.seed
    if n < 2:
        raise _where(study, f"a dispersion needs at least 2 samples, got {n}", None, plan)
    sigmas = [s for _, s, _, _ in study.disperse]
    for (target, s, _, span) in study.disperse:
        if not (math.isfinite(s) and s > 0):
            raise sweep._complain(f"the dispersion of `{target}` must be positive", None,
                                  span, source)
    bases = [k.base(u) for k, u in zip(knobs, units)]
    X = sweep.samples(bases, sigmas, n, seed)
    # samples the plan refuses (past a bound of lowering) are kept, not flown, with why
    # a sample is a drawn orbit: crossed apsides are flown as that ellipse turned half a
    # turn (sweep.variant_text); samples the plan refuses (past a bound of lowering) are
    # kept, not flown, with why
    held, refused = sweep.admissible(text, path, knobs, units, X, bases, mirror=True)
    joint, admitted = sweep.jointly(text, path, knobs, units, X, held, study.span,
                                    mirror=True)
    refused.merge(np.ones(n, dtype=bool), joint)
    extremes = [(float(held[:, j].min()), float(held[:, j].max())) for j in range(len(knobs))]
    model = sweep.Model(text, path, knobs, units, extremes, study.span, mirror=True,
                        admitted=admitted)
    bar = Progress(n, "samples")
    try:
        priced = sweep.price(model, held, bar, chunk)
    finally:
        bar.close()
    priced.refuse(refused)
    report = dispersion_report(model, X, priced, plan, sigmas, seed)
    nominal = sweep.price(model, np.array([bases]))  # the plan as written
    report["nominal"] = ({k: sweep.finite_or_none(nominal.totals[k][0]) for k in
                          ("dv_m_s", "dv_with_margin_m_s", "propellant_kg")}
                         if nominal.flown[0] else None)
    # what a statistical line beside the plan as written must cover: the mean's shift from
    # the nominal plus three standard deviations of the spread (docs/physics.md, "Trades")
    stats = report["total"]["dv_m_s"]
    report["statistical_line_m_s"] = (
        None if stats["std"] is None or report["nominal"] is None else
        stats["mean"] - report["nominal"]["dv_m_s"] + 3.0 * stats["std"])
    emit(report, args.format, dispersion_table, dispersion_csv)
    return EXIT_OK


def _tolerance(study, unit: str, source) -> float | None:
    """The study's tolerance in the range's ``unit`` (None: the default)."""
    from apsidal.lang.units import UNITS

    if study.tolerance is None:
        return None
    value, tu = study.tolerance
    if tu and tu != unit:  # a bare amount is in the range's unit
        if tu not in UNITS or UNITS[tu][0] != UNITS[unit][0]:
            raise study.where("tolerance", "{item} is in " + f"`{tu}`, the range in "
                              + (f"`{unit}`" if unit else "no unit"),
                              f"give it in `{unit}` (or another {UNITS[unit][0]} unit)"
                              if unit else "give a bare number", source)
        value = value * UNITS[tu][1] / UNITS[unit][1]
    if not (math.isfinite(value) and value > 0):
        raise study.where("tolerance", "{item} must be positive", "e.g. `{item} 1 "
                          + (unit or "") + "`", source)
    return value


def _where(study, message, hint, plan):
    from . import sweep

    return sweep._complain(message, hint, study.span, plan.source)


# --- reports --------------------------------------------------------------------------


def _caution(model) -> str:
    from .budget import caution

    return caution(model.base)


def _columns(X, priced, names) -> tuple[dict, dict, list, list, dict]:
    """The variants' figures as Python lists, column by column (one conversion per
    column, not per cell): values, totals, flown, feasible, reasons by variant."""
    from .sweep import FLAGS, TOTALS

    values = {name: X[:, j].tolist() for j, name in enumerate(names)}
    totals = {k: priced.totals[k].tolist() for k in TOTALS}
    totals |= {k: priced.totals[k].astype(bool).tolist() for k in FLAGS}
    feasible = priced.feasible.tolist()
    reasons = {i: priced.reason(i) for i in np.flatnonzero(~priced.feasible).tolist()}
    # (a variant's reason is worded only when it is written)
    return values, totals, priced.flown.tolist(), feasible, reasons


def variants_of(model, X, priced, block: int = 1 << 16):
    """The variants as the JSON contract lays them out, ``block`` at a time."""
    from .sweep import FLAGS, TOTALS

    names = [k.target for k in model.knobs]
    keys = TOTALS + FLAGS
    for start in range(0, X.shape[0], block):
        part = slice(start, start + block)
        values, totals, flown, feasible, reasons = _columns(X[part], priced.take(part), names)
        for i in range(len(flown)):
            v = {"values": {name: values[name][i] for name in names},
                 "totals": {k: totals[k][i] for k in keys} if flown[i] else None,
                 "flown": flown[i], "feasible": feasible[i]}
            if not feasible[i]:
                v["reason"] = reasons[i]
            yield v


def sweep_report(model, X, priced, plan, points: int, variants: bool = True) -> dict:
    """The sweep's report; ``variants`` False leaves them to ``write_json``."""
    return {
        "plan": model.base.title,
        "source": model.base.source.path,
        "axes": [{"name": k.target, "unit": u, "low": float(X[:, j].min()),
                  "high": float(X[:, j].max()), "points": len(np.unique(X[:, j]))}
                 for j, (k, u) in enumerate(zip(model.knobs, model.units))],
        "variants": list(variants_of(model, X, priced)) if variants else [],
        "not_flown": int((~priced.flown).sum()),
        "caution": _caution(model),
    }


def write_json(report: dict, variants, out) -> None:
    """``report`` as JSON with ``variants`` (an iterable) written in as they come, one a
    line, so a million of them never stand in memory at once."""
    import json

    from .render import to_json

    mark = "\0variants\0"
    before, after = to_json({**report, "variants": mark}).split(json.dumps(mark), 1)
    out.write(before + "[")
    first = True
    for v in variants:
        out.write(("\n" if first else ",\n") + "    " + json.dumps(v, allow_nan=False))
        first = False
    out.write(("\n  ]" if not first else "]") + after + "\n")


def sweep_csv_of(model, X, priced, best: tuple | None = None, out=None,
                 block: int = 1 << 16) -> str | None:
    """The variants as CSV, straight from the arrays, written ``block`` rows at a time to
    ``out`` (returned as a string without it), so a million rows never stand in memory
    as text at once.

    One header, and a `record` column saying what each row is: `variant` (the varied
    values, the totals, empty for a variant that cannot be flown, flown, feasible and
    the reason), with --minimise one `best` (the value found and its totals), and the
    `caution` (in `message`)."""
    from .sweep import FLAGS, TOTALS

    names = [k.target for k in model.knobs]
    parts = [(X, priced, "variant")]
    if best is not None:
        parts.append(best + ("best",))
    head = (["record"] + [_unit_key(n, u) for n, u in zip(names, model.units)]
            + list(TOTALS + FLAGS) + ["flown", "feasible", "reason", "message"])
    buf = io.StringIO() if out is None else out
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(head)
    word = {True: "true", False: "false"}
    for values_x, got, record in parts:
        for start in range(0, values_x.shape[0], block):
            part = slice(start, start + block)
            values, totals, flown, feasible, reasons = _columns(values_x[part],
                                                                 got.take(part), names)
            n = len(flown)
            cols = [[record] * n] + [list(map(repr, values[name])) for name in names]
            for k in TOTALS:
                cols.append([repr(x) if ok else "" for x, ok in zip(totals[k], flown)])
            for k in FLAGS:
                cols.append([word[x] if ok else "" for x, ok in zip(totals[k], flown)])
            cols.append([word[x] for x in flown])
            cols.append([word[x] for x in feasible])
            cols.append([reasons.get(i) or "" for i in range(n)])
            cols.append([""] * n)
            w.writerows(zip(*cols))
    w.writerow(["caution"] + [""] * (len(head) - 2) + [_caution(model)])
    return buf.getvalue() if out is None else None


def best_dict(model, best, objective: str, there) -> dict:
    """The optimum found, and whether the plan at that value fits its load and meets its
    own expectations (``there``: that plan priced)."""
    from .sweep import OBJECTIVES, finite_or_none

    return {"name": model.knobs[0].target, "unit": model.units[0], "value": best.value,
            "tolerance": best.tolerance, "objective": objective,
            OBJECTIVES[objective]: finite_or_none(best.objective),
            "at_end_of_range": best.at_end, "evaluations": best.evaluations,
            "feasible": bool(there.feasible[0]),
            "expectations_met": bool(there.totals["expectations_met"][0]),
            "plan_text": model.text_with([best.value])}


def dispersion_report(model, X, priced, plan, sigmas, seed: int) -> dict:
    import numpy as np

    from .sweep import statistics

    ok = priced.flown
    steps = []
    for k, name in enumerate(priced.step_names):
        steps.append({"name": name,
                      "dv_m_s": statistics(priced.step_dv[ok, k]),
                      "propellant_kg": statistics(priced.step_propellant[ok, k])})
    total = {key: statistics(priced.totals[key][ok])
             for key in ("dv_m_s", "dv_with_margin_m_s", "propellant_kg")}
    n = X.shape[0]
    return {
        "plan": model.base.title,
        "source": model.base.source.path,
        "dispersions": [{"name": k.target, "unit": u, "base": k.base(u), "sigma": s}
                        for k, u, s in zip(model.knobs, model.units, sigmas)],
        "samples": n,
        "seed": seed,
        "not_flown": int((~ok).sum()),
        "not_flown_share": float((~ok).sum()) / n,
        "not_feasible_share": float((~priced.feasible).sum()) / n,
        "first_not_flown_reason": (priced.reason(int(np.argmin(ok))) if not ok.all()
                                   else None),
        "steps": steps,
        "total": total,
        "caution": _caution(model),
    }


def emit(report: dict, fmt: str, table, to_csv) -> None:
    if fmt == "json":
        from .render import to_json

        sys.stdout.write(to_json(report) + "\n")
    elif fmt == "csv":
        sys.stdout.write(to_csv(report))
    else:
        import shutil

        width = screen_width(sys.stdout) or shutil.get_terminal_size((100, 24)).columns
        sys.stdout.write(table(report, width))


def _csv(rows: list[list]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerows(rows)
    return buf.getvalue()


def _cell(x) -> str:
    if x is None:
        return ""
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        return repr(x)
    return str(x)


def _unit_key(name: str, unit: str) -> str:
    return f"{name}_{unit.replace('/', '_').replace('%', 'pct')}" if unit else name


def dispersion_csv(report: dict) -> str:
    """Records `step` (one per priced step and quantity), `total`, `share` (the shares of
    the samples that cannot be flown and that do not fit the load or reserve, in
    `value`, the first reason in `message`) and `caution`."""
    from .sweep import PERCENTILES, _pct_key

    keys = ["mean", "std"] + [_pct_key(p) for p in PERCENTILES]
    blank = [""] * len(keys)
    rows = [["record", "step", "quantity"] + keys + ["message", "value"]]
    for s in report["steps"]:
        for q in ("dv_m_s", "propellant_kg"):
            rows.append(["step", s["name"], q] + [_cell(s[q][k]) for k in keys] + ["", ""])
    for q, stats in report["total"].items():
        rows.append(["total", "", q] + [_cell(stats[k]) for k in keys] + ["", ""])
    rows.append(["share", "", "not_flown_share"] + blank
                + [report["first_not_flown_reason"] or "", _cell(report["not_flown_share"])])
    rows.append(["share", "", "not_feasible_share"] + blank
                + ["", _cell(report["not_feasible_share"])])
    rows.append(["caution", "", ""] + blank + [report["caution"], ""])
    return _csv(rows)


def _layout(head: list[str], rows: list[list[str]], right: list[bool], width: int = 0,
            give_way: tuple[int, ...] = ()) -> list[str]:
    """Columns laid out two spaces apart; the columns ``give_way`` (in that order) are
    left out while the lines are wider than ``width``."""
    keep = list(range(len(head)))
    for drop in give_way:
        if not width or _width(head, rows, keep) <= width:
            break
        keep.remove(drop)
    head, right = [head[i] for i in keep], [right[i] for i in keep]
    rows = [[r[i] for i in keep] for r in rows]
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h)
              for i, h in enumerate(head)]
    fmt = lambda cells: "  ".join((c.rjust(w) if r else c.ljust(w))
                                  for c, w, r in zip(cells, widths, right)).rstrip()
    return [fmt(head), fmt(["-" * w for w in widths])] + [fmt(r) for r in rows]


def _width(head, rows, keep) -> int:
    return sum(max(len(head[i]), *(len(r[i]) for r in rows)) if rows else len(head[i])
               for i in keep) + 2 * (len(keep) - 1)


TABLE_TOTALS = (  # key, heading, what the line of totals the same in every variant says
    ("dv_m_s", "dv m/s", "delta-v"), ("dv_with_margin_m_s", "dv+margin m/s", "with margin"),
    ("propellant_kg", "propellant kg", "propellant"), ("propellant_left_kg", "left kg", "left"),
    ("elapsed_s", "elapsed", "elapsed"))


def sweep_table(report: dict, width: int = 100) -> str:
    """One row per variant: the varied values and the totals that change from one variant
    to another (those that do not are said once, above the table), and a status."""
    from .textfmt import duration, sig

    axes = report["axes"]
    n = len(report["variants"])
    lines = [report["plan"],
             f"{n:,} variant{'s' if n != 1 else ''}"
             + (f", {report['not_flown']:,} cannot be flown" if report["not_flown"] else "")]
    text = lambda key, x: duration(x) if key == "elapsed_s" else sig(x)
    flown = [v["totals"] for v in report["variants"] if v["totals"] is not None]
    shown, same = [], []
    for key, heading, word in TABLE_TOTALS:
        xs = [t[key] for t in flown]
        if len(xs) > 1 and max(xs) - min(xs) <= 1e-12 * max(abs(x) for x in xs):
            unit = "" if key == "elapsed_s" else " " + heading.rsplit(" ", 1)[-1]
            same.append(f"{word} {text(key, xs[0])}{unit}")
        else:
            shown.append((key, heading))
    if same:
        lines.append(_wrap("the same in every variant flown: " + ", ".join(same), width))
    head = [f"{a['name']} {a['unit']}".rstrip() for a in axes] + [h for _, h in shown] + [
        "status"]
    notes: dict[str, int] = {}
    rows = []
    for v in report["variants"]:
        t = v["totals"]
        if v["feasible"]:
            status = "ok" if t["expectations_met"] else "expect fails"
        else:
            # the row shows its values: a refusal's note need not repeat them, so the
            # rows past one bound share one note
            reason = _VALUES_SAID.sub("", v.get("reason") or "", count=1)
            mark = notes.setdefault(reason, len(notes) + 1)
            status = ("not flown" if not v["flown"] else "short") + f" [{mark}]"
        vals = [_value_text(v["values"][a["name"]]) for a in axes]
        cells = (["-"] * len(shown) if t is None else [text(k, t[k]) for k, _ in shown])
        rows.append(vals + cells + [status])
    right = [True] * (len(head) - 1) + [False]
    k = len(axes)  # left kg, elapsed, dv+margin give way first, in that order
    order = [k + i for key in ("propellant_left_kg", "elapsed_s", "dv_with_margin_m_s")
             for i, (have, _) in enumerate(shown) if have == key]
    out = lines + [""] + _layout(head, rows, right, width, tuple(order))
    for reason, mark in notes.items():
        out.append(_wrap(f"[{mark}] {reason}", width))
    best = report.get("best")
    if best is not None:
        key = next(k for k in best if k.endswith(("_kg", "_m_s", "_s")))
        out += ["", _wrap(f"best {best['name']}: {sig(best['value'], 9)} {best['unit']} "
                          f"(within {sig(best['tolerance'], 2)} {best['unit']}), "
                          f"{best['objective']} {sig(best[key], 7)} "
                          f"{key.rsplit('_', 1)[-1] if not key.endswith('m_s') else 'm/s'}"
                          + ("; at the end of the range: widen it" if best["at_end_of_range"]
                             else ""), width)]
        if not best["feasible"]:
            out.append(_wrap("the plan with that value does NOT fit its load (`apsidal run` "
                             "it for the shortfall)", width))
        elif not best["expectations_met"]:
            out.append(_wrap("the plan with that value does NOT meet its own expectations "
                             "(`apsidal run` it for which): the optimum of the total is not "
                             "a plan that works", width))
        out += ["", "the plan with that value:", "", best["plan_text"].rstrip("\n")]
    out += ["", _wrap(report["caution"], width)]
    return "\n".join(out) + "\n"


def _value_text(x: float) -> str:
    """A varied value as the grid holds it: up to ten significant digits, no padding.

    >>> _value_text(1000.0), _value_text(28.5 / 8), _value_text(1 / 3)
    ('1,000', '3.5625', '0.3333333333')
    """
    return format(x, ",.10g")


def _wrap(text: str, width: int) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, max(width, 40), subsequent_indent="    "))


def dispersion_table(report: dict, width: int = 100) -> str:
    from .sweep import PERCENTILES, _pct_key
    from .textfmt import sig

    d = report["dispersions"]
    lines = [report["plan"],
             _wrap(f"{report['samples']:,} samples (seed {report['seed']}) of "
                   + ", ".join(f"{x['name']} {_value_text(x['base'])} ± "
                               f"{_value_text(x['sigma'])} {x['unit']} (1-sigma)"
                               .replace("  ", " ") for x in d), width),
             _wrap(f"cannot be flown: {100 * report['not_flown_share']:.2f}% of the samples"
                   + (f" (the first: {report['first_not_flown_reason']})"
                      if report["not_flown"] else ""), width)]
    short = report["not_feasible_share"] - report["not_flown_share"]
    if short > 0:  # flown, but the load does not cover them or the reserve is not met
        lines.append(_wrap(f"do not fit the load or miss the reserve: {100 * short:.2f}% of "
                           "the samples (their budgets are in the figures below)", width))
    lines.append("")
    keys = ["mean", "std"] + [_pct_key(p) for p in PERCENTILES]
    head = ["step", "quantity", "mean", "std"] + [f"p{p:g}" for p in PERCENTILES]
    rows = []
    for s in report["steps"]:
        for q, label in (("dv_m_s", "dv m/s"), ("propellant_kg", "prop kg")):
            rows.append([s["name"], label] + [sig(s[q][k]) for k in keys])
    for q, label in (("dv_m_s", "dv m/s"), ("dv_with_margin_m_s", "dv+mgn m/s"),
                     ("propellant_kg", "prop kg")):
        rows.append(["total", label] + [sig(report["total"][q][k]) for k in keys])
    out = lines + _layout(head, rows, [False, False] + [True] * len(keys), width,
                          (5, 3))
    line = report.get("statistical_line_m_s")
    nominal = report.get("nominal")
    if line is not None and nominal is not None:
        out += ["", _wrap(f"the plan as written: {sig(nominal['dv_m_s'])} m/s of delta-v; its "
                          f"3-sigma cover, mean - nominal + 3 std: {sig(line)} m/s, the figure "
                          f"for an `allow NAME {sig(line)} m/s statistical` line beside it "
                          "(statistical lines combine by root-sum-square)", width)]
    out += ["", _wrap(report["caution"], width)]
    return "\n".join(out) + "\n"

