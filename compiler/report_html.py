"""One self-contained HTML file for a budget review: `apsidal report` for a plan and
`apsidal diff --format html` for a revision (docs/pictures.md).

Everything is in the file: the pictures as inline SVG, the style sheet inline, no script
at all, no font, image, style or link fetched from anywhere, so the file reads the same
from a mail attachment, a CI artefact or a machine with no network.  The tables are the
same numbers as `apsidal run` and `apsidal diff` print (through ``textfmt``), and every
page carries the caution of the budget.
"""

from __future__ import annotations

import html
import re

from . import draw, pictures
from .budget import CAUTION
from .render import check_text, orbit_text
from .textfmt import duration, sig

CSS = """
:root { --ink: #222; --muted: #666; --rule: #ddd; --band: #f6f6f4; --warn: #882255;
        --ok: #117733; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff;
       font: 15px/1.45 "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; }
main { max-width: 1180px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 1.5em; margin: 0 0 4px; }
h2 { font-size: 1.15em; margin: 32px 0 10px; padding-bottom: 4px;
     border-bottom: 2px solid var(--ink); }
.meta { color: var(--muted); margin: 0 0 12px; }
.caution { border-left: 4px solid var(--warn); background: #fbf3f6; padding: 8px 12px;
           margin: 12px 0; }
table { border-collapse: collapse; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 9px; border-bottom: 1px solid var(--rule); vertical-align: top; }
th { text-align: left; font-weight: 600; background: var(--band); }
td.n, th.n { text-align: right; white-space: nowrap; }
.scroll { overflow-x: auto; }
table.rows td { white-space: nowrap; }
.chip { display: inline-block; width: 0.8em; height: 0.8em; margin-right: 6px;
        border: 1px solid #0003; vertical-align: -0.05em; }
.pass { color: var(--ok); font-weight: 600; }
.fail { color: var(--warn); font-weight: 600; }
.status-changed td { background: #fdf7e3; }
.status-added td { background: #e9f5ec; }
.status-removed td { background: #f8e9ee; text-decoration: line-through; }
.status-moved td { background: #e8f3f8; }
.status-same td { color: var(--muted); }
figure { margin: 0 0 18px; }
figure svg { max-width: 100%; height: auto; display: block; }
figcaption { color: var(--muted); font-size: 0.9em; }
.pair { display: flex; flex-wrap: wrap; gap: 16px; }
.pair figure { flex: 1 1 480px; min-width: 0; }
.finding { margin: 10px 0 18px; }
.finding p { margin: 2px 0; }
pre { background: var(--band); padding: 8px 10px; overflow-x: auto; font-size: 0.85em;
      line-height: 1.35; }
pre .add { color: #0b5b24; background: #e6f4ea; }
pre .del { color: #7a1f3d; background: #f9e6ec; }
pre .hunk { color: var(--muted); }
footer { margin-top: 36px; color: var(--muted); font-size: 0.9em; }
@media print { h2 { break-after: avoid; } figure, .finding { break-inside: avoid; } }
"""

_XML_HEAD = re.compile(r"<\?xml[^>]*\?>\s*|<!DOCTYPE[^>]*>\s*", re.DOTALL)
_METADATA = re.compile(r"<metadata>.*?</metadata>\s*", re.DOTALL)
_NAMESPACES = re.compile(r'\s+xmlns(?::\w+)?="[^"]*"')
_IDS = re.compile(r'(\bid="|url\(#|xlink:href="#|href="#)([^")]+)')


def inline_svg(svg: bytes, prefix: str, label: str) -> str:
    """A matplotlib SVG as an element of an HTML page: no XML prologue, document type,
    metadata or namespace declarations (an HTML parser needs none, and they are the only
    addresses in the file), every id prefixed so that pictures sharing a page keep theirs
    apart, and a title for readers that do not see it."""
    text = svg.decode("utf-8")
    text = _METADATA.sub("", _XML_HEAD.sub("", text))
    text = _NAMESPACES.sub("", text, count=0)
    text = _IDS.sub(lambda m: m.group(1) + prefix + m.group(2), text)
    text = text.replace("<svg ", f'<svg role="img" aria-label="{html.escape(label)}" ', 1)
    return text.strip()


def _e(x) -> str:
    return html.escape(str(x), quote=True)


