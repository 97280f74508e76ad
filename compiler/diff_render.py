"""Renderers of a budget diff (compiler/diff.py): a rich table, Markdown for a review
comment, JSON, and the plain budget text that ``git diff`` compares (textconv)."""

from __future__ import annotations

import json

from rich import box
from rich.console import Console
from rich.table import Table

from .budget import CAUTION


def _caution(diff: dict) -> str:
    return diff.get("caution", CAUTION)
from .render import Column, fit, priced
from .textfmt import duration, sig
from .textfmt import signed as _signed

# The totals, in the order and words a reviewer reads them: (key, label, unit, digits).
TOTALS = (
    ("dv_m_s", "delta-v", "m/s", 1),
    ("dv_with_margin_m_s", "delta-v with margin", "m/s", 1),
    ("propellant_kg", "propellant used", "kg", 2),
    ("final_mass_kg", "final mass", "kg", 2),
    ("propellant_left_kg", "propellant left", "kg", 2),
    ("dv_capacity_left_m_s", "delta-v capacity left", "m/s", 1),
    ("elapsed_s", "elapsed", "s", 1),
    ("reserve_m_s", "reserve", "m/s", 1),
    ("allowances_m_s", "allowances (priced)", "m/s", 1),
    ("fuel_kg", "fuel burnt", "kg", 2),
    ("oxidiser_kg", "oxidiser burnt", "kg", 2),
    ("residual_kg", "residual (unusable)", "kg", 2),
    ("propellant_needed_kg", "propellant needed", "kg", 2),
    ("shortfall_kg", "shortfall", "kg", 2),
)
STATUS_STYLE = {"added": "green", "removed": "red", "changed": "yellow", "moved": "cyan",
                "same": "dim"}


def signed(x, digits: int) -> str:
    """A change with its sign, to four significant digits; a change below the totals'
    resolution (``digits`` decimals: 0.1 m/s, 0.01 kg) as a bare 0.

    >>> signed(38.24, 1), signed(-7.9, 2), signed(0.00001, 1), signed(2562.14, 1)
    ('+38.24', '-7.900', '0', '+2,562')
    """
    if x is None:
        return "-"
    if round(x, digits) == 0:
        return "0"
    return _signed(x)


def _plain(x, digits: int) -> str:
    return sig(x)


def _total_cells(diff: dict, key: str, digits: int, unit: str) -> tuple[str, str, str]:
    old, new, ch = diff["old"].get(key), diff["new"].get(key), diff["change"].get(key)
    if key == "elapsed_s":
        change = "0" if ch is not None and abs(ch) < 0.05 else (
            ("-" if ch < 0 else "+") + duration(abs(ch)) if ch is not None else "-")
        return duration(old), duration(new), change
    return (f"{_plain(old, digits)} {unit}", f"{_plain(new, digits)} {unit}",
            f"{signed(ch, digits)} {unit}")


def shown_totals(diff: dict):
    """The total rows that have a value on either side (no fuel rows without components)."""
    return [t for t in TOTALS
            if diff["old"].get(t[0]) is not None or diff["new"].get(t[0]) is not None]


def headline(diff: dict) -> str:
    """The budget change in one line: ``+38.2 m/s delta-v with margin, +7.9 kg
    propellant``."""
    ch = diff["change"]
    dv, kg = ch.get("dv_with_margin_m_s"), ch.get("propellant_kg")
    fit = gravity_change(diff) + fit_change(diff)
    reserve = ch.get("reserve_m_s")
    if signed(reserve, 1) != "0":
        fit += f"reserve {signed(reserve, 1)} m/s; "
    if signed(dv, 1) == "0" and signed(kg, 2) == "0":
        return fit + "no change to delta-v or propellant"
    return fit + f"{signed(dv, 1)} m/s delta-v with margin, {signed(kg, 2)} kg propellant"


def gravity_change(diff: dict) -> str:
    """A change of the gravity model, or of the burns' (``burns finite``), between the
    revisions ("" when there is none)."""
    out = ""
    for key, default in (("gravity", "point-mass"), ("burns", "impulsive")):
        model = diff.get(key) or {}
        if model.get("old", default) != model.get("new", default):
            out += f"{key} {model.get('old', default)} -> {model.get('new', default)}; "
    return out


def fit_change(diff: dict) -> str:
    """What the revision did to whether the plan fits its load ("" when it still fits)."""
    was = diff.get("feasible", {}).get("old", True)
    now = diff.get("feasible", {}).get("new", True)
    short = diff["new"].get("shortfall_kg") or 0.0
    if was and not now:
        return f"no longer fits: needs {short:,.2f} kg more; "
    if not was and now:
        return "now fits its load; "
    if not was and not now:
        before = diff["old"].get("shortfall_kg") or 0.0
        return f"still does not fit (short {short:,.2f} kg, was {before:,.2f} kg); "
    return ""


def _step_label(entry: dict) -> str:
    renamed = entry.get("renamed_from")
    return f"{entry['name']} (was {renamed})" if renamed else entry["name"]


