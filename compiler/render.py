"""Renderers of a budget dict: a rich table for the terminal, JSON, Markdown and CSV.

The step table is data: ``STEP_COLUMNS`` lists every column with its heading (units in
the heading), its cell and its priority.  ``layout`` keeps the columns that fit the
terminal, dropping the least needed first, so a row never wraps; ``--columns all``
asks for every column whatever the width.  A new report field is one more column.

The screen of a run is data too: ``screen`` lists its pieces top to bottom, and two
writers lay them out: ``table`` with rich (a terminal, or anything rich would colour),
``compiler/plain.py`` the same characters for a pipe or a file without loading
rich.console.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

from .evaluate import PRICED_KINDS
from .textfmt import angle_text, duration, length, short, sig

WRAPPED_ANGLES = {"raan", "argp", "anomaly"}  # reported in [0, 360) deg


@dataclass(frozen=True)
class Column:
    """A column of the step table: its key, heading, cell and priority."""

    key: str  # the name `--columns` takes
    heading: str  # with its unit; may wrap onto two lines at a space
    cell: Callable[[dict], str]
    priority: int  # 0 is kept longest; higher numbers give way first
    right: bool = True
    csv: bool = True  # cells of this column are also meaningful in Markdown


def priced(step: dict) -> bool:
    """Burns and allowances carry delta-v and propellant."""
    return step["kind"] in PRICED_KINDS


def _burn(key: str, digits: int = 4) -> Callable[[dict], str]:
    return lambda s: sig(s.get(key), digits) if priced(s) else ""


def _propellant(s: dict) -> str:
    """A step's propellant; a star where the load no longer covers it (see fit_lines)."""
    if not priced(s):
        return ""
    return sig(s["propellant_kg"]) + ("" if s.get("covered", True) else "*")


def orbit_text(o: dict) -> str:
    """Orbit after a step, compactly: periapsis x apoapsis altitude in km, then incl.

    >>> orbit_text({"periapsis_alt_km": 400.0, "apoapsis_alt_km": 33000.0,
    ...             "inclination_deg": 75.0})
    '400.0 x 33,000 i 75.00'
    >>> orbit_text({"periapsis_alt_km": 400.0, "apoapsis_alt_km": None,
    ...             "inclination_deg": 1.5})
    '400.0 x open i 1.500'
    """
    ap = "open" if o["apoapsis_alt_km"] is None else sig(o["apoapsis_alt_km"])
    return f"{sig(o['periapsis_alt_km'])} x {ap} i {sig(o['inclination_deg'])}"


def _orbit_cell(s: dict) -> str:
    """The orbit after a step; after a leg, led by the body the plan now flies around
    (where the body changes, in every width of the table)."""
    text = orbit_text(s["orbit_after"])
    return f"{s['body']}: {text}" if s["kind"] == "leg" else text


STEP_COLUMNS: tuple[Column, ...] = (
    Column("index", "#", lambda s: str(s["index"]), 0),
    Column("step", "step", lambda s: s["name"], 0, right=False),
    Column("kind", "kind", lambda s: s["kind"], 1, right=False),
    Column("at", "at", lambda s: s["at"], 3, right=False),
    Column("dv", "Δv m/s", _burn("dv_m_s"), 0),
    Column("loss", "gravity loss m/s",
           lambda s: sig(s["finite"]["gravity_loss_m_s"]) if "finite" in s else "", 2),
    Column("margin", "Δv+margin m/s", _burn("dv_with_margin_m_s"), 2),
    Column("propellant", "propellant kg", _propellant, 0),
    Column("mass", "mass after kg", lambda s: sig(s["mass_after_kg"]), 1),
    Column("burn", "burn time s", _burn("burn_time_s", 3), 4),
    Column("engine", "engine", lambda s: s.get("engine", ""), 5, right=False),
    Column("orbit", "orbit after: alt. km x km, incl. deg", lambda s: _orbit_cell(s), 0,
           right=False),
    Column("raan", "raan after deg", lambda s: sig(s["orbit_after"].get("raan_deg")), 1),
    Column("elapsed", "elapsed d hh:mm:ss", lambda s: duration(s["elapsed_s"]), 2),
)
COLUMN_KEYS = tuple(c.key for c in STEP_COLUMNS)