def _figure(fig, prefix: str, caption: str) -> str:
    svg = inline_svg(draw.render(fig, "svg"), prefix, caption)
    return (f'<figure id="{prefix}figure">{svg}\n'
            f"<figcaption>{_e(caption)}</figcaption></figure>")


def _chip(colours: dict, name: str) -> str:
    colour = colours.get(name)
    return f'<span class="chip" style="background:{colour}"></span>' if colour else ""


def _totals_rows(report: dict) -> list[tuple[str, str]]:
    t = report["totals"]
    rows = [("total delta-v", f"{sig(t['dv_m_s'])} m/s"),
            ("delta-v with margin", f"{sig(t['dv_with_margin_m_s'])} m/s"),
            ("propellant used", f"{sig(t['propellant_kg'])} kg"),
            ("propellant left", f"{sig(t['propellant_left_kg'])} kg"),
            ("final mass", f"{sig(t['final_mass_kg'])} kg"),
            ("delta-v capacity left", f"{sig(t['dv_capacity_left_m_s'])} m/s"),
            ("reserve", f"{sig(t['reserve_m_s'])} m/s: "
                        + ("covered" if t["reserve_met"] else "NOT covered")),
            ("elapsed", duration(t["elapsed_s"]))]
    if t.get("allowances_m_s"):
        rows.insert(2, ("of which allowances", f"{sig(t['allowances_m_s'])} m/s"))
    if t.get("residual_kg"):
        rows.append(("residual (unusable)", f"{sig(t['residual_kg'])} kg"))
    if t.get("propellant_needed_kg") is not None:
        rows.append(("propellant needed (size)", (f"{sig(t['propellant_needed_kg'])} kg"
                     f" of {sig(t['load_kg'])} kg loaded")))
    return rows


def _fit_text(report: dict) -> str:
    from .budget import shortfall_text

    if report.get("feasible", True):
        return '<p class="pass">The load flies the plan with its margins and reserve.</p>'
    return f'<p class="fail">The plan does not fit its load: {_e(shortfall_text(report))}</p>'


STEP_HEADINGS = ("#", "step", "kind", "at", "Δv m/s", "Δv+margin m/s", "propellant kg",
                 "mass after kg", "orbit after: alt. km x km, incl. deg", "elapsed")


def _step_row(s: dict, colours: dict) -> str:
    priced = s["kind"] in ("burn", "allow")
    prop = (sig(s["propellant_kg"]) + ("" if s.get("covered", True) else "*")) if priced \
        else ""
    cells = [f'<td class="n">{s["index"]}</td>',
             f"<td>{_chip(colours, s['name'])}{_e(s['name'])}</td>",
             f"<td>{_e(s['kind'])}</td>", f"<td>{_e(s['at'])}</td>",
             f'<td class="n">{sig(s["dv_m_s"]) if priced else ""}</td>',
             f'<td class="n">{sig(s["dv_with_margin_m_s"]) if priced else ""}</td>',
             f'<td class="n">{prop}</td>',
             f'<td class="n">{sig(s["mass_after_kg"])}</td>',
             f"<td>{_e(orbit_text(s['orbit_after']))}</td>",
             f'<td class="n">{_e(duration(s["elapsed_s"]))}</td>']
    return f'<tr id="step-{s["index"]}">' + "".join(cells) + "</tr>"


def _table(headings, rows: list[str], numeric=()) -> str:
    head = "".join(f'<th{" class=n" if i in numeric else ""}>{_e(h)}</th>'
                   for i, h in enumerate(headings))
    # a row is one line, as on the terminal: a wide table scrolls in its box instead
    return (f'<div class="scroll"><table class="rows"><thead><tr>{head}</tr></thead><tbody>\n'
            + "\n".join(rows) + "\n</tbody></table></div>")


def _expectations(report: dict) -> str:
    items = []
    for s in report["steps"]:
        for c in s.get("checks", []):
            mark = '<span class="pass">pass</span>' if c["passed"] else \
                '<span class="fail">FAIL</span>'
            items.append(f"<li>{mark} {_e(s['name'])}: {_e(check_text(c))}</li>")
    if not items:
        return "<p>The plan states no expectations.</p>"
    return "<ul>\n" + "\n".join(items) + "\n</ul>"


