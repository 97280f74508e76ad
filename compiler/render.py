"""Renderers of a budget dict: a rich table for the terminal, JSON, Markdown and CSV."""

from __future__ import annotations

import csv
import io
import json

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from .budget import shortfall_text


def duration(seconds: float | None) -> str:
    """Elapsed time as a reader counts it.

    >>> duration(93784.5)
    '1 d 02:03:04.5'
    >>> duration(61)
    '00:01:01.0'
    """
    if seconds is None:
        return "-"
    days, rest = divmod(float(seconds), 86400.0)
    h, rest = divmod(rest, 3600.0)
    m, s = divmod(rest, 60.0)
    clock = f"{int(h):02d}:{int(m):02d}:{s:04.1f}"
    return f"{int(days)} d {clock}" if days else clock


def _num(x, fmt: str) -> str:
    return "-" if x is None else format(x, fmt)


WRAPPED_ANGLES = {"raan", "argp", "anomaly"}  # reported in [0, 360) deg


def angle_text(deg: float | None, fmt: str) -> str:
    """An angle in [0, 360) deg as text, wrapped after rounding so 359.99996 is not 360.0.

    >>> angle_text(359.99996, ".1f"), angle_text(359.9999999, ".6g"), angle_text(12.25, ".1f")
    ('0.0', '0', '12.2')
    """
    if deg is None:
        return "-"
    text = format(deg % 360.0, fmt)
    return format(0.0, fmt) if float(text) >= 360.0 or float(text) == 0.0 else text


def orbit_text(o: dict) -> str:
    ap = "open" if o["apoapsis_alt_km"] is None else _num(o["apoapsis_alt_km"], ",.1f")
    return (f"{_num(o['periapsis_alt_km'], ',.1f')} x {ap} km, "
            f"i {_num(o['inclination_deg'], '.3f')} deg")


def _where(step: dict) -> str:
    return step["at"]


def check_text(c: dict) -> str:
    """One expectation check as a reader says it: `apoapsis 1200 km within 1 km: actual ...`."""
    unit = f" {c['unit']}" if c["unit"] else ""
    num = ((lambda x: angle_text(x, ".6g")) if c["kind"] in WRAPPED_ANGLES
           else (lambda x: f"{x:.6g}"))
    if c["comparator"] == "within":
        cond = f"{num(c['expected'])}{unit} within {c['tolerance']:.6g}{unit}"
    else:
        cond = f"{c['comparator']} {num(c['expected'])}{unit}"
    if c.get("reason"):
        return f"{c['kind']} {cond}: {c['reason']}"
    if c["kind"] == "circular":
        return (f"{c['kind']} {cond}: actual {c['actual_periapsis']:.6g} x "
                f"{c['actual_apoapsis']:.6g}{unit}")
    return f"{c['kind']} {cond}: actual {num(c['actual'])}{unit}"


def priced(step: dict) -> bool:
    """Burns and allowances carry delta-v and propellant."""
    return step["kind"] in ("burn", "allow")


def propellant_cell(step: dict, fmt: str) -> str:
    """A step's propellant; a star where the load no longer covers it (see fit_lines)."""
    return format(step["propellant_kg"], fmt) + ("" if step.get("covered", True) else "*")


def fit_lines(report: dict) -> list[str]:
    """Whether the load flies the plan, in words (empty when it does and says nothing new)."""
    tot = report["totals"]
    out = []
    if tot.get("residual_kg"):
        out.append(f"residual             {tot['residual_kg']:,.2f} kg of the "
                   f"{tot['load_kg']:,.2f} kg load cannot be used")
    allow = tot.get("allowances")
    if allow:
        out.append(f"allowances           {allow['total_m_s']:,.1f} m/s = "
                   f"{allow['deterministic_m_s']:,.1f} deterministic + "
                   f"{allow['statistical_rss_m_s']:,.1f} statistical (root-sum-square of "
                   f"{allow['statistical_sum_m_s']:,.1f})")
    if "fuel_kg" in tot:
        out.append(f"components           fuel {tot['fuel_kg']:,.2f} kg, oxidiser "
                   f"{tot['oxidiser_kg']:,.2f} kg burnt")
    if not report.get("feasible", True) and "error" not in report:
        out.append(f"DOES NOT FIT         {shortfall_text(report)}"
                   + (" (steps marked * are not covered, priced as if the tanks held the "
                      "rest)" if tot["first_uncovered_step"] else ""))
    return out