def model_columns(report: dict) -> tuple[Column, ...]:
    """The step columns a plan's models call for: the gravity loss only where a burn was
    priced finite, the node after each step only under `gravity j2` (where coasts move
    it, and placing a plane by drift is the point)."""
    drop = set()
    if not any("finite" in s for s in report["steps"]):
        drop.add("loss")
    if report.get("gravity") != "j2":
        drop.add("raan")
    return tuple(c for c in STEP_COLUMNS if c.key not in drop)


def pick_columns(spec: str | None, columns=STEP_COLUMNS) -> tuple[tuple, bool]:
    """The columns ``--columns`` names (``all``, or keys separated by commas; the step's
    number and name always), and whether the table keeps them all whatever the width."""
    if spec is None:
        return columns, False
    if spec == "all":
        return columns, True
    keys = [k.strip() for k in spec.split(",") if k.strip()]
    by_key = {c.key: c for c in columns}
    unknown = [k for k in keys if k not in by_key]
    if unknown:
        from .cliutil import UsageError

        raise UsageError(f"--columns: no column `{unknown[0]}`; the columns are "
                         f"{', '.join(by_key)} (or `all`)")
    keys += ["index", "step"]  # a row always says which step it is
    return tuple(c for c in columns if c.key in keys), True


def _build(title: str | None, columns, rows: list[list[str]], widths: list[int]):
    from rich import box
    from rich.table import Table

    t = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left", pad_edge=False,
              collapse_padding=True, show_edge=False)
    for c, w in zip(columns, widths):
        t.add_column(c.heading, justify="right" if c.right else "left", width=w)
    for row in rows:
        t.add_row(*row)
    return t


_NARROW = re.compile("[ -~\u0394]*")  # printable ASCII and Δ: one terminal cell each


def cell_width(text: str) -> int:
    """The terminal cells ``text`` takes: its length where every character takes one
    (``plain.py`` lays out only such text), else rich's count.

    >>> cell_width("Δv m/s"), cell_width("月")
    (6, 2)
    """
    if _NARROW.fullmatch(text):
        return len(text)
    from rich.cells import cell_len

    return cell_len(text)


def _width(heading: str, cells: list[str]) -> int:
    """A column's width: its longest cell, and its heading's longest word (a heading may
    wrap onto a second line at a space; a cell never does)."""
    return max([cell_width(w) for w in heading.split()] + [cell_width(c) for c in cells])


def layout(columns, records: list[dict], width: int, keep_all: bool = False):
    """The columns of a table of ``records`` that fit ``width``, their cells, their widths
    and the width the table needs: the least needed columns dropped (highest priority
    number first, the rightmost of a tie first) until one record is one line."""
    cells = [[c.cell(r) for c in columns] for r in records]
    widths = [_width(c.heading, [row[i] for row in cells]) for i, c in enumerate(columns)]
    keep = list(range(len(columns)))
    while True:
        need = sum(widths[i] for i in keep) + 2 * (len(keep) - 1)
        droppable = [i for i in keep if columns[i].priority > 0]
        if keep_all or need <= width or not droppable:
            break
        keep.remove(max(droppable, key=lambda i: (columns[i].priority, i)))
    return ([columns[i] for i in keep], [[row[i] for i in keep] for row in cells],
            [widths[i] for i in keep], need)


def fit(console, title, columns, records: list[dict], keep_all: bool = False):
    """A rich table of ``records`` under the ``columns`` that fit the console (see
    :func:`layout`), and the width it needs."""
    kept, rows, widths, need = layout(columns, records, console.width, keep_all)
    return _build(title, kept, rows, widths), need


def check_text(c: dict) -> str:
    """One expectation check as a reader says it: `apoapsis 1200 km within 1 km: actual ...`.

    Numbers as a plan writes them (no thousands separators), six significant digits;
    an interplanetary distance with its astronomical units beside it.
    """
    unit = f" {c['unit']}" if c["unit"] else ""
    if c["unit"] == "km":
        def num(x):
            text = length(x, sep=False)
            return text[: -len(" km")] if x is not None and abs(x) < 1e7 else text
    elif c["kind"] in WRAPPED_ANGLES:
        def num(x):
            return angle_text(x, ".6g")
    else:
        def num(x):
            return short(x, sep=False)

    def with_unit(x):
        text = num(x)
        return text if text.endswith(")") else text + unit  # `(1.52 au)` already has one

    if c["comparator"] == "within":
        cond = f"{with_unit(c['expected'])} within {with_unit(c['tolerance'])}"
    else:
        cond = f"{c['comparator']} {with_unit(c['expected'])}"
    if c.get("reason"):
        return f"{c['kind']} {cond}: {c['reason']}"
    if c["kind"] == "circular":
        return (f"{c['kind']} {cond}: actual {num(c['actual_periapsis'])} x "
                f"{with_unit(c['actual_apoapsis'])}")
    return f"{c['kind']} {cond}: actual {with_unit(c['actual'])}"