def _diff_lines(text: str) -> str:
    out = []
    for line in text.splitlines():
        cls = ("hunk" if line.startswith("@@") else "add" if line.startswith("+") and not
               line.startswith("+++") else "del" if line.startswith("-") and not
               line.startswith("---") else None)
        out.append(f'<span class="{cls}">{_e(line)}</span>' if cls else _e(line))
    return "\n".join(out)


def _finding(f: dict, k: int) -> str:
    saving = ""
    if f.get("saves_m_s") is not None:
        saving = f" (saves {sig(f['saves_m_s'])} m/s, {sig(f['saves_kg'])} kg)"
    sev = "fail" if f["severity"] == "error" else ""
    parts = [f'<div class="finding" id="finding-{k}">',
             (f'<p><strong class="{sev}">{_e(f["severity"])}</strong> '
             f'<code>{_e(f["rule"])}</code> [{_e(", ".join(f["steps"]))}]{_e(saving)}</p>'),
             f"<p>{_e(f['message'])}</p>"]
    parts += [f"<p>note: {_e(n)}</p>" for n in f.get("notes", [])]
    if f.get("diff"):
        parts.append("<details open><summary>the rewrite, priced and proven</summary>"
                     f"<pre>{_diff_lines(f['diff'])}</pre></details>")
    parts.append("</div>")
    return "\n".join(parts)


def _findings(findings: list[dict] | None, report: dict, cut: list[str]) -> str:
    if findings is None:
        own = report.get("findings", [])
        head = ("<p>The `check` rules were not run (<code>--no-findings</code>); the plan's "
                "own findings, as <code>apsidal run</code> reports them:</p>")
        return head + ("\n".join(_finding(f, k) for k, f in enumerate(own, 1))
                       or "<p>None.</p>")
    out = [_finding(f, k) for k, f in enumerate(findings, 1)] or [
        ("<p>No finding: <code>apsidal check</code> found no cheaper plan and nothing "
        "inconsistent.</p>")]
    if cut:
        out.append(f"<p>Cut short by the time limit (not every candidate proven): "
                   f"{_e(', '.join(cut))}.</p>")
    return "\n".join(out)


def _bodies(report: dict) -> str:
    """The bodies the chain picture is drawn around: one panel each (legs)."""
    names = [report["body"]["name"]] + [s["body"] for s in report["steps"] if s["kind"] == "leg"]
    return names[0] if len(names) == 1 else (", then ".join(names) + ", a panel each")


def _page(title: str, body: list[str], caution: str = CAUTION) -> str:
    from .cli import version

    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title>", f"<style>{CSS}</style>", "</head>", "<body><main>",
        *body,
        (f'<footer><p class="caution"><strong>Caution.</strong> {_e(caution)}</p>'
        f"<p>Written by apsidal {_e(version())}.</p></footer>"),
        "</main></body>", "</html>", ""])


def plan_page(result, report: dict, findings: list[dict] | None = None,
              cut: list[str] = ()) -> str:
    """The review page of one priced plan (``findings``: `check`'s, None when skipped)."""
    from .picture_cli import picture

    colours = pictures.colours(pictures.priced_names(report))
    body = [
        f"<header><h1>Delta-v budget: {_e(report['plan'])}</h1>",
        (f'<p class="meta">{_e(report["source"])} · around {_e(report["body"]["name"])} · '
        f'craft {_e(report["craft"]["name"])}, dry {sig(report["craft"]["dry_kg"])} kg, '
        f'propellant {sig(report["craft"]["propellant_kg"])} kg · margin '
        f'{sig(report["margin_pct"])} %</p></header>'),
        f'<p class="caution"><strong>Caution.</strong> {_e(report["caution"])}</p>',
        '<section id="totals"><h2>Totals</h2>',
        _table(("total", "value"), [f"<tr><td>{_e(k)}</td><td class=n>{_e(v)}</td></tr>"
                                    for k, v in _totals_rows(report)]),
        _fit_text(report), "</section>",
        '<section id="pictures"><h2>Pictures</h2>',
        _figure(picture("chain", result, report, colours=colours, title=""), "chain-",
                f"The orbits of the plan to scale around {_bodies(report)}, seen "
                f"from above the plane of its (each phase's) start orbit: dashed, each orbit "
                f"in the colour of "
                "the step that made it; solid, the arcs coasted; circles, the burns, "
                "numbered as in the table."),
        _figure(picture("waterfall", result, report, colours=colours, title=""),
                "waterfall-", "Delta-v of each burn and allowance (striped), margin "
                "as a pale tint on top, adding up to the total; the load's delta-v capacity "
                "in this order and that capacity less the reserve as lines."),
        _figure(picture("mass", result, report, colours=colours, title=""), "mass-",
                "Mass and usable propellant left against elapsed time; each burn, drop "
                "and allowance a step."),
        "</section>",
        '<section id="budget"><h2>Budget, step by step</h2>',
        _table(STEP_HEADINGS, [_step_row(s, colours) for s in report["steps"]],
               numeric=(0, 4, 5, 6, 7, 9)),
        "<p>* the load no longer covers this step; it is priced as if the tanks held the "
        "rest.</p>" if not report.get("feasible", True) else "",
        "</section>",
        '<section id="expectations"><h2>Expectations</h2>', _expectations(report),
        "</section>",
        '<section id="findings"><h2>Findings of check</h2>',
        _findings(findings, report, list(cut)), "</section>",
    ]
    return _page(f"Delta-v budget: {report['plan']}", body, report["caution"])