def _where(entry: dict) -> str:
    old, new = entry["old"], entry["new"]
    if old and new and old["at"] != new["at"]:
        return f"{old['at']} -> {new['at']}"
    return (new or old)["at"]


def _step_cells(entry: dict) -> list[str]:
    side = entry["new"] or entry["old"]
    ch = entry["change"]
    burn = priced(side)
    if not burn and not (entry["old"] and entry["old"]["kind"] == "burn"):
        return ["", "", "", "", "", ""]
    now = entry["new"] or {}
    return [_plain(now.get("dv_m_s"), 1) if entry["new"] else "-", signed(ch["dv_m_s"], 1),
            signed(ch["dv_with_margin_m_s"], 1),
            _margin(entry), _plain(now.get("propellant_kg"), 2) if entry["new"] else "-",
            signed(ch["propellant_kg"], 2)]


def _margin(entry: dict) -> str:
    a, b = (None if s is None else s.get("margin_pct") for s in (entry["old"], entry["new"]))
    if a is not None and b is not None and abs(a - b) > 1e-9:
        return f"{a:g} -> {b:g} %"
    value = b if b is not None else a
    return "" if value is None else f"{value:g} %"


STEP_COLUMNS = ("status", "step", "where", "delta-v m/s", "change", "change with margin",
                "margin", "propellant kg", "change")


def _findings_lines(diff: dict) -> list[tuple[str, dict]]:
    found = diff.get("findings")
    if not found:
        return []
    return ([("appeared", f) for f in found["appeared"]]
            + [("disappeared", f) for f in found["disappeared"]])


def _finding_text(f: dict) -> str:
    saving = f" (saves {f['saves_m_s']:.1f} m/s, {f['saves_kg']:.2f} kg)" \
        if f.get("saves_m_s") is not None and f.get("saves_kg") is not None else ""
    return f"{f['severity']} {f['rule']} [{', '.join(f['steps'])}]: {f['message']}{saving}"


# The step table's columns for the terminal, as render.Column: each cell reads a diff
# entry; the priorities say which give way first on a narrow terminal.
def _cell(i: int):
    return lambda e: _step_cells(e)[i]


TERMINAL_COLUMNS = (
    Column("status", "status", lambda e: e["status"], 0, right=False),
    Column("step", "step", _step_label, 0, right=False),
    Column("kind", "kind", lambda e: (e["new"] or e["old"])["kind"], 2, right=False),
    Column("at", "at", _where, 3, right=False),
    Column("dv", "Δv m/s", _cell(0), 1),
    Column("dv_change", "Δv change m/s", _cell(1), 0),
    Column("margin_change", "Δv+margin change m/s", _cell(2), 1),
    Column("margin", "margin", _cell(3), 3),
    Column("propellant", "propellant kg", _cell(4), 2),
    Column("propellant_change", "propellant change kg", _cell(5), 0),
)


def table(diff: dict, console: Console, old_label: str, new_label: str) -> None:
    console.print(f"Budget change: {headline(diff)}", style="bold", highlight=False,
                  markup=False)
    console.print(f"  old: {old_label}\n  new: {new_label}", highlight=False, markup=False)
    t, _ = fit(console, None, TERMINAL_COLUMNS, diff["steps"])
    console.print(t)
    console.print()
    tot = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False)
    for col in ("total", "old", "new", "change"):
        tot.add_column(col, justify="left" if col == "total" else "right")
    for key, label, unit, digits in shown_totals(diff):
        tot.add_row(label, *_total_cells(diff, key, digits, unit))
    console.print(tot)
    lines = _findings_lines(diff)
    if lines:
        console.print("Findings", style="bold")
        for how, f in lines:
            console.print(f"  {how}: {_finding_text(f)}", highlight=False)
    for line in trade_lines(diff):
        console.print(line, highlight=False, markup=False)
    console.print(f"Caution: {_caution(diff)}", style="italic", highlight=False)


def trade_lines(diff: dict) -> list[str]:
    """The trade studies a revision added, removed or changed (they price nothing)."""
    out = []
    for t in diff.get("trades", []):
        if t["status"] == "changed":
            out.append(f"trade {t['name']} changed: was `{t['old']}`, now `{t['new']}`")
        else:
            out.append(f"trade {t['name']} {t['status']}: `{t['old'] or t['new']}`")
    return out + [""] if out else out


def _md_row(cells) -> str:
    return "| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |"