def total_lines(tot: dict) -> list[str]:
    reserve = "covered" if tot["reserve_met"] else "NOT covered"
    return [
        (f"total delta-v        {sig(tot['dv_m_s'])} m/s "
         f"({sig(tot['dv_with_margin_m_s'])} m/s with margin)"),
        (f"propellant used      {sig(tot['propellant_kg'])} kg, "
         f"left {sig(tot['propellant_left_kg'])} kg"),
        f"final mass           {sig(tot['final_mass_kg'])} kg",
        (f"delta-v capacity     {sig(tot['dv_capacity_left_m_s'])} m/s left "
         f"(reserve {sig(tot['reserve_m_s'])} m/s: {reserve})"),
        f"elapsed              {duration(tot['elapsed_s'])}",
    ] + ([(f"gravity loss         {sig(tot['gravity_loss_m_s'])} m/s in the delta-v "
          "(finite burns)")] if "gravity_loss_m_s" in tot else [])


def fit_lines(report: dict) -> list[str]:
    """Residual, allowances, components and whether the load flies the plan, in words."""
    from .budget import shortfall_text

    tot = report["totals"]
    out = []
    if tot.get("residual_kg"):
        out.append(f"residual             {sig(tot['residual_kg'])} kg of the "
                   f"{sig(tot['load_kg'])} kg load cannot be used")
    allow = tot.get("allowances")
    if allow:
        out.append(f"allowances           {sig(allow['total_m_s'])} m/s = "
                   f"{sig(allow['deterministic_m_s'])} deterministic + "
                   f"{sig(allow['statistical_rss_m_s'])} statistical (root-sum-square of "
                   f"{sig(allow['statistical_sum_m_s'])})")
    if "fuel_kg" in tot:
        out.append(f"components           fuel {sig(tot['fuel_kg'])} kg, oxidiser "
                   f"{sig(tot['oxidiser_kg'])} kg burnt")
    for step in report["steps"]:
        if "leg" in step:  # a patched-conic leg's figures (language.md, legs)
            g = step["leg"]
            form = "Hohmann" if g["form"] == "hohmann" else "given"
            out.append(f"{'leg ' + step['name']:<20} {g['from']} to {g['to']}, {form}: vinf "
                       f"{sig(g['vinf_depart_km_s'])} -> {sig(g['vinf_arrive_km_s'])} km/s, "
                       f"{sig(g['time_of_flight_s'] / 86400.0)} d")
        if "entry" in step:
            e = step["entry"]
            out.append(f"entry interface      {sig(e['altitude_km'])} km ({step['name']}): "
                       f"{sig(e['speed_m_s'])} m/s, flight-path angle "
                       f"{sig(e['flight_path_angle_deg'])} deg (inertial)")
    if not report.get("feasible", True) and "error" not in report:
        out.append(f"DOES NOT FIT         {shortfall_text(report)}"
                   + (" (steps marked * are not covered, priced as if the tanks held the "
                      "rest)" if tot["first_uncovered_step"] else ""))
    return out


def model_note(report: dict) -> str:
    """What the heading adds for a plan priced with another gravity model than the
    point-mass default (whose caution already says two-body)."""
    return " (gravity j2)" if report.get("gravity") == "j2" else ""