def diff_page(diff: dict, old: dict, new: dict, old_label: str, new_label: str) -> str:
    """The review page of a revision: totals before and after, the steps that changed
    highlighted, the two waterfalls side by side (a step keeps its colour in both)."""
    from .diff_render import (
        STEP_COLUMNS,
        _finding_text,
        _findings_lines,
        _step_cells,
        _step_label,
        _total_cells,
        _where,
        headline,
        shown_totals,
    )

    colours = pictures.colours(pictures.priced_names(old) + pictures.priced_names(new))
    totals = [f"<tr><td>{_e(label)}</td>"
              + "".join(f"<td class=n>{_e(c)}</td>" for c in _total_cells(diff, key, d, u))
              + "</tr>" for key, label, u, d in shown_totals(diff)]
    steps = []
    for e in diff["steps"]:
        side = e["new"] or e["old"]
        cells = [e["status"], f"{side['kind']} {_step_label(e)}", _where(e), *_step_cells(e)]
        chip = _chip(colours, side["name"])
        tds = [f"<td>{_e(cells[0])}</td>", f"<td>{chip}{_e(cells[1])}</td>",
               f"<td>{_e(cells[2])}</td>"] + [f"<td class=n>{_e(c)}</td>" for c in cells[3:]]
        steps.append(f'<tr class="status-{e["status"]}">' + "".join(tds) + "</tr>")
    changed = sum(1 for e in diff["steps"] if e["status"] != "same")
    falls = []
    for report, label, prefix in ((old, old_label, "old-"), (new, new_label, "new-")):
        fig = draw.waterfall_figure(pictures.waterfall(report), colours, label, width=6.4)
        total = sig(report["totals"]["dv_with_margin_m_s"])
        falls.append(_figure(fig, prefix, f"{label}: delta-v {total} m/s with margin"))
    found = _findings_lines(diff)
    body = [
        f"<header><h1>Budget change: {_e(headline(diff))}</h1>",
        (f'<p class="meta">old: {_e(old_label)} ({_e(old["plan"])}) · new: {_e(new_label)} '
        f'({_e(new["plan"])})</p></header>'),
        f'<p class="caution"><strong>Caution.</strong> {_e(diff.get("caution", CAUTION))}</p>',
        '<section id="totals"><h2>Totals before and after</h2>',
        _table(("total", "old", "new", "change"), totals, numeric=(1, 2, 3)), "</section>",
        '<section id="steps"><h2>Steps</h2>',
        (f"<p>{changed} of {len(diff['steps'])} steps changed, added, removed or moved "
        "(highlighted).</p>"),
        _table(STEP_COLUMNS, steps, numeric=(3, 4, 5, 6, 7, 8)), "</section>",
        '<section id="pictures"><h2>Where the delta-v goes, before and after</h2>',
        '<div class="pair">', *falls, "</div></section>",
    ]
    if found:
        body += ['<section id="findings"><h2>Findings</h2><ul>']
        body += [f"<li>{_e(how)}: {_e(_finding_text(f))}</li>" for how, f in found]
        body += ["</ul></section>"]
    return _page(f"Budget change: {old_label} -> {new_label}", body,
                 diff.get("caution", CAUTION))