def markdown(diff: dict, old_label: str, new_label: str) -> str:
    """A review comment: the headline, the steps that are not the same, the totals."""
    out = [f"**Delta-v budget: {headline(diff)}** (`{old_label}` -> `{new_label}`)", ""]
    shown = [e for e in diff["steps"] if e["status"] != "same"]
    if shown:
        out += [_md_row(STEP_COLUMNS), "|" + "---|" * 3 + "--:|" * 6]
        for e in shown:
            side = e["new"] or e["old"]
            out.append(_md_row([e["status"], f"{side['kind']} `{_step_label(e)}`", _where(e),
                                *_step_cells(e)]))
        same = len(diff["steps"]) - len(shown)
        if same:
            out += ["", f"{same} other step{'s' if same != 1 else ''} unchanged."]
    else:
        out.append("No step changed.")
    out += ["", _md_row(["total", f"`{old_label}`", f"`{new_label}`", "change"]),
            "|---|--:|--:|--:|"]
    for key, label, unit, digits in shown_totals(diff):
        out.append(_md_row([label, *_total_cells(diff, key, digits, unit)]))
    lines = _findings_lines(diff)
    if lines:
        out += ["", "**Findings**", ""]
        out += [f"- {how}: {_finding_text(f)}" for how, f in lines]
    if diff.get("trades"):
        out += ["", "**Trade studies**", ""] + [f"- {x}" for x in trade_lines(diff) if x]
    out += ["", f"_{_caution(diff)}_", ""]
    return "\n".join(out)


def to_json(diff: dict) -> str:
    return json.dumps(diff, indent=2, allow_nan=False)


def budget_text(report: dict) -> str:
    """A plain, line-per-fact budget for ``git diff`` to compare (textconv).

    Each step is one line and each total is one line, so a revision that changes one
    burn shows as that burn's line and the totals it moved.
    """
    lines = ["", "# ---- budget computed by apsidal (not part of the file) ----"]
    for s in report["steps"]:
        if priced(s):
            facts = (f"{s['dv_m_s']:.1f} m/s, {s['dv_with_margin_m_s']:.1f} m/s with margin, "
                     f"{s['propellant_kg']:.2f} kg, engine {s.get('engine', '-')}")
        elif s["kind"] == "expect":
            facts = ", ".join(
                f"{c['kind']} {'pass' if c['passed'] else 'FAIL'}" for c in s.get("checks", []))
        else:
            facts = f"mass after {s['mass_after_kg']:.2f} kg"
        lines.append(f"# {s['kind']} {s['name']} ({s['at']}): {facts}")
    for key, label, unit, digits in shown_totals({"old": {}, "new": report["totals"]}):
        value = report["totals"].get(key)
        shown = duration(value) if key == "elapsed_s" else f"{_plain(value, digits)} {unit}"
        lines.append(f"# total {label}: {shown}")
    if "error" in report:
        lines.append(f"# the plan cannot be flown: {report['error']['message']}")
    elif not report.get("feasible", True):
        tot = report["totals"]
        lines.append(f"# the plan does not fit its load: short {tot['shortfall_kg']:.2f} kg")
    return "\n".join(lines) + "\n"


# --- CSV: one header, one record kind per row (as the run's CSV) ----------------------

DIFF_CSV = ["record", "name", "status", "renamed_from", "kind", "at_old", "at_new",
            "quantity", "old", "new", "change", "severity", "rule", "message"]
STEP_QUANTITIES = ("dv_m_s", "dv_with_margin_m_s", "propellant_kg", "mass_after_kg",
                   "burn_time_s", "coast_time_s", "elapsed_s")


def to_csv(diff: dict) -> str:
    """A long table a strict CSV reader loads: one ``step`` row per step and quantity,
    one ``total`` row per total, ``finding`` rows (appeared or disappeared), ``trade``
    rows (a trade study added, removed or changed: its statement's text in ``old`` and
    ``new``) and the ``caution``.  Columns ``old``, ``new`` and ``change`` hold the numbers."""
    from .render import write_csv

    rows = []
    for e in diff["steps"]:
        old, new, ch = e["old"] or {}, e["new"] or {}, e.get("change") or {}
        base = {"record": "step", "name": e["name"], "status": e["status"],
                "renamed_from": e.get("renamed_from"), "kind": (new or old).get("kind"),
                "at_old": old.get("at"), "at_new": new.get("at")}
        for q in STEP_QUANTITIES:
            if q in old or q in new:
                rows.append({**base, "quantity": q, "old": old.get(q), "new": new.get(q),
                             "change": ch.get(q)})
    for key, *_ in TOTALS:
        rows.append({"record": "total", "name": "total", "quantity": key,
                     "old": (diff["old"] or {}).get(key), "new": (diff["new"] or {}).get(key),
                     "change": (diff.get("change") or {}).get(key)})
    for key, default in (("gravity", "point-mass"), ("burns", "impulsive")):
        model = diff.get(key) or {}  # the model of each side, as a row of the totals
        if model.get("old", default) != model.get("new", default):
            rows.append({"record": "total", "name": "total", "quantity": key,
                         "old": model.get("old", default), "new": model.get("new", default)})
    for how, f in _findings_lines(diff):
        rows.append({"record": "finding", "name": ", ".join(f["steps"]), "status": how,
                     "severity": f["severity"], "rule": f["rule"], "message": f["message"]})
    for t in diff.get("trades", []):  # trade studies price nothing: their text
        rows.append({"record": "trade", "name": t["name"], "status": t["status"],
                     "quantity": "text", "old": t["old"], "new": t["new"]})
    if diff.get("error"):
        rows.append({"record": "error", "status": diff["error"]["side"],
                     "message": diff["error"]["message"]})
    rows.append({"record": "caution", "message": _caution(diff)})
    return write_csv(rows, DIFF_CSV)