def table(report: dict, console: Console) -> None:
    title = report["plan"] or report["source"]
    t = Table(title=f"Delta-v budget: {title}", box=box.SIMPLE_HEAVY, title_justify="left")
    for col, just in (("#", "right"), ("step", "left"), ("where", "left"),
                      ("delta-v m/s", "right"), ("with margin", "right"),
                      ("propellant kg", "right"), ("mass after kg", "right"),
                      ("orbit after: periapsis x apoapsis, incl.", "left"),
                      ("elapsed", "right")):
        t.add_column(col, justify=just)
    for s in report["steps"]:
        burn = priced(s)
        t.add_row(str(s["index"]), f"{s['kind']} {s['name']}", _where(s),
                  f"{s['dv_m_s']:,.1f}" if burn else "",
                  f"{s['dv_with_margin_m_s']:,.1f}" if burn else "",
                  propellant_cell(s, ",.2f") if burn else "",
                  f"{s['mass_after_kg']:,.2f}", orbit_text(s["orbit_after"]),
                  duration(s["elapsed_s"]))
    console.print(t)
    tot = report["totals"]
    lines = [
        (f"total delta-v        {tot['dv_m_s']:,.1f} m/s  "
        f"({tot['dv_with_margin_m_s']:,.1f} m/s with margin)"),
        (f"propellant used      {tot['propellant_kg']:,.2f} kg   "
        f"left {tot['propellant_left_kg']:,.2f} kg"),
        f"final mass           {tot['final_mass_kg']:,.2f} kg",
        (f"delta-v capacity     {tot['dv_capacity_left_m_s']:,.1f} m/s left "
        f"(reserve {tot['reserve_m_s']:,.1f} m/s: "
        f"{'covered' if tot['reserve_met'] else 'NOT covered'})"),
        f"elapsed              {duration(tot['elapsed_s'])}",
        *fit_lines(report),
    ]
    for line in lines:
        console.print(line, highlight=False)
    checks = [(s, c) for s in report["steps"] for c in s.get("checks", [])]
    if checks:
        console.print()
        console.print("Expectations", style="bold")
        for s, c in checks:
            mark = Text("pass", style="green") if c["passed"] else Text("FAIL", style="bold red")
            console.print(Text.assemble("  ", mark, f"  {s['name']}: {check_text(c)}"))
    if report.get("findings"):
        console.print()
        console.print("Findings", style="bold")
        for f in report["findings"]:
            console.print(f"  {f['severity']} {f['rule']}: {f['message']}", highlight=False,
                          markup=False)
    console.print()
    console.print(f"Caution: {report['caution']}", style="italic", highlight=False)


def to_json(report: dict) -> str:
    return json.dumps(report, indent=2, allow_nan=False)


def _md_row(cells) -> str:
    return "| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |"


def markdown(report: dict) -> str:
    out = [f"## Delta-v budget: {report['plan'] or report['source']}", ""]
    out.append(_md_row(["#", "step", "where", "delta-v (m/s)", "with margin (m/s)",
                        "propellant (kg)", "mass after (kg)", "orbit after", "elapsed"]))
    out.append("|" + "---|" * 9)
    for s in report["steps"]:
        burn = priced(s)
        out.append(_md_row([s["index"], f"{s['kind']} `{s['name']}`", s["at"],
                            f"{s['dv_m_s']:.1f}" if burn else "",
                            f"{s['dv_with_margin_m_s']:.1f}" if burn else "",
                            propellant_cell(s, ".2f") if burn else "",
                            f"{s['mass_after_kg']:.2f}", orbit_text(s["orbit_after"]),
                            duration(s["elapsed_s"])]))
    tot = report["totals"]
    out += ["", _md_row(["total", "value"]), "|---|---|",
            _md_row(["delta-v", f"{tot['dv_m_s']:.1f} m/s"]),
            _md_row(["delta-v with margin", f"{tot['dv_with_margin_m_s']:.1f} m/s"]),
            _md_row(["propellant used", f"{tot['propellant_kg']:.2f} kg"]),
            _md_row(["propellant left", f"{tot['propellant_left_kg']:.2f} kg"]),
            _md_row(["final mass", f"{tot['final_mass_kg']:.2f} kg"]),
            _md_row(["delta-v capacity left", f"{tot['dv_capacity_left_m_s']:.1f} m/s"]),
            _md_row(["reserve", (f"{tot['reserve_m_s']:.1f} m/s "
                     f"({'covered' if tot['reserve_met'] else 'not covered'})")]),
            _md_row(["elapsed", duration(tot["elapsed_s"])])]
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


CSV_COLUMNS = ["index", "name", "kind", "at", "dv_m_s", "dv_with_margin_m_s", "along_m_s",
               "cross_m_s", "radial_m_s", "propellant_kg", "mass_after_kg", "duration_s",
               "elapsed_s", "periapsis_alt_km", "apoapsis_alt_km", "sma_km", "ecc",
               "inclination_deg", "raan_deg", "argp_deg", "anomaly_deg", "period_s", "covered"]


def to_csv(report: dict) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_COLUMNS)
    for s in report["steps"]:
        o, vec = s["orbit_after"], s["vector_m_s"]
        flat = {**s, **o, "along_m_s": vec["along"], "cross_m_s": vec["cross"],
                "radial_m_s": vec["radial"]}
        flat.setdefault("covered", "")
        w.writerow(["" if flat[c] is None else flat[c] for c in CSV_COLUMNS])
    tot = report["totals"]
    w.writerow(["", "total", "", "", tot["dv_m_s"], tot["dv_with_margin_m_s"], "", "", "",
                tot["propellant_kg"], tot["final_mass_kg"], "", tot["elapsed_s"]]
               + [""] * (len(CSV_COLUMNS) - 13))
    for line in fit_lines(report):
        buf.write(f"# {' '.join(line.split())}\n")
    buf.write(f"# Caution: {report['caution']}\n")
    return buf.getvalue()