def screen(report: dict, columns: str | None = None) -> list[tuple]:
    """The pieces of a run's screen, top to bottom, each a tuple led by its kind:

    ``("line", text, style, markup)``  one print of a string (emoji codes replaced;
    console markup read when ``markup``), wrapped at the width;
    ``("table", columns, records, keep_all)``  the step table (see :func:`layout`);
    ``("text", text)``  a sentence, wrapped; ``("mark", passed, text)`` an expectation's
    pass or FAIL and its text; ``("indented", text)`` prose wrapped under a two-space
    indent; ``("blank",)``.

    >>> [p[0] for p in screen({"plan": "p", "source": "p.aps", "steps": [],
    ...     "totals": {"dv_m_s": 0.0, "dv_with_margin_m_s": 0.0, "propellant_kg": 0.0,
    ...     "propellant_left_kg": 1.0, "final_mass_kg": 2.0, "dv_capacity_left_m_s": 9.0,
    ...     "reserve_m_s": 0.0, "reserve_met": True, "elapsed_s": 0.0},
    ...     "caution": "estimates"})]
    ['line', 'table', 'blank', 'line', 'line', 'line', 'line', 'line', 'blank', 'line']
    """
    cols, keep_all = pick_columns(columns, STEP_COLUMNS if columns else model_columns(report))
    out: list[tuple] = [
        ("line", f"Delta-v budget: {report['plan'] or report['source']}{model_note(report)}",
         "bold", False),
        ("table", cols, report["steps"], keep_all), ("blank",),
        *(("line", line, None, False) for line in total_lines(report["totals"])),
        *(("text", line) for line in fit_lines(report)),  # sentences, wrapped at the width
    ]
    checks = [(s, c) for s in report["steps"] for c in s.get("checks", [])]
    if checks:
        out += [("blank",), ("line", "Expectations", "bold", True)]
        out += [("mark", c["passed"], f"  {s['name']}: {check_text(c)}") for s, c in checks]
    if report.get("findings"):
        out += [("blank",), ("line", "Findings", "bold", True)]
        out += [("indented", f"{f['severity']} {f['rule']}: {f['message']}")
                for f in report["findings"]]  # prose, wrapped under its own indent
    out += [("blank",), ("line", f"Caution: {report['caution']}", "italic", False)]
    return out


def table(report: dict, console, columns: str | None = None) -> None:
    """The run's screen (:func:`screen`) on a rich console."""
    from rich.padding import Padding
    from rich.text import Text

    def step_table(cols, records, keep_all):
        t, need = fit(console, None, cols, records, keep_all)
        if keep_all and need > console.width:  # asked for: lines past the terminal's edge
            width, console.width = console.width, need
            console.print(t)
            console.width = width
        else:
            console.print(t)

    def mark(passed, text):
        word = Text("pass", style="green") if passed else Text("FAIL", style="bold red")
        console.print(Text.assemble("  ", word, text))

    write = {
        "line": lambda text, style, markup: console.print(text, style=style, highlight=False,
                                                          markup=markup),
        "table": step_table,
        "text": lambda text: console.print(Text(text), highlight=False),
        "mark": mark,
        "indented": lambda text: console.print(Padding(Text(text), (0, 0, 0, 2)),
                                               highlight=False),
        "blank": console.print,
    }
    for kind, *args in screen(report, columns):
        write[kind](*args)


def to_json(report: dict) -> str:
    import json

    return json.dumps(report, indent=2, allow_nan=False)


def _md_row(cells) -> str:
    return "| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |"


def markdown(report: dict) -> str:
    out = [f"## Delta-v budget: {report['plan'] or report['source']}{model_note(report)}", ""]
    columns = model_columns(report)
    out.append(_md_row([c.heading for c in columns]))
    out.append("|" + "".join("--:|" if c.right else "---|" for c in columns))
    for s in report["steps"]:
        out.append(_md_row([(f"`{c.cell(s)}`" if c.key == "step" else c.cell(s))
                            for c in columns]))
    out += [""] + [f"    {line}" for line in total_lines(report["totals"])]
    fit = fit_lines(report)
    if fit:
        out += ["", *(f"- {' '.join(line.split())}" for line in fit)]
    checks = [(s, c) for s in report["steps"] for c in s.get("checks", [])]
    if checks:
        out += ["", "**Expectations**", ""]
        out += [f"- {'pass' if c['passed'] else '**FAIL**'} `{s['name']}`: {check_text(c)}"
                for s, c in checks]
    if report.get("findings"):
        out += ["", "**Findings**", ""]
        out += [f"- {f['severity']} `{f['rule']}`: {f['message']}" for f in report["findings"]]
    out += ["", f"_Caution: {report['caution']}_", ""]
    return "\n".join(out)


# --- CSV: one header, one record kind per row -------------------------------------------
#
# Every row has every column, so a strict reader loads the file as one table; `record`
# says what a row is: `step`, `total`, `check` (an expectation's result), `finding`,
# `error` (the plan cannot be flown past this point) and `caution` (the text of the
# report's caution, in `message`).  Cells that do not apply to a record are empty.

STEP_CSV = ["index", "name", "kind", "at", "engine", "dv_m_s", "dv_with_margin_m_s",
            "along_m_s", "cross_m_s", "radial_m_s", "propellant_kg", "mass_after_kg",
            "burn_time_s", "coast_time_s", "duration_s", "elapsed_s", "periapsis_alt_km",
            "apoapsis_alt_km", "sma_km", "ecc", "inclination_deg", "raan_deg", "argp_deg",
            "anomaly_deg", "period_s", "covered", "fuel_kg", "oxidiser_kg", "frame",
            "rtn_radial_m_s", "rtn_transverse_m_s", "rtn_normal_m_s", "entry_speed_m_s",
            "entry_flight_path_angle_deg", "dv_impulsive_m_s", "gravity_loss_m_s",
            "thrust_time_s", "arc_deg"]
FINITE_CSV = ("dv_impulsive_m_s", "gravity_loss_m_s", "thrust_time_s", "arc_deg")
CHECK_CSV = ["check", "comparator", "expected", "tolerance", "actual", "unit", "passed"]
MESSAGE_CSV = ["severity", "rule", "message"]
CSV_COLUMNS = ["record", "source", *STEP_CSV, *CHECK_CSV, *MESSAGE_CSV, "body",
               "gravity"]  # the model that priced the plan, on the `total` record


def csv_cell(x) -> str | float:
    if x is None:
        return ""
    if isinstance(x, bool):
        return "true" if x else "false"
    return x


def csv_records(report: dict) -> list[dict]:
    """The rows of a run's CSV, as dicts keyed by ``CSV_COLUMNS``."""
    src = report["source"]
    rows = []
    for s in report["steps"]:
        vec = s["vector_m_s"]
        entry = s.get("entry", {})
        rtn = s.get("vector_rtn_m_s", {})
        rows.append({**s, **s["orbit_after"], "record": "step", "source": src,
                     "along_m_s": vec["along"], "cross_m_s": vec["cross"],
                     "radial_m_s": vec["radial"], "frame": s.get("frame"),
                     **{f"rtn_{k}_m_s": x for k, x in rtn.items()},
                     "entry_speed_m_s": entry.get("speed_m_s"),
                     **{k: s.get("finite", {}).get(k) for k in FINITE_CSV},
                     "entry_flight_path_angle_deg": entry.get("flight_path_angle_deg")})
        for c in s.get("checks", []):
            rows.append({"record": "check", "source": src, "index": s["index"],
                         "name": s["name"], "kind": s["kind"], "check": c["kind"],
                         "passed": c["passed"], "message": c.get("reason"),
                         **{k: c[k] for k in ("comparator", "expected", "tolerance",
                                              "actual", "unit")}})
    tot = report["totals"]
    rows.append({"record": "total", "source": src, "name": "total", "dv_m_s": tot["dv_m_s"],
                 "dv_with_margin_m_s": tot["dv_with_margin_m_s"],
                 "propellant_kg": tot["propellant_kg"], "mass_after_kg": tot["final_mass_kg"],
                 "elapsed_s": tot["elapsed_s"], "gravity": report.get("gravity")})
    if not report.get("feasible", True) and "error" not in report:
        from .budget import shortfall_text

        rows.append({"record": "fit", "source": src, "severity": "error",
                     "propellant_kg": tot.get("propellant_needed_kg"),
                     "message": "the plan does not fit its load: " + shortfall_text(report)})
    for f in report.get("findings", []):
        rows.append({"record": "finding", "source": src, "name": ", ".join(f.get("steps", [])),
                     "severity": f["severity"], "rule": f["rule"], "message": f["message"]})
    if report.get("error"):
        err = report["error"]
        rows.append({"record": "error", "source": src, "severity": "error",
                     "message": err["message"] + (f" ({err['hint']})" if err.get("hint")
                                                  else "")})
    rows.append({"record": "caution", "source": src, "message": report["caution"]})
    return rows


def write_csv(rows: list[dict], columns: list[str]) -> str:
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    for r in rows:
        w.writerow([csv_cell(r.get(c)) for c in columns])
    return buf.getvalue()


def to_csv(report: dict) -> str:
    return write_csv(csv_records(report), CSV_COLUMNS)
